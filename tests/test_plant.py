"""Plant against analytic circuit responses and scipy's discrete simulation."""

import numpy as np
import pytest
from scipy import signal

from harness.plant.plant import Plant
from harness.scenario.specs import LoadSpec
from support.plant_factory import make_scenario


def run(plant, command, n):
    """Step ``plant`` ``n`` samples with a constant command; stack v_load, i_supply, v_supply."""
    obs = [plant.step(command) for _ in range(n)]
    t = np.array([o.t_s for o in obs])
    return t, np.array([o.v_load_v for o in obs]), np.array([o.i_supply_a for o in obs]), \
        np.array([o.v_supply_v for o in obs])


def test_rc_step_matches_analytic_charging_curve():
    """Ideal source stepping to V into series R and C (L = 0, no load).

    Source: first-order RC step response v = V (1 - exp(-t / RC)), i = V/R exp(-t / RC)
    (any circuits text, e.g. Horowitz & Hill, The Art of Electronics, 3rd ed., section 1.4;
    cited from memory). Tolerance 1e-6 of V.
    """
    r, c, v = 2.0, 1e-3, 10.0
    p = Plant([make_scenario(r=r, c=c)])
    p.reset_cold()
    t, vl, i, _ = run(p, v, 32000 // 10)
    assert np.max(np.abs(vl[:, 0] - v * (1 - np.exp(-t / (r * c))))) < 1e-6 * v
    assert np.max(np.abs(i[:, 0] - v / r * np.exp(-t / (r * c)))) < 1e-6 * v / r


def test_rlc_step_matches_analytic_underdamped_response():
    """Ideal source stepping to V into series R, L, C (underdamped).

    Source: series RLC step response v_C = V [1 - exp(-a t)(cos wd t + a/wd sin wd t)],
    i = V/(L wd) exp(-a t) sin wd t, a = R/2L, wd = sqrt(1/LC - a^2) (e.g. Nilsson & Riedel,
    Electric Circuits, chapter 8; cited from memory). Tolerance 1e-6 of V.
    """
    r, l, c, v = 0.5, 1e-3, 1e-3, 10.0
    p = Plant([make_scenario(r=r, l=l, c=c)])
    p.reset_cold()
    t, vl, i, _ = run(p, v, 32000 // 20)
    a = r / (2 * l)
    wd = np.sqrt(1 / (l * c) - a * a)
    v_ref = v * (1 - np.exp(-a * t) * (np.cos(wd * t) + a / wd * np.sin(wd * t)))
    i_ref = v / (l * wd) * np.exp(-a * t) * np.sin(wd * t)
    assert np.max(np.abs(vl[:, 0] - v_ref)) < 1e-6 * v
    assert np.max(np.abs(i[:, 0] - i_ref)) < 1e-6 * v / r


def _hand_model(r, l, c, esr, g, omega):
    """State space written out by hand: x = [v_int, i, v_c], u = [v_cmd, i_load]."""
    k = 1.0 / (1.0 + esr * g)  # load-end node: v_L = k (esr (i - i_load) + v_c)
    a = np.array([[-omega, 0, 0],
                  [1 / l, -(r + k * esr) / l, -k / l],
                  [0, (1 - g * k * esr) / c, -g * k / c]])
    b = np.array([[omega, 0], [0, k * esr / l], [0, (-1 + g * k * esr) / c]])
    cm = np.array([[1, 0, 0], [0, 1, 0], [0, k * esr, k]])
    d = np.array([[0, 0], [0, 0], [0, -k * esr]])
    return a, b, cm, d


def test_plant_matches_scipy_zoh_simulation_of_same_model():
    """Inner loop, inductance, ESR, leakage and a resistive plus stepped current load.

    Source: scipy.signal.cont2discrete(method="zoh") and scipy.signal.dlsim of the same
    state-space model, written out independently above. Tolerance 1e-9 relative.
    """
    r, l, c, esr, r_load, leak, bw, fs = 1.2, 50e-6, 470e-6, 0.1, 20.0, 1000.0, 500.0, 32000.0
    steps = ((0.002, 0.5), (0.004, 0.2), (0.006, 0.8))
    load = LoadSpec("constant_current", 0.0, cutoff_v=0.0, steps=steps)
    g = 1.0 / leak + 1.0 / r_load  # the resistive load rides on the leakage conductance
    p = Plant([make_scenario(r=r, l=l, c=c, esr=esr, leak=1.0 / g, bw=bw, load=load, rate=fs)])
    p.reset_cold()
    n = 320
    rng = np.random.default_rng(7)
    cmd = rng.uniform(20.0, 26.0, n)
    t = np.arange(n) / fs
    i_load = np.zeros(n)
    for ts, v in steps:
        i_load[t >= ts] = v
    xs = []
    for k in range(n):
        p.step(cmd[k])
        xs.append(p.x[0].copy())
    a, b, cm, d = _hand_model(r, l, c, esr, g, 2 * np.pi * bw)
    ad, bd, cd, dd, _ = signal.cont2discrete((a, b, cm, d), 1 / fs, method="zoh")
    u = np.stack([cmd, i_load], axis=1)
    _, _, x_ref = signal.dlsim((ad, bd, cd, dd, 1 / fs), np.vstack([u, u[-1:]]), x0=np.zeros(3))
    xs = np.array(xs)
    assert np.allclose(xs, x_ref[1:], rtol=1e-9, atol=1e-9 * 24.0)


def test_expm_batch_matches_scipy_expm():
    """Source: scipy.linalg.expm (Higham 2005 scaling and squaring) on well-scaled and stiff
    random matrices, including norms far above the Pade(13) bound. Tolerance 1e-12 relative."""
    from scipy.linalg import expm

    from harness.plant.linear_model import expm_batch

    rng = np.random.default_rng(3)
    for scale in (1e-4, 1.0, 30.0, 3e3):
        m = rng.standard_normal((5, 6, 6)) * scale
        m[:, :, 3:] = 0.0  # augmented form: inputs have no dynamics
        m -= 2 * scale * np.eye(6)  # keep it stable so the entries stay in range
        ref = np.array([expm(x) for x in m])
        got = expm_batch(m)
        assert np.allclose(got, ref, rtol=1e-12, atol=1e-12 * np.abs(ref).max())
