"""``linedrop bench --spread``: wall time of ``linedrop spread`` on the demo's [spread] table.

Runs the draws as ``linedrop spread`` does (same batches, same local worker processes, the
compiled loop) in a scratch folder with an empty cache, so every draw is simulated, and reports
the wall time beside the target (10,000 draws of a 1 s scenario within TARGET_S).
"""
import os
import tempfile
import time

from harness.cli.spread import MAX_BATCH, jobs_for, nominal_of
from harness.scenario.read import DEMO
from harness.spread.evaluate import evaluate
from harness.tune.runner import Cache, Runner

#: 10,000 draws of a 1 s scenario should take at most this long (s).
TARGET_S = 60.0
TARGET_DRAWS = 10_000


def measure(draws=TARGET_DRAWS, workers=2, progress=True):
    """{"spread_draws", "spread_duration_s", "spread_wall_s", "spread_draws_per_s", target keys}."""
    nominal, _ = nominal_of(DEMO, None)
    t0 = time.perf_counter()
    jobs = jobs_for(nominal, nominal.run.seed, draws, "c")
    with tempfile.TemporaryDirectory() as tmp:
        runner = Runner(Cache(os.path.join(tmp, "cache.jsonl")), workers=workers, progress=progress,
                        evaluate=evaluate, desc="bench spread", max_chunk=MAX_BATCH)
        try:
            runner.run(jobs)
        finally:
            runner.close()
    wall = time.perf_counter() - t0
    scaled = wall * TARGET_DRAWS / draws * 1.0 / nominal.run.duration_s
    return {"spread_draws": draws, "spread_duration_s": nominal.run.duration_s, "spread_workers": workers,
            "spread_wall_s": wall, "spread_draws_per_s": draws / wall,
            "spread_10000_draws_of_1s_wall_s": scaled, "spread_target_s": TARGET_S,
            "spread_target_met": scaled <= TARGET_S}
