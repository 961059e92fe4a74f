"""Integer parameter block (mirrors ``ld_params_t`` in c_ref/linedrop.h) derived from settings.

All floating-point work happens here, offline; the step path sees only these
integers. Units: ``*_code`` are ADC or DAC codes, ``*_q`` carry the fraction
bits named by their format field (``r_*_q``: Q``r_frac`` V-code per I-code;
``corr_*_q``: Q``corr_frac`` DAC codes; ``*_gain_q``: Q``LD_GAIN_FRAC``).
"""
from dataclasses import dataclass, fields, astuple
import hashlib
import math

from algo.config import AlgoConfig, ConfigError

TAB_MAX = 256      # LD_TAB_MAX: longest perturbation period, samples
GAIN_FRAC = 16     # LD_GAIN_FRAC: fraction bits of corr_gain_q and pert_gain_q
DROP_FRAC = 8      # LD_DROP_FRAC: fraction bits of the window's drop in V-ADC codes
NORM_BITS = 14     # LD_NORM_BITS: current demodulation pair normalised to this many bits
KT_FRAC = 16       # LD_KT_FRAC: fraction bits of the trend-removal constants kt_s_q, kt_c_q
ROT_FRAC = 14      # LD_ROT_FRAC: fraction bits of the voltage phase rotation rot_c_q, rot_s_q
SWING_FRAC = 24    # LD_SWING_FRAC: fraction bits of swing_psum_q
KP_MAX_Q = 1 << 24  # LD_KP_MAX_Q: ceiling of any proportional gain (256), Q GAIN_FRAC
S32_MAX = 0x7FFFFFFF


@dataclass(frozen=True)
class Params:
    """Flash-able integer parameters, field for field as ``ld_params_t``."""
    adc_max: int          # uint16: largest ADC code; inputs are clamped to it
    cmd_min: int          # uint16: lowest command, DAC code
    cmd_max: int          # uint16: highest command, DAC code
    target_code: int      # uint16: load target, DAC code
    fault_windows: int    # uint16: bad windows before forced zero correction
    period_log2: int      # uint8
    window_log2: int      # uint8: samples per window, log2
    tab_bits: int         # uint8: reference table word length (signed)
    demod_shift: int      # uint8: right shift of each demodulation product
    r_frac: int           # uint8: fraction bits of resistances
    r_shift: int          # uint8: estimate filter shift
    corr_frac: int        # uint8: fraction bits of the correction
    step_rel_shift: int   # uint8: load-step detector relative threshold shift
    acc_bits: int         # uint8: declared accumulator width (checked offline)
    r_max_q: int          # int32
    x_max_q: int          # int32
    esr_q: int            # int32
    r_step_max_q: int     # int32
    corr_gain_q: int      # int32: k * (V-ADC LSB / DAC LSB), Q GAIN_FRAC
    pert_gain_q: int      # int32: pert_fraction * (V-ADC LSB / DAC LSB), Q GAIN_FRAC
    corr_max_q: int       # int32: correction ceiling, Q corr_frac DAC codes
    pert_min: int         # int32: perturbation amplitude floor, DAC codes
    pert_max: int         # int32: perturbation amplitude ceiling, DAC codes
    swing_min: int        # int32: smallest accepted current demodulation magnitude
    step_min: int         # int32: load-step detector floor, period-sum ADC codes
    swing_psum_q: int     # int32: current swing (demodulation units) -> period-sum codes, Q SWING_FRAC
    ki_q: int             # int32: integral gain per period, T_period / tau, Q GAIN_FRAC (<= 2**16)
    kc_q: int             # int32: C / tau in (V-code per I-code)^-1, Q GAIN_FRAC: kp = r_est * kc_q
    kp_max_q: int         # int32: proportional gain ceiling, Q GAIN_FRAC (<= 2**24)
    kt_s_q: int           # int32: trend leak into the sine sums per unit half-sum difference, Q KT_FRAC
    kt_c_q: int           # int32: the same for the cosine sums
    rot_c_q: int          # int32: cos of the voltage phase correction, Q ROT_FRAC
    rot_s_q: int          # int32: sin of the voltage phase correction, Q ROT_FRAC
    ref_tab: tuple        # int16[TAB_MAX]: one period of sine, Q(tab_bits-1)

    @property
    def period(self):
        return 1 << self.period_log2

    @property
    def window(self):
        return 1 << self.window_log2

    def fingerprint(self):
        """Short hash of every field, for provenance and for agreeing with C."""
        flat = [v for v in astuple(self)[:-1]] + list(self.ref_tab)
        return hashlib.sha256(",".join(map(str, flat)).encode()).hexdigest()[:16]


PARAM_FIELDS = [f.name for f in fields(Params)]


def _code(x):
    return int(math.floor(x + 0.5))


def sine_table(period, tab_bits):
    """One period of sine, rounded to Q(tab_bits-1), padded with zeros to TAB_MAX.

    Built from the first quarter by symmetry so that ``tab[n + N/2] == -tab[n]``
    exactly: a whole period then sums to zero and demodulation rejects DC.
    """
    amp = (1 << (tab_bits - 1)) - 1
    quarter = [_code(amp * math.sin(2 * math.pi * n / period)) for n in range(period // 4 + 1)]
    half = quarter + quarter[-2::-1][: period // 2 - len(quarter)]
    full = half + [-x for x in half]
    return tuple(full + [0] * (TAB_MAX - period))


def demod_shift_for(adc_bits, tab_bits, window_log2, acc_bits):
    """Smallest product shift that keeps a window's sum of products inside ``acc_bits``."""
    prod = ((1 << adc_bits) - 1) * ((1 << (tab_bits - 1)) - 1)
    limit = (1 << (acc_bits - 1)) - 1
    for s in range(0, 32):
        half = (1 << (s - 1)) if s else 0
        if prod + half > S32_MAX:
            break
        if (prod + half) >> s << window_log2 <= limit:
            return s
    raise ConfigError("acc_bits", f"= {acc_bits}: too narrow for adc_bits={adc_bits}, "
                                  f"table_bits={tab_bits} and a 2**{window_log2}-sample window; "
                                  f"widen it or shorten table_bits")


def trend_constants(tab, period, window, ds):
    """(kt_s, kt_c): how much of a half-window sum difference a linear trend leaves in the sums.

    A trend y = slope * (k - (W - 1) / 2) over the window adds slope * sum(tab * t) / 2**ds to the
    sine sum (likewise cosine) and slope * W**2 / 4 to (second half's sum - first half's). Whole
    periods in each half carry no sine or cosine into that difference, so dividing the two gives
    the leak per unit difference. With one period per window the halves are not whole periods and
    the constants are zero (no trend removal).
    """
    if window < 2 * period:
        return 0.0, 0.0
    c = (window - 1) / 2
    ts = sum(tab[k % period] * (k - c) for k in range(window)) / (1 << ds)
    tc = sum(tab[(k + (period >> 2)) % period] * (k - c) for k in range(window)) / (1 << ds)
    return ts / (window * window / 4), tc / (window * window / 4)


def derive(cfg: AlgoConfig) -> Params:
    """Turn settings into the integer parameter block, rejecting any that could overflow."""
    v_lsb = cfg.v_full_scale_v / (1 << cfg.adc_bits)
    i_lsb = cfg.i_full_scale_a / (1 << cfg.adc_bits)
    dac_lsb = cfg.dac_full_scale_v / (1 << cfg.dac_bits)
    dac_max = (1 << cfg.dac_bits) - 1
    period_log2 = cfg.period_samples.bit_length() - 1
    window_log2 = period_log2 + cfg.periods_per_window.bit_length() - 1
    ds = demod_shift_for(cfg.adc_bits, cfg.table_bits, window_log2, cfg.acc_bits)
    r_scale = i_lsb / v_lsb * (1 << cfg.r_frac_bits)      # ohm -> Q r_frac V-code per I-code
    ratio = v_lsb / dac_lsb
    tab_amp = (1 << (cfg.table_bits - 1)) - 1
    # Demodulated magnitude of a current sine of amplitude A codes, worst phase: A*L/2*amp/2^ds/sqrt2.
    swing_per_code = (1 << window_log2) / 2 * tab_amp / (1 << ds) / math.sqrt(2)
    tab = sine_table(cfg.period_samples, cfg.table_bits)
    kt_s, kt_c = trend_constants(tab, cfg.period_samples, 1 << window_log2, ds)
    period_s = cfg.period_samples / cfg.sample_rate_hz
    tau_s = cfg.loop_tau_s
    theta = 2 * math.pi * cfg.adc_phase_samples / cfg.period_samples
    corr_max_code = min(cfg.corr_max_v / dac_lsb, max(0, _code(cfg.max_v / dac_lsb) - _code(cfg.target_v / dac_lsb)))
    vals = dict(
        adc_max=(1 << cfg.adc_bits) - 1,
        cmd_min=min(dac_max, _code(cfg.min_v / dac_lsb)),
        cmd_max=min(dac_max, _code(cfg.max_v / dac_lsb)),
        target_code=min(dac_max, _code(cfg.target_v / dac_lsb)),
        fault_windows=cfg.fault_windows,
        period_log2=period_log2,
        window_log2=window_log2,
        tab_bits=cfg.table_bits,
        demod_shift=ds,
        r_frac=cfg.r_frac_bits,
        r_shift=cfg.r_filter_shift,
        corr_frac=cfg.corr_frac_bits,
        step_rel_shift=cfg.step_rel_shift,
        acc_bits=cfg.acc_bits,
        r_max_q=_code(cfg.r_max_ohm * r_scale),
        x_max_q=_code(cfg.x_max_ohm * r_scale),
        esr_q=_code(cfg.esr_allowance_ohm * r_scale),
        r_step_max_q=_code(cfg.r_step_max_ohm * r_scale),
        corr_gain_q=_code(cfg.compensation * ratio * (1 << GAIN_FRAC)),
        pert_gain_q=_code(cfg.pert_fraction * ratio * (1 << GAIN_FRAC)),
        corr_max_q=_code(corr_max_code * (1 << cfg.corr_frac_bits)),
        pert_min=_code(cfg.pert_min_v / dac_lsb),
        pert_max=_code(cfg.pert_max_v / dac_lsb),
        swing_min=max(1, _code(cfg.swing_min_a / i_lsb * swing_per_code)),
        step_min=_code(cfg.step_min_a / i_lsb * cfg.period_samples),
        swing_psum_q=_code((1 << ds) * 2 * cfg.period_samples / ((1 << window_log2) * tab_amp)
                           * (1 << SWING_FRAC)),
        ki_q=_code(period_s / tau_s * (1 << GAIN_FRAC)),
        # Saturated: at 2**31 - 1 the gain reaches kp_max_q (<= 2**24) from an estimate of
        # 2**(r_frac - 7) units, far below any cable's, so a larger C / tau changes nothing.
        kc_q=min(S32_MAX, _code(v_lsb / i_lsb * cfg.capacitance_f / tau_s * (1 << GAIN_FRAC))),
        kp_max_q=min(KP_MAX_Q, _code(cfg.kp_max * (1 << GAIN_FRAC))),
        kt_s_q=_code(kt_s * (1 << KT_FRAC)),
        kt_c_q=_code(kt_c * (1 << KT_FRAC)),
        rot_c_q=_code(math.cos(theta) * (1 << ROT_FRAC)),
        rot_s_q=_code(math.sin(theta) * (1 << ROT_FRAC)),
        ref_tab=tab,
    )
    _check_ranges(vals)
    return Params(**vals)


# Settings whose integer image must fit int32, and the key to blame when it does not.
_INT32_FIELDS = {"r_max_q": "r_max_ohm", "x_max_q": "x_max_ohm", "esr_q": "esr_allowance_ohm",
                 "r_step_max_q": "r_step_max_ohm", "corr_gain_q": "compensation",
                 "pert_gain_q": "pert_fraction", "corr_max_q": "corr_max_v",
                 "swing_min": "swing_min_a", "step_min": "step_min_a",
                 "ki_q": "loop_tau_ms", "kp_max_q": "kp_max",
                 "swing_psum_q": "acc_bits"}


def _check_ranges(v):
    for name, key in _INT32_FIELDS.items():
        if not 0 <= v[name] <= S32_MAX:
            raise ConfigError(key, f"scaled value {v[name]} does not fit int32 at these word "
                                   f"lengths and full scales; lower it or r_frac_bits")
    if v["pert_max"] > 0x7FFF:
        raise ConfigError("pert_max_v", "must be below 32768 DAC codes")
    if v["ki_q"] > 1 << GAIN_FRAC:
        raise ConfigError("loop_tau_ms", "must be at least one perturbation period")
    for name in ("kt_s_q", "kt_c_q"):
        if not -S32_MAX <= v[name] <= S32_MAX:
            raise ConfigError("periods_per_window", f"trend constant {v[name]} does not fit int32")
    if v["r_max_q"] < 1:
        raise ConfigError("r_max_ohm", "rounds to zero at these full scales and r_frac_bits")
