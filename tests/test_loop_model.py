"""Window-rate loop model: against a closed-form RC case, python-control, and the time-domain harness."""
import math
import tomllib

import control
import numpy as np
import pytest

from harness.design import loop_model as lm
from harness.scenario.algo_setup import algo_config
from harness.loop.closed_loop import simulate
from harness.design.operating_point import operating_point
from harness.scenario.read import load_scenario, parse_scenario

DEMO = "harness/scenario/scenarios/demo_mast.toml"


def rc_scenario(c_f, gain_error=0.0, ppw=1, ss=2, k=0.98, duration_s=0.6):
    """R = 2 ohm, ideal supply, constant 1.5 A stepping to 2 A at 0.1 s (invented test plant)."""
    text = f"""
[supply]
target_v = 24.0
max_v = 30.0
[cable]
resistance_ohm = 2.0
inductance_h = 0.0
[load_end]
capacitance_f = {c_f}
[load]
kind = "constant_current"
current_a = 1.5
steps = [[0.1, 2.0]]
[sensing]
gain_error = {gain_error}
v_full_scale_v = 60.0
[run]
duration_s = {duration_s}
[algorithm]
periods_per_window = {ppw}
smoothing_shift = {ss}
compensation = {k}
"""
    return parse_scenario(tomllib.loads(text), "rc_test.toml")


def analysis(sc, value=1.5, leak=True):
    cfg = algo_config(sc)
    op = operating_point(sc, cfg, value)
    return lm.analyse(op, cfg, 0.3, leak=leak, sense_gain=1.0 + sc.sensing.gain_error), cfg


def test_poles_match_closed_form_rc_loop():
    """Constant-current load, ideal supply, no ESR or inductance, g = 1, no estimate leak.

    First principles (RC charging v_c -> u with exp(-t/RC), geometric sum of the W samples):
    the correction loop's characteristic polynomial is z**2 - (a + q) z + q with
    a = exp(-W dt / RC), q = K/R * beta, beta = a1 (1 - a1**W) / (W (1 - a1)),
    a1 = exp(-dt / RC); the estimate filter adds the pole 1 - 2**-r_filter_shift.
    """
    sc = rc_scenario(4.7e-3, ss=0)
    an, cfg = analysis(sc, leak=False)
    dt, w, tau = 1 / cfg.sample_rate_hz, cfg.window_samples, 2.0 * 4.7e-3
    a1 = math.exp(-dt / tau)
    beta = a1 * (1 - a1 ** w) / (w * (1 - a1))
    q = cfg.compensation * an.plant.r0_ohm / 2.0 * beta
    a = math.exp(-w * dt / tau)
    expected = np.concatenate([np.roots([1.0, -(a + q), q]), [1 - 2.0 ** -cfg.r_filter_shift]])
    assert np.allclose(np.sort_complex(an.poles), np.sort_complex(expected), atol=1e-9)


def test_closed_loop_poles_agree_with_python_control():
    """python-control (control.ss + control.feedback, sign=+1) closes the same open loop: same poles."""
    sc = load_scenario(DEMO)
    cfg = algo_config(sc)
    for value in (1.5, 2.2):
        op = operating_point(sc, cfg, value)
        wp = lm.window_plant(op, cfg, 0.3)
        a, b, c = lm.open_loop(cfg, wp, op.i_a)
        dt = cfg.window_samples / cfg.sample_rate_hz
        closed = control.feedback(control.ss(a, b, c, 0, dt), 1, sign=1)
        ours = lm.analyse(op, cfg, 0.3).poles
        assert np.allclose(np.sort_complex(control.poles(closed)), np.sort_complex(ours), atol=1e-9)


@pytest.mark.parametrize("c_f,ss", [(4.7e-3, 0), (22e-3, 2), (1e-3, 0)])
def test_gain_margin_agrees_with_python_control(c_f, ss):
    """Our scanned gain margin equals python-control's stability_margins gain margin of -L.

    Positive feedback of L is negative feedback of -L, so control's gain margin (factor on the
    loop gain before a closed-loop pole leaves the unit circle) is the same quantity.
    """
    sc = rc_scenario(c_f, ss=ss)
    an, cfg = analysis(sc)
    a, b, c = lm.open_loop(cfg, an.plant, operating_point(sc, cfg, 1.5).i_a)
    loop = control.ss(a, b, -c, 0, an.window_s)
    gm = control.stability_margins(loop)[0]
    assert an.gain_margin == pytest.approx(gm, rel=2e-3)


def test_unstable_and_stable_configurations_in_the_time_domain():
    """What the model calls unstable rings into the correction clamp in simulate; stable settles.

    Source of the plant behaviour: the harness's exact-ZOH plant (harness.plant.plant) with the
    fixed-point model. A sensing gain error (+20 %, +30 %) raises the loop gain; with
    smoothing_shift 0 and R*C several windows long the model puts a pole outside the unit
    circle, with smoothing_shift 2 inside.
    """
    cases = [(10e-3, 0.2, 0), (10e-3, 0.2, 2), (4.7e-3, 0.3, 0), (4.7e-3, 0.3, 2)]
    scs = [rc_scenario(c, ge, ss=ss) for c, ge, ss in cases]
    verdicts = []
    for sc in scs:
        radii = [analysis(sc, v)[0].spectral_radius for v in (1.5, 2.0)]
        verdicts.append(max(radii) >= 1.0)
    assert verdicts == [True, False, True, False]      # the model separates the pairs
    run = simulate(scs, backend="model", channels=("correction_v",))
    tail = run.t_s > 0.4
    headroom = 30.0 - 24.0
    for b, unstable in enumerate(verdicts):
        corr = run.channels["correction_v"][tail, b]
        if unstable:
            assert np.ptp(corr) > 1.0 and corr.max() > 0.95 * headroom
        else:
            assert np.ptp(corr) < 0.1
