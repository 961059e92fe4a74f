"""Every bound the proof suite states, in one place, with what it guarantees and which test proves it.

The numbers are promises about the algorithm run with the settings the design calculator
recommends (harness.design.calculator.recommend) on any plant the sizing rules admit
(harness.proof.strategies.plants). harness/proof/PROOFS.md lists them with the tests; a test may only use
a bound through this module. Units are in the names; "window" is one measurement window of the
configuration under test.
"""
import math

import numpy as np

from harness.design.calculator import LIGHT_LOAD_SHARE, RIPPLE_FRACTION
from harness.scenario.algo_setup import algo_config

#: Windows from a steady start (supply at target, estimate and correction zero) within which the
#: estimate and the load voltage settle. Guarantees: after this many windows R_SETTLE_REL and
#: the load tolerance hold. Proved by tests/test_proof_props.py::test_converges_*.
SETTLE_WINDOWS = 48

#: A lamp's filament follows the supply with its own thermal time constant; for a lamp load the
#: settle bound is SETTLE_WINDOWS windows or this many thermal time constants, whichever is longer.
LAMP_SETTLE_TAUS = 5.0

#: The correction's zero cancels the cable-capacitor pole, so a disturbance (a restart, a load
#: step) still decays with (R + ESR) * C: the settle bound is at least this many of those time
#: constants plus as many of the correction's own (exp(-6) leaves 0.25 % of the first error).
SETTLE_RC_TAUS = 6.0

#: Windows after SETTLE_WINDOWS over which the settled figures are averaged and checked.
CHECK_WINDOWS = 8

#: Settle tolerance of the estimate: |R_hat - Re Z| <= this share of Re Z (plus R_LSB_SLACK
#: estimate LSBs and the cable's drift over R_TRACK_WINDOWS), where Re Z = R_cable + ESR + the
#: load's small share (measured_r_ohm). The correction uses R_hat - esr_allowance, so the same
#: tolerance holds against R_cable + ESR - allowance. Proved by test_converges_*.
R_SETTLE_REL = 0.05

#: Estimate LSBs allowed on top of R_SETTLE_REL (quantisation of the Q r_frac estimate).
R_LSB_SLACK = 2

#: Windows of cable drift the estimate may lag by (the estimate filter's memory).
R_TRACK_WINDOWS = 16

#: Load tolerance: |mean V_load - expected| <= this share of (R_cable + ESR) * I, where expected
#: is target - (1 - k) * drop (k: compensation, the share of the drop the design corrects) less
#: the residual a load-shunted ESR leaves (expected_load_v, measured_r_ohm) and the ADC's gain
#: and offset errors are added as the correction they bias (load_tolerance_v).
#: Proved by test_converges_*.
LOAD_TOL_REL = 0.05

#: DAC LSBs allowed on top of the load tolerance (command quantisation).
DAC_LSB_SLACK = 2

#: No sustained oscillation: over CHECK_WINDOWS the load voltage, averaged over each perturbation
#: period (so the perturbation's own ripple is left out), swings peak to peak by less than this
#: share of the cable drop (plus DAC_LSB_SLACK codes, plus the current-noise spread the per-period
#: law passes on, correction_noise_v). The correction itself moves every period with the
#: measured current, which is its job; a loop that rings shows at the load. Proved by
#: test_converges_*.
OSCILLATION_REL = 0.05

#: Peak-to-peak of a Gaussian over a check span, in standard deviations (a few thousand periods
#: at most stay inside +-4 sigma; common practice, no published source).
NOISE_PP_SIGMAS = 8.0


def correction_noise_v(cfg, sensing, r_ohm):
    """Peak-to-peak spread (V) the per-period correction law passes on from current-ADC noise.

    Each period's error reads the period-mean current, whose noise is the ADC noise plus its
    quantisation (1/12 LSB**2) over sqrt(period) samples; the law moves the correction by
    (kp + ki) times the estimate times that noise (algo.step.correct).
    """
    i_lsb = cfg.i_full_scale_a / (1 << cfg.adc_bits)
    sigma = math.sqrt(sensing.noise_lsb_rms ** 2 + 1.0 / 12.0) * i_lsb / math.sqrt(cfg.period_samples)
    tau = cfg.loop_tau_s
    kp = min(r_ohm * cfg.capacitance_f / tau, cfg.kp_max)
    ki = cfg.period_samples / cfg.sample_rate_hz / tau
    return NOISE_PP_SIGMAS * (kp + ki) * r_ohm * sigma

#: Windows after a cable-open or capacitor-open fault starts by which the correction is exactly
#: zero: the configured fault_windows plus this many (the window the fault lands in and one
#: more). It then stays zero for as long as the fault lasts. Proved by
#: tests/test_proof_fallback_props.py.
FAULT_EXTRA_WINDOWS = 2

#: Windows after the load is disconnected by which the correction has decayed to the residue the
#: current ADC's offset leaves (k * R_hat * offset current) plus DAC_LSB_SLACK codes. Proved by
#: tests/test_proof_fallback_props.py.
LOAD_OFF_WINDOWS = 24

#: Overshoot margin: the load never exceeds target (or the settled voltage, where a load-shunted
#: ESR leaves it above target) + the correction in force before the event +
#: this share of target (perturbation ripple, at most harness.design.calculator.RIPPLE_FRACTION, and
#: settling) + the passive LC ring of a load step, |dI| * sqrt(L / C) + the ripple the converters'
#: floor forces beyond RIPPLE_FRACTION (ripple_excess_v; `linedrop design` warns about it). Proved by
#: test_proof_fallback_props.py and test_proof_transient_props.py.
OVERSHOOT_REL = 0.01

#: Windows after a fault clears or a load step within which the loop re-converges (same
#: tolerances as SETTLE_WINDOWS). Proved by test_proof_fallback_props.py.
RECOVER_WINDOWS = SETTLE_WINDOWS

#: Transient estimate move: a load step landing anywhere in a window moves the settled estimate
#: by at most this share of R_cable + ESR (plus R_LSB_SLACK LSBs). Proved by
#: tests/test_proof_transient_props.py.
TRANSIENT_R_REL = 0.10


def settle_s(scenario, window_s):
    """Time (s) by which the settle bound applies to ``scenario`` (SETTLE_WINDOWS, SETTLE_RC_TAUS,
    LAMP_SETTLE_TAUS); it is also the recovery bound after a fault ends."""
    t = SETTLE_WINDOWS * window_s
    rc = (scenario.cable.resistance_ohm + scenario.load_end.esr_ohm) * scenario.load_end.capacitance_f
    tau = algo_config(scenario).loop_tau_s if scenario.algorithm else 0.0
    t = max(t, SETTLE_RC_TAUS * (rc + tau))
    if scenario.load.kind == "lamp":
        t = max(t, LAMP_SETTLE_TAUS * scenario.load.thermal_tau_s)
    return t


def light_load_a(cfg, scenario, r_ohm):
    """Current (A) below which the load is light for the method: the perturbation floor's
    current swing is more than LIGHT_LOAD_SHARE of it, the unipolar current ADC clips the swing
    at code 0 and the correction falls back toward zero (a period with a current code 0 tracks a
    zero drop). `linedrop design` warns about such loads in the same terms. Below it the
    settled load is promised only between the uncompensated voltage and the expected one
    (settled checks in tests/support/proof_support.py), never above.

    Parameters
    ----------
    cfg : AlgoConfig
    scenario : harness.scenario.specs.Scenario
    r_ohm : float
        Loop resistance at the check (R_cable + ESR), ohm.
    """
    w = 2 * math.pi * cfg.perturbation_hz
    le = scenario.load_end
    z = abs(r_ohm + 1j * w * scenario.cable.inductance_h + 1 / (1j * w * le.capacitance_f))
    return cfg.pert_min_v / z / LIGHT_LOAD_SHARE


def bare_load_v(cfg, pert_v, r_cable_ohm, i_a):
    """Load voltage (V) with no correction and the perturbation running at amplitude ``pert_v``
    (V): target_v less the cable drop, less what the supply's ceiling max_v cuts off the top of
    the perturbation when it is larger than the headroom (the mean of min(A sin, headroom) over a
    period, on a fine grid)."""
    theta = 2 * math.pi * (np.arange(4096) + 0.5) / 4096
    clipped = np.minimum(pert_v * np.sin(theta), cfg.max_v - cfg.target_v)
    return cfg.target_v + float(clipped.mean()) - r_cable_ohm * i_a


def runs_away_without_capacitor(scenario):
    """True where the plant has no stable operating point once the load capacitor is open: a
    constant-power load draws i = P / v, an incremental resistance of -v**2 / P, and behind a
    cable with inductance L the series loop L di/dt = -(R - v**2 / P) i grows when v**2 / P at
    target exceeds R (the first-order circuit's own pole, no project source). No supply can hold
    such a load; with the capacitor open the proof checks only that the correction is forced to
    zero, not the load voltage or the recovery (the plant's state has run off to infinity)."""
    ld = scenario.load
    if ld.kind != "constant_power" or scenario.cable.inductance_h <= 0:
        return False
    p_max = max([ld.value] + [v for _, v in ld.steps])
    return p_max > 0 and scenario.supply.target_v ** 2 / p_max > scenario.cable.resistance_ohm


def r_lsb_ohm(cfg):
    """One estimate LSB, ohm, for AlgoConfig ``cfg``."""
    return cfg.v_full_scale_v / cfg.i_full_scale_a / (1 << cfg.r_frac_bits)


def dac_lsb_v(cfg):
    """One command LSB, V."""
    return cfg.dac_full_scale_v / (1 << cfg.dac_bits)


def r_tolerance_ohm(cfg, r_true_ohm, drift_ohm=0.0):
    """Allowed |R_hat - r_true| after settling (R_SETTLE_REL), ohm; ``drift_ohm``: cable change to allow for."""
    return R_SETTLE_REL * r_true_ohm + R_LSB_SLACK * r_lsb_ohm(cfg) + abs(drift_ohm)


def measured_r_ohm(scenario, r_ohm, f_hz, g_s):
    """Real part of V/I the supply sees at ``f_hz`` (what the estimate converges to), ohm.

    Z = R + j w L + (ESR + 1/(j w C)) || (1/G), with G (S) the load's incremental conductance
    plus leakage. For ESR << 1/G it is R + ESR + the load's small share (DESIGN.md section 2);
    a large ESR is partly shunted by the load, which is the residual the ESR allowance leaves.
    """
    le = scenario.load_end
    w = 2 * math.pi * f_hz
    g = g_s + (1.0 / le.leakage_ohm if le.leakage_ohm else 0.0)
    y = 1.0 / complex(le.esr_ohm, -1.0 / (w * le.capacitance_f)) + g
    return float((r_ohm + 1j * w * scenario.cable.inductance_h + 1.0 / y).real)


def expected_load_v(cfg, r_cable_ohm, r_measured_ohm, i_a):
    """Settled load voltage, V: target + k (R_measured - allowance) I - R_cable I.

    With R_measured = R_cable + ESR = R_cable + allowance this is target - (1 - k) * drop. The
    correction is capped only by the supply's headroom max_v - target_v: a corr_max_v below what
    the headroom allows is a sizing error, not an excuse.
    """
    corr = cfg.compensation * max(r_measured_ohm - cfg.esr_allowance_ohm, 0.0) * i_a
    return cfg.target_v + min(corr, cfg.max_v - cfg.target_v) - r_cable_ohm * i_a


def load_tolerance_v(cfg, sensing, r_ohm, i_a):
    """Allowed |mean V_load - expected_load_v| after settling, V.

    Parameters
    ----------
    cfg : AlgoConfig
    sensing : harness.scenario.specs.SensingSpec
        Gain error and offset (LSB) of the current channel bias the window-mean current.
    r_ohm : float
        Loop resistance the correction compensates (R_cable + ESR - allowance), ohm.
    i_a : float
        Load current, A.
    """
    return LOAD_TOL_REL * r_ohm * i_a + sensing_bias_v(cfg, sensing, r_ohm, i_a) + DAC_LSB_SLACK * dac_lsb_v(cfg)


def sensing_bias_v(cfg, sensing, r_ohm, i_a):
    """Largest correction error (V) the current ADC's gain error and offset cause at ``i_a`` (A).

    The estimate is a ratio of two channels and does not see them; the window-mean current
    does, and the correction is k * R * I.
    """
    i_lsb = sensing.i_full_scale_a / (1 << sensing.adc_bits)
    return cfg.compensation * r_ohm * (abs(sensing.gain_error) * i_a + abs(sensing.offset_lsb) * i_lsb)


def ripple_excess_v(cfg, scenario):
    """Perturbation ripple at the load (V peak) beyond RIPPLE_FRACTION of target_v, 0 if none.

    The design sizes the perturbation so its ripple at the load stays within RIPPLE_FRACTION of
    target (part of OVERSHOOT_REL); where the converters' floor (pert_min_v) needs more, the
    excess is added to the overshoot margin. The ripple is pert_max_v divided between the loop and
    the capacitor branch: pert * |ESR + 1/(jwC)| / |R + ESR + jwL + 1/(jwC)|.
    """
    w = 2 * math.pi * cfg.perturbation_hz
    le = scenario.load_end
    zc = le.esr_ohm + 1 / (1j * w * le.capacitance_f)
    z = scenario.cable.resistance_ohm + 1j * w * scenario.cable.inductance_h + zc
    return max(0.0, cfg.pert_max_v * abs(zc) / abs(z) - RIPPLE_FRACTION * cfg.target_v)


def overshoot_limit_v(cfg, corr_before_v, bias_v=0.0, d_current_a=0.0, l_h=0.0, c_f=1.0, settled_v=0.0,
                      ripple_v=0.0):
    """Highest load voltage allowed around an event, V (OVERSHOOT_REL, module docstring).

    The base is target_v, or the settled load voltage ``settled_v`` (expected_load_v) where the
    residual of a load-shunted ESR puts it above target.

    Parameters
    ----------
    cfg : AlgoConfig
    corr_before_v : float
        Correction in force before the event (0 for a steady run), V.
    bias_v : float
        sensing_bias_v at the operating point, V.
    d_current_a, l_h, c_f : float
        Load step (A), loop inductance (H) and load capacitance (F) for the passive LC ring.
    ripple_v : float
        ripple_excess_v of the configuration, V.
    """
    ring = abs(d_current_a) * math.sqrt(l_h / c_f) if l_h > 0 else 0.0
    return (max(cfg.target_v, settled_v) + max(corr_before_v, 0.0) + bias_v + OVERSHOOT_REL * cfg.target_v + ring
            + DAC_LSB_SLACK * dac_lsb_v(cfg) + ripple_v)
