"""The command responds to the data: it rises with the measured drop and falls back without a swing.

Open-loop synthetic inputs: the current swings in phase with the perturbation
reference, as it does through a resistive cable into a load capacitor that is
an AC short. The expected correction is computed by hand from Ohm's law.
"""
import numpy as np
import pytest

from algo.config import AlgoConfig
from harness.loop.replay import replay

CFG = AlgoConfig()
V_LSB = CFG.v_full_scale_v / 4096
I_LSB = CFG.i_full_scale_a / 4096
DAC_LSB = CFG.dac_full_scale_v / 4096


def _synthetic(r_ohm, i_load_a, swing_a, n_windows=80):
    """Supply-side codes for a cable of r_ohm carrying i_load_a with a swing of swing_a peak."""
    t = np.arange(n_windows * CFG.window_samples)
    s = np.sin(2 * np.pi * t / CFG.period_samples)
    i = i_load_a + swing_a * s
    v = 22.0 + r_ohm * i                      # load end held at 22 V by the capacitor
    return (np.round(v / V_LSB).astype(np.uint16), np.round(i / I_LSB).astype(np.uint16))


@pytest.mark.parametrize("backend", ["model", "c"])
@pytest.mark.parametrize("r_ohm, i_load_a", [(0.5, 1.0), (1.5, 1.0), (1.5, 2.0)])
def test_correction_settles_at_k_times_the_drop(backend, r_ohm, i_load_a):
    v, i = _synthetic(r_ohm, i_load_a, swing_a=0.1 * i_load_a)
    cmds, trace = replay(backend, CFG, v, i, with_state=True)
    want_v = CFG.compensation * r_ohm * i_load_a
    got_v = (cmds[-1] - round(CFG.target_v / DAC_LSB)) * DAC_LSB
    # Perturbation is at most pert_max_v peak on the last sample; the estimate is exact to a few LSB.
    assert abs(got_v - want_v) <= CFG.pert_max_v + 2 * DAC_LSB
    corr_v = trace["corr"][-1] / 2 ** 4 * DAC_LSB
    assert corr_v == pytest.approx(want_v, rel=0.02, abs=2 * DAC_LSB)


@pytest.mark.parametrize("backend", ["model", "c", "ideal"])
def test_correction_decays_to_zero_when_the_swing_disappears(backend):
    v1, i1 = _synthetic(1.0, 1.5, swing_a=0.15, n_windows=60)
    v2, i2 = _synthetic(1.0, 1.5, swing_a=0.0, n_windows=20)
    _, trace = replay(backend, CFG, np.concatenate([v1, v2]), np.concatenate([i1, i2]),
                      with_state=True)
    w = CFG.window_samples
    assert trace["corr"][60 * w - 1] > 0
    after = trace["corr"][(60 + CFG.fault_windows) * w:]
    assert np.all(after == 0)
