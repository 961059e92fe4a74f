"""Period-rate small-signal model of plant plus correction law: closed-loop poles, margins, convergence.

One step of the model is one perturbation period of ``N`` samples, the rate at which the
correction moves (algo.step.correct). The plant is the harness's own linear model
(harness.plant.linear_model.continuous_model: supply inner loop, cable R and L, load capacitor
with ESR, the load's incremental conductance), discretised exactly per sample with a
zero-order hold; the period map follows from powers and geometric sums of the per-sample
matrix, so the period-mean current is the mean of the N samples the algorithm really takes.

State ``z = [x, u, q]``: plant state deviation at the period start (V, A, V), correction
deviation ``u`` (V) and its integral part ``q`` (V). Per period, with K = s * k * (R0 - esr)
(s the loop-gain factor: 1 + the estimate's relative error), kp = min(s * R0 * C / tau, kp_max)
and ki = T_period / tau:

    x' = Phi x + Gu u + Gd d                     (d: load-current step, A)
    I  = Hx x + Hu u + Hd d                       (period-mean supply current deviation, A)
    e  = K I - u                                  (the law's error: target - V-hat)
    q' = q + ki e
    u' = kp e + q'

The resistance estimate is held: it moves once per window through its filter, on a far slower
time scale than the correction (its transient leak is what the window classification and the
trend removal keep out). Small-signal only: clamps, quantisation, window classification and the
perturbation amplitude's own adaptation are left out (documented limits of the analysis).
"""
from dataclasses import dataclass

import numpy as np

from harness.plant.linear_model import continuous_model, discretise

#: Convergence is counted to this fraction of an initial error.
SETTLE_FRACTION = 0.01
#: Loop-gain multipliers scanned for the gain margin (up to this factor on k).
GAIN_SCAN_MAX = 1000.0


@dataclass(frozen=True)
class OperatingPoint:
    """Linearised plant at one load: values in ohm, H, F, S, rad/s, A, V."""
    r_ohm: float
    l_h: float
    c_f: float
    esr_ohm: float
    g_s: float          # incremental load conductance plus leakage (negative for constant power)
    omega_rad_s: float  # supply inner-loop bandwidth, 0 for an ideal source
    i_a: float          # window-mean supply current at the operating point
    v_load_v: float


@dataclass(frozen=True)
class WindowPlant:
    """Window map of the plant and the algorithm's view of it (see module docstring)."""
    phi: np.ndarray
    gu: np.ndarray
    gd: np.ndarray
    hx: np.ndarray
    hu: float
    hd: float
    vx: np.ndarray       # window-mean load voltage rows
    vu: float
    vd: float
    lx: np.ndarray
    lu: float
    ld: float
    r0_ohm: float        # estimate at the operating point: Re(V/I) of the samples, turned back by
                         # the configured adc_phase_samples
    x0_ohm: float        # its quadrature part, ohm
    lead_samples: float  # phase of the samples' V/I over the continuous plant's Z(jw), samples
    stable: bool         # the plant alone is stable (a constant-power load can make it not)


@dataclass(frozen=True)
class LoopAnalysis:
    """Closed loop at one operating point and configuration."""
    a: np.ndarray             # closed-loop period matrix over z = [x, u, q]
    b: np.ndarray             # input d_load_a
    c: np.ndarray             # outputs [mean load voltage (V), correction (V)]
    poles: np.ndarray
    spectral_radius: float
    stability_margin: float   # 1 - spectral radius
    gain_margin: float        # factor on the estimate at which the loop turns unstable (inf if none)
    low_margin: float         # largest factor below 1 at which it is unstable (0 if none)
    convergence_windows: float  # periods to SETTLE_FRACTION, in windows
    convergence_s: float
    window_s: float
    plant: WindowPlant


def _active_states(l_h, omega):
    """Indices of the harness model's states that are real for these elements."""
    return [i for i, on in ((0, omega > 0), (1, l_h > 0), (2, True)) if on]


def window_plant(op, cfg, pert_v, leak=True, n_samples=None):
    """Block map of the plant at ``op`` for AlgoConfig ``cfg`` with perturbation ``pert_v`` (V peak):
    over one window, or over ``n_samples`` samples (one period for the correction loop).

    Parameters
    ----------
    op : OperatingPoint
    cfg : algo.config.AlgoConfig
        Uses sample_rate_hz, period_samples and periods_per_window.
    pert_v : float
        Perturbation amplitude in the command, V peak (> 0).
    leak : bool
        Include the charging transient's leak into the demodulated estimate.
    """
    a, b, c, d = continuous_model(op.r_ohm, op.l_h, op.c_f, op.esr_ohm, op.g_s, op.omega_rad_s)
    keep = _active_states(op.l_h, op.omega_rad_s)
    a, b, c = a[np.ix_(keep, keep)], b[keep][:, :2], c[:, keep]
    d = d[:, :2]                                   # inputs: command (V), load current drawn (A)
    dt = 1.0 / cfg.sample_rate_hz
    ad, bd = (m[0] for m in discretise(a[None], b[None], dt))
    w_len = cfg.window_samples if n_samples is None else n_samples
    n, eye = len(keep), np.eye(len(keep))
    stable = bool(np.max(np.abs(np.linalg.eigvals(ad))) < 1.0)
    ad_w = np.linalg.matrix_power(ad, w_len)
    x_inf = np.linalg.solve(eye - ad, bd)                       # held-input equilibrium per input
    sum_pow = ad @ (eye - ad_w) @ np.linalg.inv(eye - ad)       # sum_{j=1..W} Ad^j
    theta = 2.0 * np.pi / cfg.period_samples
    wz = np.exp(-1j * theta)
    sum_rot = ad @ (eye - ad_w) @ np.linalg.inv(eye - wz * ad)  # sum_{j=1..W} w^(j-1) Ad^j
    gam = (eye - ad_w) @ x_inf

    def mean_rows(row_c, row_d):
        hx = row_c @ sum_pow / w_len
        hin = -hx @ x_inf + row_c @ x_inf + row_d
        return hx, hin

    hx, hin = mean_rows(c[1], d[1])
    vx, vin = mean_rows(c[2], d[2])
    z = np.exp(1j * theta)
    resp = c @ np.linalg.solve(z * eye - ad, z * bd[:, 0]) + d[:, 0]   # per-sample H(e^{j theta})
    zp = resp[0] / resp[1]
    jw = 1j * theta * cfg.sample_rate_hz
    cont = c @ np.linalg.solve(jw * eye - a, b[:, 0]) + d[:, 0]         # continuous H(jw)
    lead = float(np.angle(zp / (cont[0] / cont[1])) / theta)
    z_est = zp * np.exp(-1j * theta * cfg.adc_phase_samples)
    q_i = pert_v * w_len * resp[1] / 2j                                # steady demodulated current
    if leak:
        row = (c[0] - zp * c[1]) @ sum_rot / q_i
        lx, lin = row.real, (-row @ x_inf).real
    else:
        lx, lin = np.zeros(n), np.zeros(2)
    return WindowPlant(phi=ad_w, gu=gam[:, 0], gd=gam[:, 1], hx=hx, hu=hin[0], hd=hin[1], vx=vx,
                       vu=vin[0], vd=vin[1], lx=lx, lu=lin[0], ld=lin[1], r0_ohm=float(z_est.real),
                       x0_ohm=float(z_est.imag), lead_samples=lead, stable=stable)


def loop_gains(cfg, wp, scale=1.0):
    """Gains (K, kp, ki) of the correction law; ``scale`` multiplies the estimate (1 + its error)."""
    r0 = wp.r0_ohm * scale
    r_comp = r0 - cfg.esr_allowance_ohm
    big_k = cfg.compensation * r_comp if r_comp > 0.0 else 0.0   # below the allowance: no drop
    tau = cfg.loop_tau_s
    kp = min(max(r0, 0.0) * cfg.capacitance_f / tau, cfg.kp_max)
    ki = cfg.period_samples / cfg.sample_rate_hz / tau
    return big_k, kp, ki


def closed_loop(cfg, wp, i0_a=None, scale=1.0):
    """Closed-loop period matrices (A, B, C) over z = [x, u, q]: input d_load_a, outputs
    [period-mean load voltage (V), correction (V)]. ``i0_a`` is unused (kept for callers)."""
    big_k, kp, ki = loop_gains(cfg, wp, scale)
    n = wp.phi.shape[0]
    e_x, e_u, e_d = big_k * wp.hx, big_k * wp.hu - 1.0, big_k * wp.hd
    a = np.zeros((n + 2, n + 2))
    a[:n, :n], a[:n, n] = wp.phi, wp.gu
    a[n, :n], a[n, n], a[n, n + 1] = (kp + ki) * e_x, (kp + ki) * e_u, 1.0
    a[n + 1, :n], a[n + 1, n], a[n + 1, n + 1] = ki * e_x, ki * e_u, 1.0
    b = np.zeros((n + 2, 1))
    b[:n, 0], b[n, 0], b[n + 1, 0] = wp.gd, (kp + ki) * e_d, ki * e_d
    c = np.zeros((2, n + 2))
    c[0, :n], c[0, n] = wp.vx, wp.vu
    c[1, n] = 1.0
    return a, b, c


def _radius(cfg, wp, i0_a, scale):
    a, _, _ = closed_loop(cfg, wp, i0_a, scale)
    return float(np.max(np.abs(np.linalg.eigvals(a))))


def _crossing(cfg, wp, i0_a, sense_gain, lo, hi):
    """Bisect to 0.1 % the factor between stable ``lo`` and unstable ``hi``."""
    while abs(hi - lo) > 1e-3 * max(abs(hi), abs(lo)):
        mid = 0.5 * (lo + hi)
        lo, hi = (lo, mid) if _radius(cfg, wp, i0_a, mid * sense_gain) >= 1.0 else (mid, hi)
    return hi


def gain_margin(cfg, wp, i0_a, sense_gain=1.0):
    """Smallest factor above 1 on the estimate at which the closed loop is unstable; inf if none.

    The factor multiplies the estimate (hence K and kp) on top of sense_gain; it is scanned on a
    log grid from 1 to GAIN_SCAN_MAX, then the first crossing is bisected to 0.1 %. Below 1
    means the configuration is already unstable (the largest stable factor below 1, or 0);
    0 also means the plant alone is.
    """
    if not wp.stable:
        return 0.0
    if _radius(cfg, wp, i0_a, sense_gain) >= 1.0:
        below = [m for m in np.geomspace(1e-3, 1.0, 61)[::-1] if _radius(cfg, wp, i0_a, m * sense_gain) < 1.0]
        return float(below[0]) if below else 0.0
    prev = 1.0
    for m in np.geomspace(1.0, GAIN_SCAN_MAX, 121)[1:]:
        if _radius(cfg, wp, i0_a, m * sense_gain) >= 1.0:
            return _crossing(cfg, wp, i0_a, sense_gain, prev, m)
        prev = m
    return float("inf")


def low_margin(cfg, wp, i0_a, sense_gain=1.0):
    """Largest factor below 1 on the estimate at which the closed loop is unstable; 0 if none.

    A low estimate weakens the cancellation of the correction's own charging current while kp
    stays near R*C / tau, and with the one-period hold the loop can ring (kp (1 - factor) > 1
    at the period rate). Scanned on a grid from 1 down to 1e-3, then bisected to 0.1 %.
    """
    prev = 1.0
    for m in np.geomspace(1e-3, 1.0, 61)[::-1][1:]:
        if _radius(cfg, wp, i0_a, m * sense_gain) >= 1.0:
            return _crossing(cfg, wp, i0_a, sense_gain, prev, m)
        prev = m
    return 0.0


def analyse(op, cfg, pert_v, leak=True, sense_gain=1.0):
    """Closed-loop poles, margins and convergence at operating point ``op`` (see LoopAnalysis).

    Parameters
    ----------
    op : OperatingPoint
    cfg : algo.config.AlgoConfig
    pert_v : float
        Perturbation amplitude, V peak.
    leak : bool
        Unused: the estimate is held in the period model (kept for callers).
    sense_gain : float
        1 + the common gain error of the voltage and current sensing (reads high above 1): it
        leaves the estimate alone but scales the measured current, hence the loop gain.
    """
    wp = window_plant(op, cfg, pert_v, False, n_samples=cfg.period_samples)
    a, b, c = closed_loop(cfg, wp, op.i_a, sense_gain)
    poles = np.linalg.eigvals(a)
    rho = float(np.max(np.abs(poles)))
    window_s = cfg.window_samples / cfg.sample_rate_hz
    if rho < 1.0:
        periods = float(np.log(SETTLE_FRACTION) / np.log(rho)) if rho > 0 else 1.0
    else:
        periods = float("inf")
    windows = periods / cfg.periods_per_window
    return LoopAnalysis(a=a, b=b, c=c, poles=poles, spectral_radius=rho, stability_margin=1.0 - rho,
                        gain_margin=gain_margin(cfg, wp, op.i_a, sense_gain),
                        low_margin=low_margin(cfg, wp, op.i_a, sense_gain), convergence_windows=windows,
                        convergence_s=windows * window_s, window_s=window_s, plant=wp)
