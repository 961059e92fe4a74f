"""Design calculator: size the perturbation, window, gains and word lengths for a scenario's plant.

Rules (each a plain sizing rule; the ones without a published source are marked as such):

* Perturbation frequency f: the capacitor must be an AC short, 1/(2 pi f C) <= R_min / AC_SHORT
  (the brief's sizing rule; the factor 10 is common practice, no published source), which also
  puts f a decade above the R*C corner 1/(2 pi R C); and f <= supply bandwidth / BW_FACTOR
  (same). Within that band f is the geometric middle, as fs / 2**n with 16 <= 2**n <= 256.
* Window: the fewest periods (4 .. 64) whose length is at least R*C / TAU_PER_WINDOW; the loop
  model shows the margin falling as R*C outgrows the window (harness.design.loop_model).
* Gains: the largest compensation in COMPENSATIONS and the smoothing in SMOOTHINGS (fastest
  convergence) whose worst-case gain margin over loads and temperatures is at least GM_TARGET.
* Perturbation amplitude: pert_fraction of R*I, floor a current swing of FLOOR_LSB current-ADC
  LSBs, ceiling the smaller of the 10 % rule at the largest load and a load ripple of
  RIPPLE_FRACTION of target_v (peak).
* Word lengths: ADC bits so the floor swing is FLOOR_LSB codes; r_frac so one LSB of the estimate
  is at most R_RESOLUTION of R_min; corr_frac = smoothing_shift + 2 so the smoothing step does not
  stall above a quarter DAC code; 16-bit table and 32-bit accumulators (the model's widest).
"""
import math
from dataclasses import replace

from algo.config import SETTINGS
from harness.scenario.algo_setup import algo_config
from harness.scenario.conductors import temperature_scale
from harness.design.loop_model import analyse
from harness.design.operating_point import load_values, operating_point

AC_SHORT = 10.0          # capacitor reactance at f at most R_min / this
BW_FACTOR = 10.0         # f at most supply bandwidth / this
L_SHORT = 3.0            # cable reactance wL at f at most R_min / this: the sampled current of an
                         # inductive cable lags the held command and biases Re(V/I) (seen in the
                         # proof suite; common practice, no published source)
TAU_PER_WINDOW = 4.0     # window at least R*C / this
GM_TARGET = 1.25         # room for 25 % loop-gain error (sense gains, ESR, load share of the estimate)
COMPENSATIONS = (0.98, 0.95, 0.9, 0.85, 0.8, 0.7, 0.6, 0.5)
SMOOTHINGS = (1, 2, 3)
FLOOR_LSB = 16.0         # smallest current swing, current-ADC LSBs (common practice, no published source)
RIPPLE_FRACTION = 0.005  # largest perturbation ripple at the load, peak, share of target_v (same)
V_FLOOR_LSB = 10.0       # smallest perturbation, voltage-ADC LSBs: with little ADC noise to
                         # dither it, a few-LSB sine demodulates with a bias of several % (same)
DAC_FLOOR_LSB = 2.0      # smallest perturbation, DAC codes (same)
LIGHT_LOAD_SHARE = 0.5   # largest floor swing as a share of the lightest load current (same)
X_MAX_FACTOR = 3.0       # x_max_ohm at least this multiple of the plant's own |X| at f
R_RESOLUTION = 1e-3      # estimate LSB at most this share of R_min
R_MAX_FACTOR = 2.0       # r_max_ohm = this * (R_max + ESR)
HEADROOM_FACTOR = 1.25   # corr_max_v = this * the largest correction needed (capped by max_v - target_v)


def _clip(key, value):
    s = SETTINGS[key]
    return s.kind(min(max(value, s.lo), s.hi))


def resistance_range(scenario):
    """Loop resistance (ohm) at the start temperature and, if given, at temperature_end_c."""
    c = scenario.cable
    rs = [c.resistance_ohm]
    if c.temperature_end_c is not None:
        rs.append(c.resistance_ohm * float(temperature_scale(c.material, c.temperature_c, c.temperature_end_c)))
    return min(rs), max(rs)


def uncompensated(scenario, cfg, r_ohm):
    """Per load value: current (A) and cable drop (V) with no compensation, at ``r_ohm``."""
    none = cfg.with_(compensation=0.0)
    out = []
    for v in load_values(scenario.load):
        op = operating_point(scenario, none, v, r_ohm)
        out.append({"value": v, "current_a": op.i_a, "drop_v": op.i_a * r_ohm, "load_v": op.v_load_v})
    return out


def needed_current(scenario, loads):
    """Largest load current once compensated, A: a resistive or lamp load draws more at the
    target voltage than at the sagging uncompensated one (bounded as I ~ V; constant power
    draws less, so its uncompensated current already bounds it)."""
    target = scenario.supply.target_v
    return max(x["current_a"] * max(1.0, target / max(x["load_v"], 1e-9)) for x in loads)


def perturbation_floor(scenario, z_mag, i_min):
    """pert_min_v: enough for FLOOR_LSB current-ADC LSBs of swing, V_FLOOR_LSB voltage-ADC LSBs
    and DAC_FLOOR_LSB DAC codes (below those the swing demodulates to nothing), but, where the
    converters allow, no more than half the lightest load current's worth of swing, so the
    unipolar current ADC never clips it at code 0."""
    sen, sup = scenario.sensing, scenario.supply
    i_lsb = sen.i_full_scale_a / (1 << sen.adc_bits)
    v_lsb = sen.v_full_scale_v / (1 << sen.adc_bits)
    dac_lsb = sup.dac_full_scale_v / (1 << sup.dac_bits)
    converters = max(V_FLOOR_LSB * v_lsb, DAC_FLOOR_LSB * dac_lsb)
    return max(converters, min(FLOOR_LSB * i_lsb * z_mag, LIGHT_LOAD_SHARE * i_min * z_mag))


def inductive_limit_hz(scenario, r_min):
    """Highest perturbation frequency at which the cable's wL stays below R_min / L_SHORT, Hz."""
    return r_min / (L_SHORT * 2 * math.pi * scenario.cable.inductance_h)


def pick_frequency(scenario, fs, r_min):
    """(frequency Hz, period samples, sample rate Hz) for the perturbation.

    The band is [f_lo, f_hi]: f_lo puts the capacitor's reactance at R_min / AC_SHORT, f_hi is
    the supply bandwidth / BW_FACTOR (fs / 16 for an ideal supply), lowered where needed so the
    cable's wL stays below R_min / L_SHORT. The period is the power of
    two in [16, 256] whose fs / period lies nearest the band's geometric middle, inside the
    band when one is; when the scenario's rate cannot reach a non-empty band, the rate becomes
    32 samples per period of the middle (rounded to 100 Hz). An empty band (the rules
    conflict) keeps the rate and takes the period nearest the middle; the warnings say so.
    """
    c = scenario.load_end.capacitance_f
    f_lo = AC_SHORT / (2 * math.pi * r_min * c)
    bw = scenario.supply.loop_bandwidth_hz
    f_hi = bw / BW_FACTOR if bw > 0 else fs / 16
    if scenario.cable.inductance_h > 0:
        f_hi = min(f_hi, inductive_limit_hz(scenario, r_min))
    f_mid = math.sqrt(f_lo * f_hi)
    periods = (16, 32, 64, 128, 256)
    fits = [n for n in periods if f_lo <= fs / n <= f_hi] if f_hi >= f_lo else list(periods)
    if fits:
        n = min(fits, key=lambda n: abs(math.log(fs / n / f_mid)))
        return fs / n, n, fs
    rate = min(max(round(f_mid * 32 / 100.0) * 100.0, 1000.0), 1e6)
    return rate / 32, 32, rate


def operating_points(scenario, cfg):
    """Operating points over every load value and both ends of the resistance range."""
    r_min, r_max = resistance_range(scenario)
    return [operating_point(scenario, cfg, v, r) for v in load_values(scenario.load)
            for r in sorted({r_min, r_max})]


def pert_for(cfg, r_ohm, i_a):
    """Perturbation amplitude (V peak) the algorithm settles to at estimate ``r_ohm``, current ``i_a``."""
    return min(max(cfg.pert_fraction * r_ohm * i_a, cfg.pert_min_v), cfg.pert_max_v)


def loop_summary(scenario, cfg):
    """Worst case over operating points of the loop model: dict of margins and convergence."""
    sense_gain = 1.0 + scenario.sensing.gain_error
    worst = None
    for op in operating_points(scenario, cfg):
        an = analyse(op, cfg, pert_for(cfg, op.r_ohm + op.esr_ohm, op.i_a), sense_gain=sense_gain)
        if worst is None or an.spectral_radius > worst["spectral_radius"]:
            worst = {"spectral_radius": an.spectral_radius, "stability_margin": an.stability_margin,
                     "convergence_windows": an.convergence_windows, "convergence_s": an.convergence_s,
                     "poles": an.poles, "gain_margin": an.gain_margin}
        worst["gain_margin"] = min(worst["gain_margin"], an.gain_margin)
        worst["convergence_s"] = max(worst["convergence_s"], an.convergence_s)
    return worst


def recommend(scenario):
    """Recommended [algorithm] settings (dict, AlgoConfig keys) and the sample rate they need (Hz)."""
    base = algo_config(replace(scenario, algorithm={}))
    r_min, r_max = resistance_range(scenario)
    le, sen = scenario.load_end, scenario.sensing
    f, n, fs = pick_frequency(scenario, sen.sample_rate_hz, r_min)
    tau = (r_max + le.esr_ohm) * le.capacitance_f
    ppw = next((p for p in (4, 8, 16, 32, 64) if n * p / fs >= tau / TAU_PER_WINDOW and n * p <= 16384),
               min(64, 16384 // n))
    loads = uncompensated(scenario, base, r_max)
    i_max = needed_current(scenario, loads)
    i_min = min(x["current_a"] for x in loads)
    w = 2 * math.pi * f
    z_mag = abs(r_min + le.esr_ohm + 1j * w * scenario.cable.inductance_h
                + 1 / (1j * w * le.capacitance_f))
    zc_mag = abs(le.esr_ohm + 1 / (1j * w * le.capacitance_f))
    i_lsb = sen.i_full_scale_a / (1 << sen.adc_bits)
    pert_min = perturbation_floor(scenario, z_mag, i_min)
    ripple_cap = RIPPLE_FRACTION * scenario.supply.target_v / zc_mag * z_mag
    pert_max = max(pert_min, min(ripple_cap, 0.1 * (r_max + le.esr_ohm) * i_max))
    # The quadrature part the plant itself shows (cable inductance and the capacitor), with room.
    x_plant = abs(w * scenario.cable.inductance_h - 1.0 / (w * le.capacitance_f))
    v_ratio = sen.v_full_scale_v / sen.i_full_scale_a
    r_frac = min(16, max(8, math.ceil(math.log2(v_ratio / (R_RESOLUTION * r_min)))))
    rec = {
        "period_samples": n, "periods_per_window": ppw, "table_bits": 16, "acc_bits": 32,
        "pert_fraction": 0.1, "pert_min_v": _clip("pert_min_v", pert_min),
        "pert_max_v": _clip("pert_max_v", pert_max), "r_frac_bits": r_frac,
        "r_max_ohm": _clip("r_max_ohm", R_MAX_FACTOR * (r_max + le.esr_ohm)),
        "x_max_ohm": _clip("x_max_ohm", max(3.0 / (w * le.capacitance_f), 0.5 * r_max,
                                            X_MAX_FACTOR * x_plant)),
        "esr_allowance_ohm": _clip("esr_allowance_ohm", le.esr_ohm),
        "r_step_max_ohm": _clip("r_step_max_ohm", max(0.25 * (r_max + le.esr_ohm), 0.01)),
        "swing_min_a": _clip("swing_min_a", FLOOR_LSB / 4 * i_lsb),
        "fault_windows": 6,
    }
    headroom = max(0.0, scenario.supply.max_v - scenario.supply.target_v)
    best = None
    for k in COMPENSATIONS:
        for ss in SMOOTHINGS:
            trial = dict(rec, compensation=k, smoothing_shift=ss, corr_frac_bits=min(8, ss + 2),
                         corr_max_v=_clip("corr_max_v", min(headroom, HEADROOM_FACTOR * k * r_max * i_max)))
            cfg = algo_config(scenario, dict(trial, sample_rate_hz=fs))
            s = loop_summary(scenario, cfg)
            if s["gain_margin"] >= GM_TARGET and (best is None or s["convergence_s"] < best[1]):
                best = (trial, s["convergence_s"])
        if best:
            break
    if best is None:
        best = (trial, None)
    return best[0], fs


def pert_ripple(scenario, cfg, r_est, i_a):
    """Perturbation ripple at the load (V peak-to-peak) and the current swing (A peak)."""
    le = scenario.load_end
    w = 2 * math.pi * cfg.perturbation_hz
    zc = le.esr_ohm + 1 / (1j * w * le.capacitance_f)
    d_i = pert_for(cfg, r_est, i_a) / abs(r_est + zc)
    return 2 * d_i * abs(zc), d_i


def predict(scenario, cfg):
    """Predicted steady figures of configuration ``cfg`` on ``scenario`` (dict, units in keys).

    The load error is target_v - V_load at the compensated operating point, from the
    estimate the loop settles to (cable + ESR + the load's share, harness.design.loop_model), plus a
    quantisation bound: half a DAC LSB plus one estimate LSB times the current.
    """
    sense_gain = 1.0 + scenario.sensing.gain_error
    dac_lsb = cfg.dac_full_scale_v / (1 << cfg.dac_bits)
    r_lsb = cfg.v_full_scale_v / cfg.i_full_scale_a / (1 << cfg.r_frac_bits)
    corr_max = min(cfg.corr_max_v, max(0.0, cfg.max_v - cfg.target_v))
    err, quant, ripple, swing = 0.0, 0.0, 0.0, 0.0
    for op in operating_points(scenario, cfg):
        an = analyse(op, cfg, pert_for(cfg, op.r_ohm + op.esr_ohm, op.i_a), sense_gain=sense_gain)
        r0 = an.plant.r0_ohm
        corr = min(max(cfg.compensation * sense_gain * max(r0 - cfg.esr_allowance_ohm, 0) * op.i_a, 0),
                   corr_max)
        e = op.r_ohm * op.i_a - corr
        if abs(e) > abs(err):
            err = e
        quant = max(quant, dac_lsb / 2 + r_lsb * op.i_a)
        rp, sw = pert_ripple(scenario, cfg, r0, op.i_a)
        ripple, swing = max(ripple, rp), max(swing, sw)
    return {"predicted_load_error_v": float(abs(err) + quant), "load_error_steady_v": float(err),
            "quantisation_error_v": float(quant), "ripple_load_v_pp": float(ripple),
            "current_swing_a": float(swing)}
