"""Time spans a report shades: rejected windows, faults, load steps and current-limit periods.

Every span is ``(start_s, end_s)`` in the run's time (s). Sample k of a run is recorded at
``t_s[k]``, the end of the sample interval ``(t_s[k] - dt, t_s[k]]``, so a run of samples
k0..k1 covers ``(t_s[k0] - dt, t_s[k1]]``.
"""
import numpy as np

from algo.state import STATUS_NAMES, STATUS_NONE, STATUS_VALID

#: A sample is in current limit when its supply current is within this share of the limit.
#: In current limit the plant holds the supply current at the limit exactly (the linear model's
#: current-source mode), and the recorded channel is float32 (relative rounding 6e-8), so 1e-5
#: takes every limited sample and only voltage-mode samples within 10 ppm of the limit besides.
LIMIT_REL_TOL = 1e-5


def sample_runs(mask, t_s):
    """Spans of the runs of True in ``mask`` (bool, same length as ``t_s``), list of (s, s)."""
    mask = np.asarray(mask, dtype=bool)
    if not mask.any():
        return []
    dt = float(t_s[1] - t_s[0]) if len(t_s) > 1 else float(t_s[0])
    edges = np.diff(np.concatenate([[0], mask.astype(np.int8), [0]]))
    starts, ends = np.flatnonzero(edges == 1), np.flatnonzero(edges == -1) - 1
    return [(float(t_s[a]) - dt, float(t_s[e])) for a, e in zip(starts, ends)]


def window_ends(windows):
    """Indices of the samples where the algorithm's window counter moves (a window ends there)."""
    w = np.asarray(windows).astype(np.int64)
    return np.flatnonzero(np.diff(np.concatenate([[0], w])) != 0)


def outcome_per_sample(windows, status):
    """Each sample's window outcome code (algo.state STATUS_*): the status its window ended with.

    A sample belongs to the first window ending at or after it; samples after the last finished
    window get STATUS_NONE.
    """
    status = np.asarray(status).astype(np.int64)
    ends = window_ends(windows)
    j = np.searchsorted(ends, np.arange(status.size), side="left")
    out = np.full(status.size, STATUS_NONE, dtype=np.int64)
    done = j < ends.size
    out[done] = status[ends[j[done]]]
    return out


def rejected_spans(t_s, windows, status):
    """{outcome name: spans} of the windows whose outcome is neither ``valid`` nor ``none``."""
    per_sample = outcome_per_sample(windows, status)
    out = {}
    for code, name in sorted(STATUS_NAMES.items()):
        if code in (STATUS_NONE, STATUS_VALID):
            continue
        spans = sample_runs(per_sample == code, t_s)
        if spans:
            out[name] = spans
    return out


def fault_spans(scenario):
    """(kind, (start_s, end_s)) of each [[fault]], cut at the run's end."""
    end = scenario.run.duration_s
    return [(f.kind, (f.at_s, min(f.until_s, end))) for f in scenario.faults if f.at_s < end]


def load_step_times(scenario):
    """Times (s) of the load's steps that fall inside the run."""
    return [float(t) for t, _ in scenario.load.steps if t < scenario.run.duration_s]


def current_limit_spans(t_s, i_supply_a, limit_a):
    """Spans where the supply current sits at ``limit_a`` (A; None: no limit, no spans).

    No channel records the plant's current-limit mode, so it is derived from the supply
    current: at or above ``limit_a * (1 - LIMIT_REL_TOL)``.
    """
    if limit_a is None:
        return []
    i = np.asarray(i_supply_a, dtype=np.float64)
    return sample_runs(i >= limit_a * (1.0 - LIMIT_REL_TOL), t_s)


def shading(run, b=0):
    """Everything the waveform plot shades for scenario ``b`` of a closed_loop.Run.

    Returns a dict: ``rejected`` ({outcome name: spans}, empty for a baseline), ``faults``
    ([(kind, span)]), ``load_steps`` ([s]) and ``current_limit`` (spans).
    """
    sc = run.scenarios[b]
    ch = run.channels
    rejected = {}
    if "windows" in ch and "status" in ch:
        rejected = rejected_spans(run.t_s, ch["windows"][:, b], ch["status"][:, b])
    return {"rejected": rejected, "faults": fault_spans(sc), "load_steps": load_step_times(sc),
            "current_limit": current_limit_spans(run.t_s, ch["i_supply_a"][:, b],
                                                 sc.supply.current_limit_a)}
