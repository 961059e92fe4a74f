"""Static range analysis for tune: every state field and every intermediate of the step path.

The state fields' intervals come from algo.ranges (the proof suite's analysis, one parameter
block at a time); this module adds the intermediates that never reach the state: the
demodulation product, the window-end trend removal, rotation and cross products and their
shifts, the drop and gain products of the window and of the per-period correction law, and the
command sum. Intervals cover all admissible inputs (any ADC code in
[0, adc_max] at every sample, any state the clamps allow) and are checked against the word that
holds each one in C: the declared ``acc_bits`` for the accumulators, the field's C type for the
rest of the state, int32 for per-sample intermediates and int64 for the window-end products. A
parameter block with any interval outside its word may overflow, and tune rejects it, as
``algo.params.derive`` rejects the ones its own check catches.
"""
from dataclasses import dataclass

from algo.fixed import rshift_round
from algo.params import DROP_FRAC, GAIN_FRAC, KT_FRAC, NORM_BITS, ROT_FRAC, SWING_FRAC
from algo.ranges import STATE_TYPES, state_bounds

INT32 = (-(1 << 31), (1 << 31) - 1)
INT64 = (-(1 << 63), (1 << 63) - 1)


@dataclass(frozen=True)
class Bound:
    """Interval ``[lo, hi]`` of one quantity and the word ``[wlo, whi]`` that holds it."""
    name: str
    lo: int
    hi: int
    word: str
    wlo: int
    whi: int

    @property
    def fits(self):
        return self.wlo <= self.lo and self.hi <= self.whi


def _signed(bits):
    return (-(1 << (bits - 1)), (1 << (bits - 1)) - 1)


def analyse(p):
    """Every bound of parameter block ``p`` (algo.params.Params): state fields, then intermediates.

    State fields come from algo.ranges.state_bounds (the proof suite's analysis), each against
    its C type (the accumulators against ``acc_bits``); the intermediates that never reach the
    state are added here, in the order the step path forms them.
    """
    out = []

    def add(name, lo, hi, word, limits):
        out.append(Bound(name, int(lo), int(hi), word, *limits))

    acc_word = _signed(p.acc_bits)
    for name, (lo, hi) in state_bounds(p).items():
        if name.startswith("acc_"):
            add(name, lo, hi, f"int{p.acc_bits} (acc_bits)", acc_word)
        else:
            word = STATE_TYPES[name]
            add(name, lo, hi, "int32" if word == INT32 else f"[{word[0]}, {word[1]}]", word)
    amax, ds, w = p.adc_max, p.demod_shift, p.window
    tmax = max(abs(t) for t in p.ref_tab[:p.period])
    half = (1 << ds) >> 1
    add("demod product code*ref (+ rounding half)", -amax * tmax, amax * tmax + half, "int32", INT32)
    # Window end: trend removal, then the voltage pair's rotation, then the current pair is
    # normalised to NORM_BITS (+1 after rounding); the voltage pair takes the same shift (0
    # whenever the current is small) and is saturated to int32 after it.
    acc_lo, acc_hi = state_bounds(p)["acc_vi"]
    a_mag = max(-acc_lo, acc_hi)
    diff = w * amax                               # |second half's sum - first half's|
    kt = max(abs(p.kt_s_q), abs(p.kt_c_q))
    add("half-sum difference * kt (+ half)", -diff * kt, diff * kt + (1 << (KT_FRAC - 1)), "int64", INT64)
    det = a_mag + rshift_round(diff * kt, KT_FRAC) + 1
    rot = det * (abs(p.rot_c_q) + abs(p.rot_s_q))
    add("rotation products (+ half)", -rot, rot + (1 << (ROT_FRAC - 1)), "int64", INT64)
    v_n = min(rshift_round(rot, ROT_FRAC) + 1, INT32[1])
    i_n = min(det, 1 << NORM_BITS)
    add("den = ii^2 + iq^2", 0, 2 * i_n * i_n, "int64", INT64)
    num = 2 * v_n * i_n
    add("num, xnum (cross products)", -num, num, "int64", INT64)
    add("num << r_frac", -(num << p.r_frac), num << p.r_frac, "int64", INT64)
    add("x_max_q * den", 0, p.x_max_q * 2 * i_n * i_n, "int64", INT64)
    sh = p.r_frac + p.window_log2 - DROP_FRAC
    prod = p.r_max_q * w * amax
    add("r_est * isum (+ rounding half)", 0, prod + ((1 << sh) >> 1), "int64", INT64)
    drop = min(INT32[1], rshift_round(prod, sh))
    add("drop (Q8 V-codes, saturated)", 0, drop, "int32", INT32)
    # Per period: the step detector's threshold and the correction law.
    add("swing * swing_psum_q (+ half)", 0, INT32[1] * p.swing_psum_q + (1 << (SWING_FRAC + 7)),
        "int64", INT64)
    psh = p.r_frac + p.period_log2 - DROP_FRAC
    pprod = p.r_max_q * p.period * amax
    add("(r_est - esr) * psum (+ half)", 0, pprod + ((1 << psh) >> 1), "int64", INT64)
    pdrop = min(INT32[1], rshift_round(pprod, psh))
    csh = GAIN_FRAC + DROP_FRAC - p.corr_frac
    add("drop * corr_gain_q (+ half)", 0, max(drop, pdrop) * p.corr_gain_q + ((1 << csh) >> 1),
        "int64", INT64)
    add("r_est * kc_q (+ half)", 0, p.r_max_q * p.kc_q + ((1 << p.r_frac) >> 1), "int64", INT64)
    e_max = INT32[1]
    add("kp * e, ki * e (+ half)", -p.kp_max_q * e_max, p.kp_max_q * e_max + (1 << (GAIN_FRAC - 1)),
        "int64", INT64)
    add("drop * pert_gain_q (+ half)", 0, drop * p.pert_gain_q + (1 << (GAIN_FRAC + DROP_FRAC - 1)),
        "int64", INT64)
    add("pert_amp doubling", 0, 2 * p.pert_max, "int32", INT32)
    add("corr + rounding half", 0, p.corr_max_q + ((1 << p.corr_frac) >> 1), "int32", INT32)
    tsh = p.tab_bits - 1
    add("pert_amp * ref (+ half)", -p.pert_max * tmax, p.pert_max * tmax + ((1 << tsh) >> 1), "int32", INT32)
    cmd_hi = p.target_code + rshift_round(p.corr_max_q, p.corr_frac) + rshift_round(p.pert_max * tmax, tsh)
    cmd_lo = p.target_code - rshift_round(p.pert_max * tmax, tsh)
    add("command sum before clamp", cmd_lo, cmd_hi, "int32", INT32)
    return out


def overflows(bounds):
    """The bounds that do not fit their word (empty when the configuration is safe)."""
    return [b for b in bounds if not b.fits]


def bound(bounds, name):
    """The bound called ``name``."""
    return next(b for b in bounds if b.name == name)


ACC = "acc_vi"
ISUM = "isum"
