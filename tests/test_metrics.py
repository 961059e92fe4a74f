"""The improvement and convergence figures of harness/loop/metrics.py on hand-made waveforms, worked
by hand from their definitions there: improvement = |R I| / |target - tail-mean load| (infinite at
no error), converged = settled and the tail-mean error within SETTLE_BAND of target."""
import math

import numpy as np
import pytest

from harness.loop.metrics import Accumulator
from support.plant_factory import make_scenario

N = 1000
T_S = np.arange(N) / 1000.0          # 1 kHz for a second; the tail is the last 20 %


def _result(v_tail, v_last=None, target=25.0):
    """Figures of a load 5 V low for the first 100 ms, then at ``v_tail``; 2 A on a 1 ohm cable."""
    v = np.where(T_S < 0.1, target - 5.0, v_tail)
    if v_last is not None:
        v[-1] = v_last
    ch = {"v_load_v": v, "i_supply_a": np.full(N, 2.0), "v_supply_v": np.full(N, target + 2.0),
          "correction_v": np.zeros(N), "r_estimate_ohm": np.ones(N)}
    acc = Accumulator(make_scenario(target=target, max_v=target + 5.0), T_S[-1])
    acc.add(T_S, {k: x[:, None] for k, x in ch.items()})
    return acc.result(1.0)


@pytest.mark.parametrize("v_tail, improvement", [(24.9, 2.0 / 0.1), (25.1, 2.0 / 0.1), (25.0, math.inf)],
                         ids=["load_low", "load_high", "no_error"])
def test_improvement_is_the_uncompensated_drop_over_the_load_error(v_tail, improvement):
    m = _result(v_tail)
    assert m["uncompensated_drop_v"] == 2.0
    assert m["improvement"] == pytest.approx(improvement, rel=1e-9)


@pytest.mark.parametrize("v_tail, v_last, converged", [
    (24.9, None, True),        # settled at 0.1 s, 0.1 V off: inside 1 % of 25 V
    (24.75, None, True),       # exactly 1 % off (0.25 V): still inside
    (24.0, None, False),       # 1 V off: settled is never reached
    (25.0, 20.0, False),       # the last sample out of the band: not settled, whatever the mean
], ids=["inside", "at_the_band", "outside", "last_sample_out"])
def test_converged_needs_the_run_settled_and_the_tail_mean_inside_the_band(v_tail, v_last, converged):
    m = _result(v_tail, v_last)
    assert m["converged"] is converged
    if v_last is None and converged:
        assert m["settling_s"] == pytest.approx(0.1)
