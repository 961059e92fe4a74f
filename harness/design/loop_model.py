"""Window-rate small-signal model of plant plus algorithm: closed-loop poles, margins, convergence.

One step of the model is one measurement window of ``W`` samples. The plant is the harness's
own linear model (harness.plant.linear_model.continuous_model: supply inner loop, cable R and L,
load capacitor with ESR, the load's incremental conductance), discretised exactly per sample
with a zero-order hold; the window map follows from powers and geometric sums of the per-sample
matrix, so the window-mean current is the mean of the W samples the algorithm really takes.

State ``z = [x, u, r]``: plant state deviation at the window start (V, A, V), held correction
deviation ``u`` (V) and estimate deviation ``r`` (ohm). Per window, with g = 2**-smoothing_shift,
h = 2**-r_filter_shift and K = k * (R0 - esr_allowance):

    x' = Phi x + Gu u + Gd d                     (d: load-current step, A)
    I  = Hx x + Hu u + Hd d                       (window-mean supply current deviation, A)
    Rr = Lx x + Lu u + Ld d + rho                 (raw estimate deviation, ohm; rho: cable change)
    r' = (1 - h) r + h Rr
    u' = (1 - g) u + g (K I + k I0 r')            (target uses the freshly updated estimate)

Two feedback paths raise the command when the command rises: the capacitor's charging current
enters the window mean (K I), and the decaying charging transient leaks into the demodulated
current, biasing the raw estimate (the L rows). A constant-power load adds a negative
incremental conductance. Small-signal only: clamps, quantisation, window classification and
the perturbation amplitude's own adaptation are left out (documented limits of the analysis).
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
    r0_ohm: float        # raw estimate at the operating point: Re(V/I) at the perturbation
    x0_ohm: float        # its quadrature part, ohm
    stable: bool         # the plant alone is stable (a constant-power load can make it not)


@dataclass(frozen=True)
class LoopAnalysis:
    """Closed loop at one operating point and configuration."""
    a: np.ndarray             # closed-loop window matrix over z = [x, u, r]
    b: np.ndarray             # inputs [d_load_a, rho_ohm]
    c: np.ndarray             # outputs [mean load voltage (V), correction (V)]
    poles: np.ndarray
    spectral_radius: float
    stability_margin: float   # 1 - spectral radius
    gain_margin: float        # factor on k at which the loop turns unstable (inf if none found)
    convergence_windows: float
    convergence_s: float
    window_s: float
    plant: WindowPlant


def _active_states(l_h, omega):
    """Indices of the harness model's states that are real for these elements."""
    return [i for i, on in ((0, omega > 0), (1, l_h > 0), (2, True)) if on]


def window_plant(op, cfg, pert_v, leak=True):
    """Window map of the plant at ``op`` for AlgoConfig ``cfg`` with perturbation ``pert_v`` (V peak).

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
    n, w_len, eye = len(keep), cfg.window_samples, np.eye(len(keep))
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
    q_i = pert_v * w_len * resp[1] / 2j                                 # steady demodulated current
    if leak:
        row = (c[0] - zp * c[1]) @ sum_rot / q_i
        lx, lin = row.real, (-row @ x_inf).real
    else:
        lx, lin = np.zeros(n), np.zeros(2)
    return WindowPlant(phi=ad_w, gu=gam[:, 0], gd=gam[:, 1], hx=hx, hu=hin[0], hd=hin[1], vx=vx,
                       vu=vin[0], vd=vin[1], lx=lx, lu=lin[0], ld=lin[1], r0_ohm=float(zp.real),
                       x0_ohm=float(zp.imag), stable=stable)


def loop_gains(cfg, wp, i0_a, scale=1.0):
    """Gains (K, kI0, g, h) of the correction and estimate paths; ``scale`` multiplies k."""
    k = cfg.compensation * scale
    r_comp = wp.r0_ohm - cfg.esr_allowance_ohm
    active = r_comp > 0.0                      # below the allowance the target is clamped at zero
    big_k = k * r_comp if active else 0.0
    k_i0 = k * i0_a if active else 0.0
    return big_k, k_i0, 2.0 ** -cfg.smoothing_shift, 2.0 ** -cfg.r_filter_shift


def open_loop(cfg, wp, i0_a, scale=1.0):
    """Loop broken at the correction target: matrices (A, B, C) over z = [x, u, r], input tau (V).

    The output is the target the algorithm would compute from the window; closing the loop is
    positive feedback, tau = output.
    """
    big_k, k_i0, g, h = loop_gains(cfg, wp, i0_a, scale)
    n = wp.phi.shape[0]
    a = np.zeros((n + 2, n + 2))
    a[:n, :n], a[:n, n] = wp.phi, wp.gu
    a[n, n] = 1.0 - g
    a[n + 1, :n], a[n + 1, n], a[n + 1, n + 1] = h * wp.lx, h * wp.lu, 1.0 - h
    b = np.zeros((n + 2, 1))
    b[n, 0] = g
    c = np.zeros((1, n + 2))
    c[0, :n] = big_k * wp.hx + k_i0 * h * wp.lx
    c[0, n] = big_k * wp.hu + k_i0 * h * wp.lu
    c[0, n + 1] = k_i0 * (1.0 - h)
    return a, b, c


def closed_loop(cfg, wp, i0_a, scale=1.0):
    """Closed-loop window matrices (A, B, C): inputs [d_load_a, rho_ohm], outputs [v_load, corr]."""
    a_ol, b_ol, c_ol = open_loop(cfg, wp, i0_a, scale)
    big_k, k_i0, g, h = loop_gains(cfg, wp, i0_a, scale)
    n = wp.phi.shape[0]
    a = a_ol + b_ol @ c_ol
    b = np.zeros((n + 2, 2))
    b[:n, 0] = wp.gd
    b[n + 1, 0], b[n + 1, 1] = h * wp.ld, h
    b[n, 0] = g * (big_k * wp.hd + k_i0 * h * wp.ld)
    b[n, 1] = g * k_i0 * h
    c = np.zeros((2, n + 2))
    c[0, :n], c[0, n] = wp.vx, wp.vu
    c[1, n] = 1.0
    return a, b, c


def _radius(cfg, wp, i0_a, scale):
    a, _, _ = closed_loop(cfg, wp, i0_a, scale)
    return float(np.max(np.abs(np.linalg.eigvals(a))))


def gain_margin(cfg, wp, i0_a, sense_gain=1.0):
    """Smallest factor on the loop gain at which the closed loop is unstable; inf if none found.

    The loop gain is k * sense_gain; the factor is scanned on a log grid from 1e-3 to
    GAIN_SCAN_MAX, then the first crossing is bisected to 0.1 %. Below 1 means the
    configuration is already unstable; 0 means the plant alone is.
    """
    if not wp.stable:
        return 0.0
    grid = np.geomspace(1e-3, GAIN_SCAN_MAX, 121)
    prev = 0.0
    for m in grid:
        if _radius(cfg, wp, i0_a, m * sense_gain) >= 1.0:
            lo, hi = prev, m
            while hi - lo > 1e-3 * hi:
                mid = 0.5 * (lo + hi)
                lo, hi = (lo, mid) if _radius(cfg, wp, i0_a, mid * sense_gain) >= 1.0 else (mid, hi)
            return hi
        prev = m
    return float("inf")


def analyse(op, cfg, pert_v, leak=True, sense_gain=1.0):
    """Closed-loop poles, margins and convergence at operating point ``op`` (see LoopAnalysis).

    Parameters
    ----------
    op : OperatingPoint
    cfg : algo.config.AlgoConfig
    pert_v : float
        Perturbation amplitude, V peak.
    leak : bool
        Model the charging transient's leak into the estimate.
    sense_gain : float
        1 + the common gain error of the voltage and current sensing (reads high above 1): it
        leaves the estimate alone but scales the measured current, hence the loop gain.
    """
    wp = window_plant(op, cfg, pert_v, leak)
    a, b, c = closed_loop(cfg, wp, op.i_a, sense_gain)
    poles = np.linalg.eigvals(a)
    rho = float(np.max(np.abs(poles)))
    window_s = cfg.window_samples / cfg.sample_rate_hz
    if rho < 1.0:
        windows = float(np.log(SETTLE_FRACTION) / np.log(rho)) if rho > 0 else 1.0
    else:
        windows = float("inf")
    return LoopAnalysis(a=a, b=b, c=c, poles=poles, spectral_radius=rho, stability_margin=1.0 - rho,
                        gain_margin=gain_margin(cfg, wp, op.i_a, sense_gain), convergence_windows=windows,
                        convergence_s=windows * window_s, window_s=window_s, plant=wp)
