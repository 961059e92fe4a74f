"""Window-end estimate and correction update (mirrors c_ref/estimator.c).

Runs once per measurement window: turns the demodulation sums into the real
and quadrature parts of V/I, classifies the window, updates the resistance
estimate, the correction target and the perturbation amplitude, and moves the
held correction one smoothing step. This is the only place with a division.
"""
from algo.fixed import sat, sat_s32, rshift_round, div_trunc, bit_length, step_toward
from algo.params import GAIN_FRAC, DROP_FRAC, NORM_BITS
from algo import state as st


def classify(p, s):
    """Return ``(status, r_raw)`` for the finished window.

    Order: too little current swing first (a cable open with the current near
    code 0 stays a fault), then a code at a rail, a load step, and the
    real-part and quadrature limits.

    Scaling and overflow: the current pair is shifted right by ``sh`` so its
    larger magnitude has at most NORM_BITS+1 bits; the voltage pair (int32)
    takes the same shift, so ``num`` and ``xnum`` are below 2**46 and
    ``den`` below 2**30. ``num << r_frac`` (r_frac <= 16) stays below 2**62
    and ``x_max_q * den`` below 2**61: int64 suffices.
    """
    m = max(abs(s.acc_ii), abs(s.acc_iq))
    if m < p.swing_min:
        return st.STATUS_LOW_SWING, 0
    sh = max(0, bit_length(m) - NORM_BITS)
    vi, vq = rshift_round(s.acc_vi, sh), rshift_round(s.acc_vq, sh)
    ii, iq = rshift_round(s.acc_ii, sh), rshift_round(s.acc_iq, sh)
    den = ii * ii + iq * iq
    num = vi * ii + vq * iq
    xnum = vq * ii - vi * iq
    r_raw = sat_s32(div_trunc(num << p.r_frac, den))
    if s.clipped:
        return st.STATUS_CLIPPED, r_raw
    if s.transient:
        return st.STATUS_TRANSIENT, r_raw
    if r_raw > p.r_max_q:
        return st.STATUS_R_HIGH, r_raw
    if r_raw < 0:
        return st.STATUS_R_LOW, r_raw
    if abs(xnum) << p.r_frac > p.x_max_q * den:
        return st.STATUS_REACTIVE, r_raw
    return st.STATUS_VALID, r_raw


def drop_vq(r_q, isum, p):
    """Window-mean drop ``r * I`` in V-ADC codes, Q DROP_FRAC, saturated to int32.

    Scaling and overflow: r_q (Q r_frac, < 2**31) times isum (< 2**30) is
    below 2**61; the shift removes r_frac fraction bits and the window's
    log2 length, keeping DROP_FRAC (r_frac >= DROP_FRAC).
    """
    return sat_s32(rshift_round(r_q * isum, p.r_frac + p.window_log2 - DROP_FRAC))


def next_pert_amp(p, s, status, drop_total):
    """Perturbation amplitude for the next window (DAC codes, before the clamp).

    A window without enough current swing doubles the amplitude, so a cable
    longer than the floor was sized for still starts; a window with a code at
    a rail halves it, so the swing backs off the rail; otherwise the amplitude
    is pert_fraction of the estimated drop, falling at most by half a window.

    Scaling and overflow: pert_amp <= 32767, so doubling fits int32 and
    halving is a shift of a non-negative value; drop
    (Q DROP_FRAC, int32) times pert_gain_q (Q GAIN_FRAC, int32) is below 2**62.
    """
    if status == st.STATUS_LOW_SWING:
        return s.pert_amp << 1
    if status == st.STATUS_CLIPPED:
        return s.pert_amp >> 1
    return max(rshift_round(drop_total * p.pert_gain_q, GAIN_FRAC + DROP_FRAC), s.pert_amp >> 1)


def command_base(p, s):
    """target_code + the correction rounded to DAC codes: the command less the perturbation.

    Scaling and overflow: corr is at most corr_max_q < 2**31; after the shift
    it is at most 2**16 codes, so the sum fits int32.
    """
    return p.target_code + rshift_round(s.corr, p.corr_frac)


def window_end(p, s):
    """Finish a window: classify, update estimate and correction, clear the sums.

    Scaling and overflow: estimate arithmetic stays in [-2**31, 2**31) as
    a valid window's r_raw and r_est are both in [0, r_max_q]; drop (Q DROP_FRAC, int32) times
    a gain (Q GAIN_FRAC, int32) is below 2**62 before its shift.
    """
    status, s.r_raw = classify(p, s)
    if status == st.STATUS_VALID:
        target = max(s.r_raw, 0)
        d = step_toward(s.r_est, target, p.r_shift) - s.r_est
        s.r_est = sat(s.r_est + sat(d, -p.r_step_max_q, p.r_step_max_q), 0, p.r_max_q)
        s.bad_windows = 0
    elif status not in (st.STATUS_TRANSIENT, st.STATUS_CLIPPED):
        # A load step or a code at a rail only holds the estimate; counting it as a fault window
        # would let a step spread over several windows by the load capacitor force the
        # correction to zero.
        s.bad_windows = min(s.bad_windows + 1, 0xFFFF)
    if s.bad_windows >= p.fault_windows:
        s.r_est = 0
    drop_total = drop_vq(s.r_est, s.isum, p)
    drop_comp = drop_vq(max(s.r_est - p.esr_q, 0), s.isum, p)
    if status in (st.STATUS_VALID, st.STATUS_TRANSIENT, st.STATUS_CLIPPED):
        s.corr_target = sat(rshift_round(drop_comp * p.corr_gain_q,
                                         GAIN_FRAC + DROP_FRAC - p.corr_frac), 0, p.corr_max_q)
    else:
        s.corr_target = 0
    s.pert_amp = sat(next_pert_amp(p, s, status, drop_total), p.pert_min, p.pert_max)
    if s.bad_windows >= p.fault_windows:
        s.corr = 0
    else:
        s.corr = step_toward(s.corr, s.corr_target, p.corr_shift)
    s.cmd_base = command_base(p, s)
    s.status = status
    s.windows = (s.windows + 1) & 0xFFFFFFFF
    s.acc_vi = s.acc_vq = s.acc_ii = s.acc_iq = 0
    s.isum = 0
    s.count = 0
    s.transient = 0
    s.clipped = 0
