"""How long each tune run lasts: every load step and fault kept, the settling tail no shorter
than the spec's checks need."""
from dataclasses import replace
import math
import os

from harness.loop.metrics import TAIL, last_event_s

#: Run length without --quick or --duration-s, s (longer where the checks need it).
DEFAULT_DURATION_S = 0.8


def needed_s(scenario, max_settle_ms):
    """Shortest run (s) whose checks see the whole of ``scenario``'s events and their settling.

    It holds every load step and fault end, then ``max_settle_ms`` for the settling check, and
    the error's tail (the last TAIL of the run, harness.loop.metrics) starts only after that, so
    the error of a load that settles within the spec is measured on the settled load.
    """
    return (last_event_s(scenario) + max_settle_ms / 1e3) / (1.0 - TAIL)


def run_lengths(scenarios, max_settle_ms, quick=False, duration_s=None):
    """The scenarios with ``run.duration_s`` set to their tune run length, and one note per
    scenario whose run is shorter than :func:`needed_s`.

    ``duration_s`` (the user's --duration-s) is taken as given; otherwise a run lasts
    :func:`needed_s` with ``quick`` and at least DEFAULT_DURATION_S without it. No run is longer
    than the scenario's own ``run.duration_s``.
    """
    out, notes = [], []
    for sc in scenarios:
        own = sc.run.duration_s
        need = needed_s(sc, max_settle_ms)
        if duration_s is not None:
            length = min(own, duration_s)
        else:
            length = min(own, need if quick else max(DEFAULT_DURATION_S, need))
        if length < need and not math.isclose(length, need, rel_tol=1e-9):
            why = "--duration-s" if duration_s is not None and duration_s < own else "its own run.duration_s"
            notes.append(f"{os.path.basename(sc.source)}: runs last {length:g} s ({why}), under the "
                         f"{need:g} s that its last load step or fault end ({last_event_s(sc):g} s), "
                         f"--max-settle-ms and the error's tail (the last {TAIL:.0%}) need")
        out.append(replace(sc, run=replace(sc.run, duration_s=length)))
    return out, notes
