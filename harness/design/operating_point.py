"""DC operating points of a scenario's plant under compensation, linearised for the loop model."""
import math

from harness.plant.roots import brentq

from harness.plant.loads import LAMP_R_EXPONENT, lamp_steady_u
from harness.design.loop_model import OperatingPoint

#: Fixed-point iterations (with damping 1/2) for the compensated operating point.
ITERATIONS = 200


def load_values(load):
    """Distinct main load quantities a scenario visits (A, ohm, W or rated W), in first-seen order.

    Parameters
    ----------
    load : harness.scenario.specs.LoadSpec
    """
    vals = [load.value] + [v for _, v in load.steps] + [i for _, i in load.profile]
    out = []
    for v in vals:
        if v not in out:
            out.append(v)
    return out


def load_current(load, value, v_load):
    """Steady current (A) and incremental conductance (S) of ``load`` at ``value`` and ``v_load`` (V).

    The conductance is the one the load shows over a measurement window (milliseconds): zero
    for constant current, 1/R resistive, -P/V**2 constant power; a lamp's filament resistance
    does not follow a window-rate change (its thermal time constant is tens of ms), so it shows
    its hot resistance, I/V (an approximation when the window is as long as the time constant).
    """
    v = max(v_load, 1e-9)
    if load.kind == "constant_current":
        return value, 0.0
    if load.kind == "resistive":
        return v / value, 1.0 / value
    if load.kind == "constant_power":
        return value / v, -value / (v * v)
    r_hot = load.rated_v ** 2 / value
    r = r_hot * lamp_steady_u(v / load.rated_v) ** LAMP_R_EXPONENT
    return v / r, 1.0 / r


def current_at(scenario, value, v_load):
    """Supply current (A) at load ``value`` with the load end at ``v_load`` (V): the load's own
    current plus the capacitor's leakage. At ``v_load = target_v`` it is the current the load
    draws once compensated (a lamp or a resistor more than at its sagging uncompensated voltage,
    a constant-power load less)."""
    leak = scenario.load_end.leakage_ohm
    return load_current(scenario.load, value, v_load)[0] + (v_load / leak if leak else 0.0)


def correction_at_target(scenario, cfg, r_ohm):
    """Largest correction (V) the law applies over the load values with the load end at target:
    k * (R + Z - esr_allowance) * I at each load's compensated current (end_real_ohm for Z)."""
    leak, t = scenario.load_end.leakage_ohm, cfg.target_v
    g_leak = 1.0 / leak if leak else 0.0
    out = 0.0
    for value in load_values(scenario.load):
        i, g = load_current(scenario.load, value, t)
        z = end_real_ohm(scenario.load_end, cfg.perturbation_hz, g + g_leak)
        out = max(out, cfg.compensation * max(r_ohm + z - cfg.esr_allowance_ohm, 0.0) * (i + g_leak * t))
    return out


def _load_voltage(load, value, vs, r, g_leak):
    """Highest load-end voltage (V) that satisfies vs - r * I(V) = V; 0 when none does."""
    def f(v):
        return vs - r * (load_current(load, value, v)[0] + g_leak * v) - v
    if f(vs) >= 0.0:
        return vs
    lo, hi, n = 0.0, vs, 400
    for j in range(1, n + 1):
        v = vs * (1.0 - j / n)
        if f(v) >= 0.0:
            lo = v
            break
        hi = v
    else:
        return 0.0
    return brentq(f, lo, hi, xtol=1e-12)


def end_real_ohm(load_end, f_hz, g_s):
    """Real part (ohm) of the load end at ``f_hz``: ESR plus the capacitor's reactance, in parallel
    with the load's incremental conductance ``g_s`` (S; negative for a constant-power load).
    Circuit algebra: Z = Zc / (1 + g Zc), Zc = ESR + 1 / (j w C)."""
    zc = load_end.esr_ohm + 1.0 / (1j * 2.0 * math.pi * f_hz * load_end.capacitance_f)
    return float((zc / (1.0 + g_s * zc)).real)


def pert_for(cfg, r_ohm, i_a):
    """Perturbation amplitude (V peak) the algorithm settles to at estimate ``r_ohm``, current ``i_a``."""
    return min(max(cfg.pert_fraction * r_ohm * i_a, cfg.pert_min_v), cfg.pert_max_v)


def correction_ceiling_v(cfg, r_ohm, i_a):
    """Highest correction (V) the command carries at estimate ``r_ohm`` and current ``i_a``:
    corr_max_v, within the headroom max_v - target_v less the perturbation's peak that rides on
    top of it (algo.step.corr_ceiling)."""
    return min(cfg.corr_max_v, max(0.0, cfg.max_v - cfg.target_v - pert_for(cfg, r_ohm, i_a)))


def operating_point(scenario, cfg, value, r_ohm=None):
    """Compensated operating point of ``scenario`` at load ``value`` under AlgoConfig ``cfg``.

    The correction is k * (R + Z - esr_allowance) * I, clamped to [0, correction_ceiling_v],
    with Z the load end's share of the estimate (end_real_ohm: ESR and the
    capacitor in parallel with the load's incremental resistance at the perturbation; the loop
    model adds the sampling's own small part).

    Parameters
    ----------
    scenario : harness.scenario.specs.Scenario
    cfg : algo.config.AlgoConfig
    value : float
        Main load quantity (A, ohm, W or rated W).
    r_ohm : float, optional
        Cable loop resistance, ohm; the scenario's own by default.
    """
    r = scenario.cable.resistance_ohm if r_ohm is None else r_ohm
    le = scenario.load_end
    g_leak = 1.0 / le.leakage_ohm if le.leakage_ohm else 0.0
    sense_gain = 1.0 + scenario.sensing.gain_error      # scales the measured current
    corr = 0.0
    for _ in range(ITERATIONS):
        v = _load_voltage(scenario.load, value, cfg.target_v + corr, r, g_leak)
        i, g = load_current(scenario.load, value, v)
        i += g_leak * v
        r_comp = max(r + end_real_ohm(le, cfg.perturbation_hz, g + g_leak) - cfg.esr_allowance_ohm, 0.0)
        top = correction_ceiling_v(cfg, r + le.esr_ohm, i)
        new = min(max(cfg.compensation * sense_gain * r_comp * i, 0.0), top)
        if abs(new - corr) < 1e-12:
            break
        corr = 0.5 * (corr + new)
    i_load, g = load_current(scenario.load, value, v)
    return OperatingPoint(r_ohm=r, l_h=scenario.cable.inductance_h, c_f=le.capacitance_f,
                          esr_ohm=le.esr_ohm, g_s=g + g_leak,
                          omega_rad_s=2.0 * math.pi * scenario.supply.loop_bandwidth_hz,
                          i_a=i_load + g_leak * v, v_load_v=v)
