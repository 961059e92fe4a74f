"""Run spread draws in batched closed loop and take each draw's figures.

A chunk of draws runs as one batch (harness.loop.closed_loop.stream, the compiled loop with
the C algorithm where it can); each draw's figures come from the same accumulator
``linedrop simulate`` reports with (harness.loop.metrics.Accumulator), so a draw written out as
a scenario file gives the same figures in ``simulate``. A draw's figures do not depend on the
other draws of its batch (every instance of a batch is stepped on its own).
"""
from dataclasses import dataclass
import hashlib

from harness.loop.closed_loop import sample_times, stream
from harness.loop.metrics import Accumulator

#: Bump when the meaning of a cached row changes.
CACHE_VERSION = 1
#: Samples per chunk handed from the loop to the accumulators (bounds the memory of a batch).
CHUNK_SAMPLES = 8192
#: The channels the accumulator reads (harness.loop.metrics.Accumulator.add; no window outcomes).
CHANNELS = ("v_supply_v", "i_supply_a", "v_load_v", "correction_v", "r_estimate_ohm")


@dataclass(frozen=True)
class DrawJob:
    """Draw ``index`` (its ``values``, harness.spread.draws.draw_values) as ``scenario``, on ``backend``."""
    scenario: object
    index: int
    values: dict
    backend: str = "c"

    @property
    def key(self):
        text = repr((CACHE_VERSION, self.backend, self.index, replace_source(self.scenario)))
        return hashlib.sha256(text.encode("utf-8")).hexdigest()[:32]


def replace_source(sc):
    """``sc`` without its file name (a moved scenario file keeps its cache) nor its [spread] table,
    as a comparable tuple of everything a run depends on."""
    return (sc.supply, sc.cable, sc.load_end, sc.load, sc.sensing, sc.run, sc.faults,
            tuple(sorted(sc.algorithm.items())))


def figures(metrics, target_v):
    """A draw's spec figures from simulate's metrics: load error (mV, magnitude), overshoot above
    target (% of target, 0 when the load never exceeds it), settling after the last event (ms;
    None when the load never stays inside the band)."""
    settle = metrics["settling_s"]
    return {"error_mv": abs(metrics["load_error_v"]) * 1e3,
            "overshoot_pct": max(0.0, metrics["max_load_v"] - target_v) / target_v * 100.0,
            "settle_ms": None if settle is None else settle * 1e3}


def evaluate(jobs):
    """Rows (dicts: key, index, the drawn values and the figures) of ``jobs``, run as one batch."""
    scenarios = [j.scenario for j in jobs]
    fs = scenarios[0].sensing.sample_rate_hz
    t_end_s = float(sample_times(int(round(scenarios[0].run.duration_s * fs)) - 1, 1, fs)[0])
    accs = [Accumulator(sc, t_end_s, b) for b, sc in enumerate(scenarios)]

    def sink(k0, t_s, channels):
        for acc in accs:
            acc.add(t_s, channels)

    run = stream(scenarios, sink, backend=jobs[0].backend, compensation="linedrop",
                 channels=CHANNELS, chunk_samples=CHUNK_SAMPLES)
    rows = []
    for b, (job, acc) in enumerate(zip(jobs, accs)):
        m = acc.result(run.r_cable_ohm[b])
        rows.append({"key": job.key, "index": job.index, **job.values,
                     **figures(m, job.scenario.supply.target_v),
                     "load_error_v": m["load_error_v"], "max_load_v": m["max_load_v"]})
    return rows
