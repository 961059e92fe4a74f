"""Design calculator: size the perturbation, window, gains and word lengths for a scenario's plant.

Rules (each a plain sizing rule; the ones without a published source are marked as such):

* Perturbation frequency f: the capacitor must be an AC short, 1/(2 pi f C) <= R_min / AC_SHORT
  (the method's sizing rule; the factor 10 is common practice, no published source); at least
  MIN_PERIOD samples per period and at most the supply bandwidth (above it the swing only
  shrinks); the cable's wL at most R_min / L_SHORT. Within that band the period (a power of two,
  MIN_PERIOD .. 256) whose |X(f)| = |wL - 1/(wC)| is smallest: the in-phase part is then the
  best-conditioned projection, and a short period also lets the correction move more often.
* Window: PERIODS_PER_WINDOW periods (the estimate is measured slowly; the correction does not
  wait for it).
* Correction law (algo.step.correct): the zero at R*C (capacitance_f = the stated C), and the
  smallest closed-loop time constant tau, from TAU_PERIODS periods and 3 supply time constants
  up in steps of TAU_STEP, whose worst-case gain margin (factor on the estimate the loop
  tolerates, harness.design.loop_model) over loads and temperatures is at least GM_TARGET, and
  which stays stable for an estimate down to LOW_TARGET of the true one; the first is the
  robustness rule tau >~ 2 (GM - 1) R C of the right-half-plane zero a high estimate brings. compensation 1 (the law leaves no steady error), kp_max KP_HEADROOM times the
  nominal gain.
* The ADC's phase (adc_phase_samples): the phase, in samples, of V/I as the sampled supply
  voltage and current show it over the continuous plant's impedance Z(jw) at the perturbation,
  from the harness's plant (a zero-order-held command, both channels sampled at the end of each
  hold; harness.design.loop_model) at the lightest load and the coolest cable. It depends on
  where the ADC samples relative to the DAC update and on how smooth the plant's response is:
  about -0.5 for an ideal source into an inductive or capacitive run, near 0 for a resistive
  one or a slow supply. A real board's trigger timing differs: calibrate it there.
* ESR allowance (esr_allowance_ohm): the load end's share of the estimate at the largest current,
  as the sampled plant shows it (end_share_ohm): the ESR, with the load's incremental resistance
  in parallel (negative for a constant-power load, which raises it), so the correction tracks
  the cable's drop alone.
* Estimate filter (r_filter_shift): the default 1/4 a window, or 1/2 (FAST_FILTER_SHIFT) where the
  estimate taken at the sagged start would put more than START_BIAS_SHARE of target_v into the
  correction (start_bias_v: a heavy constant-power load's share of the estimate grows as its
  voltage sags; with the slower filter the load overshot at the start, finding D11).
* Perturbation amplitude: pert_fraction of R*I, floor a current swing of FLOOR_LSB current-ADC
  LSBs, ceiling the smaller of the 10 % rule at the largest load and a load ripple of
  RIPPLE_FRACTION of target_v (peak).
* Word lengths: ADC bits so the floor swing is FLOOR_LSB codes; r_frac so one LSB of the estimate
  is at most R_RESOLUTION of R_min; corr_frac CORR_FRAC; 16-bit table and 32-bit accumulators
  (the model's widest).
"""
import math
from dataclasses import replace

from algo.config import SETTINGS
from harness.scenario.algo_setup import algo_config
from harness.scenario.conductors import temperature_scale
from harness.design.loop_model import analyse, window_plant
from harness.design.operating_point import correction_ceiling_v, load_values, operating_point, pert_for

AC_SHORT = 10.0          # capacitor reactance at f at most R_min / this
MIN_PERIOD = 8           # samples per perturbation period, at least (common practice, no published source)
PERIODS_PER_WINDOW = 8   # periods per estimate window (same)
TAU_PERIODS = 2.0        # closed-loop time constant at least this many periods (same)
TAU_STEP = 1.25          # tau search step
TAU_MAX_S = 10.0         # give up above this
KP_HEADROOM = 2.0        # kp_max = this * the nominal kp (R_max + ESR) * C / tau
CORR_FRAC = 4            # fraction bits of the correction
L_SHORT = 3.0            # cable reactance wL at f at most R_min / this: the sampled current of an
                         # inductive cable lags the held command and biases Re(V/I) (seen in the
                         # proof suite; common practice, no published source)
GM_TARGET = 1.2          # stable for an estimate 20 % high, and
LOW_TARGET = 0.8         # down to 20 % low: twice the move through a load step that the proof
                         # suite lets a valid window make (harness.proof.bounds.TRANSIENT_R_REL,
                         # 10 %), either way, on top of the sensing gain error and the load end's
                         # share that loop_summary already models at each operating point
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
START_BIAS_SHARE = 0.005  # the start's estimate bias may put at most this share of target_v in
                          # the correction (half the 1 % overshoot margin) with the steady filter;
                          # above it the filter takes FAST_FILTER_SHIFT (common practice, no
                          # published source)
FAST_FILTER_SHIFT = 1     # estimate filter gain 1/2 a window for such plants (default 2: 1/4)
STEP_NOISE_SIGMAS = 6.0  # load-step floor: this many standard deviations of the noise on the
                         # difference of two period-mean currents (a Gaussian passes 6 sigma about
                         # twice in a billion draws: textbook normal tail, no project source)


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


def step_noise_floor_a(scenario, period_samples):
    """Load-step detector floor (A) above the current ADC's noise: STEP_NOISE_SIGMAS standard
    deviations of the difference of two period-mean currents, each the mean of
    ``period_samples`` samples with the ADC's noise (noise_lsb_rms) and its quantisation
    (1/12 LSB squared, the uniform rounding error's variance). Below it the detector would flag
    ADC noise as load steps in every window, and before the first valid window (the swing share
    is zero then) no window would ever be valid."""
    sen = scenario.sensing
    i_lsb = sen.i_full_scale_a / (1 << sen.adc_bits)
    sigma = math.sqrt(sen.noise_lsb_rms ** 2 + 1.0 / 12.0) * i_lsb * math.sqrt(2.0 / period_samples)
    return STEP_NOISE_SIGMAS * sigma


def inductive_limit_hz(scenario, r_min):
    """Highest perturbation frequency at which the cable's wL stays below R_min / L_SHORT, Hz."""
    return r_min / (L_SHORT * 2 * math.pi * scenario.cable.inductance_h)


def pick_frequency(scenario, fs, r_min):
    """(frequency Hz, period samples, sample rate Hz) for the perturbation.

    The band is [f_lo, f_hi]: f_lo puts the capacitor's reactance at R_min / AC_SHORT, f_hi is
    fs / MIN_PERIOD, the supply bandwidth and the frequency where the cable's wL reaches
    R_min / L_SHORT, whichever is lowest. Among the periods (powers of two, MIN_PERIOD .. 256)
    inside the band, the one with the smallest |X(f)|; when none is inside, the rate becomes
    32 samples per period of the band's geometric middle (rounded to 100 Hz); an empty band (the
    rules conflict) keeps the rate and takes the period nearest the middle; the warnings say so.
    """
    c, l_h = scenario.load_end.capacitance_f, scenario.cable.inductance_h
    f_lo = AC_SHORT / (2 * math.pi * r_min * c)
    bw = scenario.supply.loop_bandwidth_hz
    f_hi = fs / MIN_PERIOD if bw <= 0 else min(fs / MIN_PERIOD, bw)
    if l_h > 0:
        f_hi = min(f_hi, inductive_limit_hz(scenario, r_min))
    periods = [n for n in (8, 16, 32, 64, 128, 256) if n >= MIN_PERIOD]

    def x_abs(f):
        w = 2 * math.pi * f
        return abs(w * l_h - 1.0 / (w * c))

    fits = [n for n in periods if f_lo <= fs / n <= f_hi]
    if fits:
        n = min(fits, key=lambda n: (n, x_abs(fs / n)))
        return fs / n, n, fs
    f_mid = math.sqrt(f_lo * max(f_hi, 1e-9))
    if f_hi < f_lo:
        n = min(periods, key=lambda n: abs(math.log(fs / n / f_mid)))
        return fs / n, n, fs
    rate = min(max(round(f_mid * 32 / 100.0) * 100.0, 1000.0), 1e6)
    return rate / 32, 32, rate


def sampling_phase(scenario, settings):
    """adc_phase_samples for ``settings`` (a dict of [algorithm] keys) on the scenario's plant:
    the lead of the samples' V/I over Z(jw) at the lightest load and the coolest cable."""
    cfg = algo_config(scenario, settings)
    r_min, _ = resistance_range(scenario)
    value = min(load_values(scenario.load), key=lambda v: operating_point(scenario, cfg, v, r_min).i_a)
    op = operating_point(scenario, cfg, value, r_min)
    wp = window_plant(op, cfg, pert_for(cfg, op.r_ohm + op.esr_ohm, op.i_a), False,
                      n_samples=cfg.period_samples)
    return wp.lead_samples


def end_share_ohm(scenario, settings):
    """The load end's share of the estimate (ohm) at the largest current: what the estimate
    settles to (harness.design.loop_model, the samples' Re(V/I) turned back by the ADC phase)
    less the cable's resistance.

    It is the ESR in series with the capacitor's reactance, in parallel with the load's incremental
    resistance: a resistive load lowers it a little, a constant-power load (negative incremental
    resistance -V**2 / P) raises it, by 11 % of a 0.058 ohm ESR for 467 W at 16.5 V. Subtracting
    the bare ESR there leaves that excess in the correction, and the load settles high by it
    times the current (finding D11, harness/proof/PROOFS.md).
    """
    cfg = algo_config(scenario, settings)
    best = None
    for op in operating_points(scenario, cfg):
        if best is None or op.i_a > best[0]:
            best = (op.i_a, _share_at(op, cfg))
    return max(best[1], 0.0)


def _share_at(op, cfg):
    """The load end's share of the estimate (ohm) at operating point ``op``: the sampled plant's
    Re(V/I), turned back by the ADC phase (harness.design.loop_model), less the cable."""
    wp = window_plant(op, cfg, pert_for(cfg, op.r_ohm + op.esr_ohm, op.i_a), n_samples=cfg.period_samples)
    return wp.r0_ohm - op.r_ohm


def start_bias_v(scenario, settings):
    """Load-voltage excess (V) the estimate's start bias puts into the correction at first.

    The estimate starts at the uncompensated (sagged) operating point, where a constant-power
    load's incremental resistance -V**2 / P is smaller, so the load end's share of the estimate
    (end_share_ohm) is larger than at target, where the allowance is set. Per load value: that
    excess of the share times the current at target, the largest over load values (0 where the
    share does not grow as the voltage sags: constant-current, resistive and lamp loads).
    """
    cfg = algo_config(scenario, settings)
    sag = cfg.with_(compensation=0.0)
    r = scenario.cable.resistance_ohm
    worst = 0.0
    for v in load_values(scenario.load):
        start, target = (operating_point(scenario, c, v, r) for c in (sag, cfg))
        worst = max(worst, (_share_at(start, sag) - _share_at(target, cfg)) * target.i_a)
    return worst


def operating_points(scenario, cfg):
    """Operating points over every load value and both ends of the resistance range."""
    r_min, r_max = resistance_range(scenario)
    return [operating_point(scenario, cfg, v, r) for v in load_values(scenario.load)
            for r in sorted({r_min, r_max})]


def loop_summary(scenario, cfg):
    """Worst case over operating points of the loop model: dict of margins and convergence."""
    sense_gain = 1.0 + scenario.sensing.gain_error
    worst = None
    for op in operating_points(scenario, cfg):
        an = analyse(op, cfg, pert_for(cfg, op.r_ohm + op.esr_ohm, op.i_a), sense_gain=sense_gain)
        if worst is None or an.spectral_radius > worst["spectral_radius"]:
            worst = {"spectral_radius": an.spectral_radius, "stability_margin": an.stability_margin,
                     "convergence_windows": an.convergence_windows, "convergence_s": an.convergence_s,
                     "poles": an.poles, "gain_margin": an.gain_margin, "low_margin": an.low_margin}
        worst["gain_margin"] = min(worst["gain_margin"], an.gain_margin)
        worst["low_margin"] = max(worst["low_margin"], an.low_margin)
        worst["convergence_s"] = max(worst["convergence_s"], an.convergence_s)
    return worst


def recommend(scenario):
    """Recommended [algorithm] settings (dict, AlgoConfig keys) and the sample rate they need (Hz)."""
    base = algo_config(replace(scenario, algorithm={}))
    r_min, r_max = resistance_range(scenario)
    le, sen = scenario.load_end, scenario.sensing
    f, n, fs = pick_frequency(scenario, sen.sample_rate_hz, r_min)
    ppw = min(PERIODS_PER_WINDOW, 16384 // n)
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
        "step_min_a": _clip("step_min_a", max(base.step_min_a, step_noise_floor_a(scenario, n))),
        "fault_windows": 6,
    }
    headroom = max(0.0, scenario.supply.max_v - scenario.supply.target_v)
    rc = (r_max + le.esr_ohm) * le.capacitance_f
    period_s = n / fs
    bw = scenario.supply.loop_bandwidth_hz
    tau = max(TAU_PERIODS * period_s, 3.0 / (2 * math.pi * bw) if bw > 0 else 0.0)
    rec.update(compensation=1.0, corr_frac_bits=CORR_FRAC,
               corr_max_v=_clip("corr_max_v", min(headroom, HEADROOM_FACTOR * r_max * i_max)),
               capacitance_f=_clip("capacitance_f", le.capacitance_f))
    rec["adc_phase_samples"] = _clip("adc_phase_samples", sampling_phase(scenario, dict(rec, sample_rate_hz=fs)))
    rec["esr_allowance_ohm"] = _clip("esr_allowance_ohm", end_share_ohm(scenario, dict(rec, sample_rate_hz=fs)))
    if start_bias_v(scenario, dict(rec, sample_rate_hz=fs)) > START_BIAS_SHARE * scenario.supply.target_v:
        rec["r_filter_shift"] = FAST_FILTER_SHIFT
    best = None
    while tau <= TAU_MAX_S:
        trial = dict(rec, loop_tau_ms=_clip("loop_tau_ms", tau * 1e3),
                     kp_max=_clip("kp_max", max(1.0, KP_HEADROOM * rc / tau)))
        cfg = algo_config(scenario, dict(trial, sample_rate_hz=fs))
        best = trial
        s = loop_summary(scenario, cfg)
        if s["gain_margin"] >= GM_TARGET and s["low_margin"] <= LOW_TARGET:
            break
        tau *= TAU_STEP
    return best, fs


def pert_ripple(scenario, cfg, r_est, i_a):
    """Perturbation ripple at the load (V peak-to-peak) and the current swing (A peak)."""
    le = scenario.load_end
    w = 2 * math.pi * cfg.perturbation_hz
    zc = le.esr_ohm + 1 / (1j * w * le.capacitance_f)
    d_i = pert_for(cfg, r_est, i_a) / abs(r_est + zc)
    return 2 * d_i * abs(zc), d_i


def drift_lag_v(scenario, cfg, i_a):
    """Load error (V) the estimate's lag behind a drifting cable leaves at current ``i_a`` (A).

    With temperature_end_c the loop resistance ramps linearly over the run at rho ohm/s. The
    estimate's steady filter (gain a = 2**-r_filter_shift per window) trails a ramp of rho*T per
    window by rho*T*(1 - a)/a (the steady error of a first-order recursion on a ramp); the
    window's reading is half a window old when it lands and is held a further window, half a
    window on average: 2**r_filter_shift windows in all. The correction follows the estimate
    with its time constant loop_tau_ms (a first-order lag on a ramp trails it by tau). The
    error is rho * (2**r_filter_shift * T + tau) * i_a; 0 without a drift.
    """
    r0, r1 = resistance_range(scenario)
    if r1 == r0:
        return 0.0
    rho = (r1 - r0) / scenario.run.duration_s
    window_s = cfg.window_samples / cfg.sample_rate_hz
    return rho * ((1 << cfg.r_filter_shift) * window_s + cfg.loop_tau_s) * i_a


def predict(scenario, cfg):
    """Predicted steady figures of configuration ``cfg`` on ``scenario`` (dict, units in keys).

    The load error is target_v - V_load at the compensated operating point, from the
    estimate the loop settles to (cable + ESR + the load's share, harness.design.loop_model), plus a
    quantisation bound: half a DAC LSB plus one estimate LSB times the current, plus the lag
    behind a drifting cable (drift_lag_v) at the largest current. Also how far the load moves
    at the largest current per ohm of ESR away from the allowance and per 1 % of voltage-ADC
    gain error (production spread: ``linedrop spread``).
    """
    sense_gain = 1.0 + scenario.sensing.gain_error
    dac_lsb = cfg.dac_full_scale_v / (1 << cfg.dac_bits)
    r_lsb = cfg.v_full_scale_v / cfg.i_full_scale_a / (1 << cfg.r_frac_bits)
    err, quant, ripple, swing, i_top, corr_top = 0.0, 0.0, 0.0, 0.0, 0.0, 0.0
    for op in operating_points(scenario, cfg):
        an = analyse(op, cfg, pert_for(cfg, op.r_ohm + op.esr_ohm, op.i_a), sense_gain=sense_gain)
        r0 = an.plant.r0_ohm
        corr = min(max(cfg.compensation * sense_gain * max(r0 - cfg.esr_allowance_ohm, 0) * op.i_a, 0),
                   correction_ceiling_v(cfg, op.r_ohm + op.esr_ohm, op.i_a))
        e = op.r_ohm * op.i_a - corr
        if abs(e) > abs(err):
            err = e
        quant = max(quant, dac_lsb / 2 + r_lsb * op.i_a)
        if op.i_a >= i_top:
            i_top, corr_top = op.i_a, corr
        rp, sw = pert_ripple(scenario, cfg, r0, op.i_a)
        ripple, swing = max(ripple, rp), max(swing, sw)
    lag = drift_lag_v(scenario, cfg, i_top)
    # Sensitivities at the largest current. The ESR carries no DC current, so an ESR above the
    # allowance is corrected as if it were cable: the load rises by that excess times the current
    # (per ohm: the current). The drop is the estimate (V/I in codes) times the current code, so
    # the current channel's gain cancels and a voltage-ADC gain error g makes the correction
    # 1 + g times too high (per 1 %: 1 % of the correction).
    return {"esr_sensitivity_v_per_ohm": float(sense_gain * i_top),
            "gain_sensitivity_v_per_pct": float(0.01 * corr_top / sense_gain),
            "predicted_load_error_v": float(abs(err) + quant + lag), "load_error_steady_v": float(err),
            "quantisation_error_v": float(quant), "drift_lag_error_v": float(lag),
            "ripple_load_v_pp": float(ripple),
            "current_swing_a": float(swing)}
