"""Window-end estimate and correction update (mirrors c_ref/estimator.c).

Runs once per measurement window: removes the DC and a linear trend from the
demodulation sums, turns them into the real and quadrature parts of V/I,
classifies the window, and updates the resistance estimate and the
perturbation amplitude. The correction itself moves
every period (algo.step.correct). The only divisions are here.
"""
from algo.fixed import sat, sat_s32, rshift_round, div_trunc, bit_length, step_toward
from algo.params import GAIN_FRAC, DROP_FRAC, NORM_BITS, KT_FRAC, ROT_FRAC, SWING_FRAC
from algo import state as st


def detrend(acc, diff, kt_q):
    """A demodulation sum less the share a linear trend left in it.

    ``diff`` is the second half-window's code sum less the first's; the trend's slope is
    diff / (W**2 / 4) and it adds slope * sum(tab * t) to the sum, which kt_q holds per unit diff
    (algo.params.trend_constants). DC needs no removal: whole periods of the table sum to zero.

    Scaling and overflow: |diff| < 2**31 and |kt_q| < 2**31, so the product is below 2**62; the
    result is within 2**31 of an int32 sum and is kept in int64.
    """
    return acc - rshift_round(diff * kt_q, KT_FRAC)


def rotate(vi, vq, p):
    """The voltage pair turned back by the sampling phase (adc_phase_samples): (vi', vq').

    Scaling and overflow: |vi|, |vq| < 2**33 and |rot_*_q| <= 2**ROT_FRAC, so each product is below
    2**48 and their sum below 2**49 (int64).
    """
    return (rshift_round(vi * p.rot_c_q + vq * p.rot_s_q, ROT_FRAC),
            rshift_round(vq * p.rot_c_q - vi * p.rot_s_q, ROT_FRAC))


NORM_LIM = 1 << NORM_BITS   # the normalised current pair's bound (classify)


def classify(p, s):
    """Return ``(status, r_raw)`` for the finished window.

    Order: too little current swing first (a cable open with the current near
    code 0 stays a fault), then a code at a rail, a real part above r_max, a load step, and
    the remaining real-part and quadrature limits. A real part above r_max outranks a load step:
    with the capacitor gone the correction's own steps move the current and read as load steps
    every window, while a load step with the capacitor there leaves the detrended real part near
    the loop's, far below r_max; as a load step it would never count toward the forced zero.
    It reads the w_* record a window end leaves. A valid window also leaves its (detrended)
    current swing for the load-step detector (swing; window_work turns it into thr_next).

    Scaling and overflow: the detrended pairs are within 2**32 and the rotated voltage pair
    within 2**33 in magnitude. The current pair is shifted right by ``sh`` so its larger
    magnitude has at most NORM_BITS+1 bits; the voltage pair takes the same shift, so it stays
    below 2**33 and ``num`` and ``xnum`` below 2**49, ``den`` below 2**31. ``num << r_frac``
    (r_frac <= 16) is below 2**65 only in theory: the voltage pair is then clamped to +-2**31
    after the shift (its ratio to the current pair is at most 2**31 / 2**14 V-codes per I-code
    before saturating r_raw anyway), which keeps ``num << r_frac`` below 2**62 and
    ``x_max_q * den`` below 2**62: int64 suffices. Two checks state what this shows and a value
    analysis cannot see through the shared shift (c_ref/estimator.c ld_classify): the shifted
    current pair is saturated to +-2**NORM_BITS and ``den`` = 0 reads low swing; neither ever acts.
    """
    di, dv = s.w_di, s.w_dv
    ii0, iq0 = detrend(s.w_acc_ii, di, p.kt_s_q), detrend(s.w_acc_iq, di, p.kt_c_q)
    m = max(abs(ii0), abs(iq0))
    if m < p.swing_min:
        return st.STATUS_LOW_SWING, 0
    vi0, vq0 = rotate(detrend(s.w_acc_vi, dv, p.kt_s_q), detrend(s.w_acc_vq, dv, p.kt_c_q), p)
    sh = max(0, bit_length(m) - NORM_BITS)
    vi, vq = sat_s32(rshift_round(vi0, sh)), sat_s32(rshift_round(vq0, sh))
    ii = sat(rshift_round(ii0, sh), -NORM_LIM, NORM_LIM)
    iq = sat(rshift_round(iq0, sh), -NORM_LIM, NORM_LIM)
    den = ii * ii + iq * iq
    if den == 0:
        return st.STATUS_LOW_SWING, 0
    num = vi * ii + vq * iq
    xnum = vq * ii - vi * iq
    r_raw = sat_s32(div_trunc(num << p.r_frac, den))
    if s.w_clipped:
        return st.STATUS_CLIPPED, r_raw
    if r_raw > p.r_max_q:
        return st.STATUS_R_HIGH, r_raw
    if s.w_transient:
        return st.STATUS_TRANSIENT, r_raw
    if r_raw < 0:
        return st.STATUS_R_LOW, r_raw
    if abs(xnum) << p.r_frac > p.x_max_q * den:
        return st.STATUS_REACTIVE, r_raw
    s.swing = sat_s32(m)
    return st.STATUS_VALID, r_raw


def gain_kp(p, r_est):
    """The correction's proportional gain for an estimate: R-hat * C / tau, kp = r_est * kc_q,
    capped at kp_max_q.

    Scaling and overflow: r_est (< 2**31) times kc_q (< 2**31) is below 2**62; the result is
    clamped to kp_max_q <= 2**24.
    """
    return min(rshift_round(r_est * p.kc_q, p.r_frac), p.kp_max_q)


def step_threshold(p, swing):
    """The load-step detector's threshold for a current swing: a share 2**-step_rel_shift of
    the swing in period-sum codes, at least step_min, saturated to int32 (a period-sum difference
    is below 2**24, so the comparison is unchanged).

    Scaling and overflow: swing (< 2**31) times swing_psum_q (int32, checked in
    algo.params.derive) is below 2**62.
    """
    return sat_s32(max(p.step_min, rshift_round(swing * p.swing_psum_q, SWING_FRAC + p.step_rel_shift)))


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

    Kept at most cmd_max - pert_amp (but never below target_code), so the perturbation on top
    of it is not cut by the ceiling: a cut sine lowers the command's mean by an amount that
    depends on the correction, and near the ceiling the loop then rings with that cut from one
    period to the next. The correction in the state is not changed; only the command is.

    Scaling and overflow: corr is at most corr_max_q < 2**31; after the shift
    it is at most 2**16 codes, so the sum fits int32; cmd_max - pert_amp is above -2**15.
    """
    return min(p.target_code + rshift_round(s.corr, p.corr_frac),
               max(p.target_code, p.cmd_max - s.pert_amp))


def update_estimate(p, s, r_raw):
    """Fold a valid window into the estimate.

    The first valid window after init, a reset or a forced zero is taken as it is (valid_run 0);
    the correction starts only once a second valid window confirms it: one within r_step_max of
    it is averaged in (gain 1/2), one further off replaces it and waits for its own confirmation
    (a window caught in a recharge or a current limit reads wrong once, not twice alike). Then
    the gain falls as 1/4, 1/8 ... with the count of valid windows, down to the steady
    2**-r_shift, each step at most r_step_max.

    Scaling and overflow: r_raw and r_est are in [0, r_max_q], so every difference fits int32.
    """
    shift = min(bit_length(s.valid_run), p.r_shift)
    if s.valid_run == 0 or (s.valid_run == 1 and abs(r_raw - s.r_est) > p.r_step_max_q):
        s.r_est = r_raw
        s.valid_run = 1
        return
    d = step_toward(s.r_est, r_raw, shift) - s.r_est
    s.r_est = sat(s.r_est + sat(d, -p.r_step_max_q, p.r_step_max_q), 0, p.r_max_q)
    s.valid_run = min(s.valid_run + 1, 0xFF)


def window_work(p, s):
    """The window's work: classify the w_* record, update the estimate and the fault counter,
    and leave for the interrupt path the amplitude, the load-step threshold and the correction's
    inputs (the *_next fields, committed at a period end); returns 1, or 0 when no window waits
    (w_state not WIN_PENDING).

    Called by ``step`` at a window end, or by the firmware's main loop after ``step_isr``. It
    writes only fields the interrupt path leaves alone while a window waits, and marks its end
    (WIN_DONE) last.

    Scaling and overflow: drop (Q DROP_FRAC, int32) times pert_gain_q (Q GAIN_FRAC, int32) is
    below 2**62 before its shift (next_pert_amp).
    """
    if s.w_state != st.WIN_PENDING:
        return 0
    status, s.r_raw = classify(p, s)
    if status == st.STATUS_VALID:
        update_estimate(p, s, s.r_raw)
        s.bad_windows = 0
    elif status != st.STATUS_TRANSIENT and not (status == st.STATUS_CLIPPED and not st.rails_fault(s.w_clipped)):
        # A load step or a current code at one rail only holds the estimate; counting it as a
        # fault window would let a step spread over several windows by the load capacitor force
        # the correction to zero. The voltage at its rail, or the current at both rails in one
        # window, is a fault window: the supply is outside what the voltage ADC reads (design
        # warns where v_full_scale_v is below max_v), or the current swings over the ADC's
        # whole range, as when a plant without its capacitor runs away.
        s.bad_windows = min(s.bad_windows + 1, 0xFFFF)
    if s.bad_windows >= p.fault_windows:
        s.r_est = 0
        s.valid_run = 0
    s.on_next = int(s.bad_windows < p.fault_windows and s.valid_run >= 2)
    s.rc_next = max(s.r_est - p.esr_q, 0)
    s.kp_next = gain_kp(p, s.r_est)
    s.thr_next = step_threshold(p, s.swing)
    drop_total = drop_vq(s.r_est, s.w_isum, p)
    s.pert_next = sat(next_pert_amp(p, s, status, drop_total), p.pert_min, p.pert_max)
    s.status = status
    s.windows = (s.windows + 1) & 0xFFFFFFFF
    s.w_state = st.WIN_DONE
    return 1
