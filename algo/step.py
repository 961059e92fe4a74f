"""Per-sample step, init and reset (mirrors c_ref/step.c).

One call per ADC sample: demodulate the voltage and current codes against
the sine and cosine references; at each period end watch for load steps and
move the correction one step of its proportional-plus-integral law; finish
the window when it is full; return the next command code.
Integer-only; no division.
"""
from algo.fixed import sat, sat_s32, rshift_round
from algo.estimator import command_base, step_threshold, window_work
from algo import state as st
from algo.params import GAIN_FRAC, DROP_FRAC, S32_MAX
from algo.state import State


def _command(p, s):
    """Command code for the next sample: the per-window base plus the perturbation.

    Scaling and overflow: pert_amp (<= 2**15) times a table entry (< 2**15)
    is below 2**30; cmd_base is at most 2**16 + 2**16 codes; the int32 sum is
    clamped to [cmd_min, cmd_max].
    """
    pert = rshift_round(s.pert_amp * p.ref_tab[s.phase], p.tab_bits - 1)
    return sat(s.cmd_base + pert, p.cmd_min, p.cmd_max)


def init(p):
    """A fresh state: no estimate, no correction, perturbation at its floor."""
    s = State()
    reset(p, s)
    return s


def reset(p, s):
    """Restart measurement and drop the correction; keep the resistance estimate.

    The kept estimate is for reporting only: the correction stays at zero until a valid window
    after the reset, and that window replaces the estimate outright (valid_run is 0).
    """
    r_est, windows = s.r_est, s.windows
    s.__init__()
    s.r_est, s.windows = r_est, windows
    s.pert_amp = s.pert_next = p.pert_min
    s.step_thr = s.thr_next = step_threshold(p, 0)
    s.bad_windows = p.fault_windows
    s.cmd_base = command_base(p, s)
    s.cmd = _command(p, s)


def _period_end(s):
    """Stage 0 of a period end: flag a load step when consecutive whole-period current sums
    differ by more than a share of the current swing (step_thr, estimator.step_threshold of the
    last valid window's swing), and keep the period's sum and current-at-0 flag for the law.

    Scaling and overflow: period sums are below 2**24 (256 samples of 16-bit codes), so their
    difference fits int32.
    """
    if s.have_prev and abs(s.psum - s.psum_prev) > s.step_thr:
        s.transient = 1
    s.psum_prev = s.psum
    s.iz_last = s.i_zero
    s.have_prev = 1
    s.psum = 0
    s.i_zero = 0


def drop_period(p, s):
    """The period's estimated drop (R-hat - ESR) * mean current in Q corr_frac DAC codes: what the
    correction tracks, from the committed r_c = R-hat - ESR and the period sum psum_prev. Not
    clamped to corr_max_q: with the correction at its ceiling the error must still read the load
    voltage's shortfall.

    Scaling and overflow: r_c is in [0, 2**31) and psum_prev below 2**24, so their product is
    below 2**55; after the shift the V-code drop (Q DROP_FRAC) is saturated to int32, and times
    corr_gain_q (int32) it is below 2**62.
    """
    drop = sat_s32(rshift_round(s.r_c * s.psum_prev, p.r_frac + p.period_log2 - DROP_FRAC))
    return sat(rshift_round(drop * p.corr_gain_q, GAIN_FRAC + DROP_FRAC - p.corr_frac),
               0, S32_MAX)


def _correction_zero(s):
    """The correction and its state at zero (a forced zero, or no confirmed estimate)."""
    s.corr = s.corr_target = s.integ = s.du_prev = s.corr_prev = 0


def corr_ceiling(p, s):
    """Highest correction the command can carry this period, Q corr_frac DAC codes.

    corr_max_q, lowered to the room the command has above target_code under cmd_max with the
    perturbation on top (command_base's own cap): the law's output is then the correction the
    plant gets. A correction above that room would reach the command only in part, the law's
    error would read the load higher than it is, and near the ceiling the loop locks into a
    cycle from one period to the next with the load left low.

    Scaling and overflow: cmd_max - pert_amp - target_code is below 2**16 and corr_frac at most
    8, so the room fits int32.
    """
    room = p.cmd_max - p.target_code
    return min(p.corr_max_q, max(room - s.pert_amp, 0) << p.corr_frac)


def correct(p, s):
    """One period of the correction law, its three stages in one call (``law_target``,
    ``law_step``, ``law_guard``): proportional-plus-integral on the error e = drop - corr.

    With V-hat = (target + corr) - (R-hat - ESR) * I the supply's reading of the load voltage,
    e = target - V-hat. corr = kp * e + integ, integ += ki * e, with kp = R-hat * C / tau and
    ki = T_period / tau: the zero at R-hat * C cancels the cable-capacitor lag, the loop closes
    with time constant tau, and no steady error is left. The output is
    clamped to [0, the ceiling]; the integral does not move while the output sits above
    the ceiling and the error pushes further up (conditional integration, the anti-windup). At
    the floor it moves freely: it is itself kept in [0, the ceiling], so it cannot wind below
    zero, and holding it there would undo a load dump: the proportional part takes the output
    to 0, the held integral brings it straight back the next period, and the correction
    swings between 0 and its old value every period. While the committed window work holds the
    correction off (corr_on 0: the fault counter at fault_windows, or no second valid window has
    confirmed the estimate yet, valid_run < 2), the correction and its integral are zero.

    A period with a current code at 0 tracks a drop of zero: the load draws less than the
    perturbation's current swing, the ADC cannot show the negative half, and the period sum of
    what it does show reads high. Tracking it would let each correction step's charging current
    (seen when positive, clipped when negative) ratchet the correction up. With the target at
    zero the correction can only fall while the current clips; the load then sits low by at most
    (R - ESR) times a current below the swing, until the window's `clipped` outcome has halved
    the perturbation enough for the current to clear code 0. Its error is taken against the
    larger of the correction and its integral: once the proportional part has taken the output
    to 0, a current still at code 0 says the load sits at or above the supply (after a load
    dump the capacitor feeds back into the supply, which the unipolar ADC cannot show), and the
    integral falls at the loop's rate instead of holding until the capacitor has discharged
    through the cable.

    Ring guard: with the load capacitor there, a step of the correction draws its own charging
    current and the error hardly sees it; without it (capacitor open) the error sees the whole
    step and a proportional gain above 1 makes the correction swing rail to rail every period.
    Two steps in a row that each reverse the last one, more than double it and exceed a
    64th of corr_max turn the proportional part off (kp_off reaches 2) until the next valid
    window, from the period that trips it on: that period's output is the integral alone, so
    the step that would have been the third swing is never taken. (A load with a negative
    incremental resistance, constant power, makes the swing grow several-fold a period; an
    absolute growth test against the ceiling let it reach the ceiling first.) One such step
    alone (the start's first kick can be one) only counts (kp_off 1). The integral part alone
    is stable without the capacitor.

    Scaling and overflow: corr and corr_target are in [0, 2**31), so |e| < 2**31, and du, du_prev
    and |du| - |du_prev| fit int32 (the doubling test is written |du| - |du_prev| > |du_prev|, so
    it never forms 2 |du_prev|). r_est (< 2**31) times kc_q (< 2**31) is below
    2**62 and kp is clamped to kp_max_q <= 2**24, so kp * e is below 2**55; ki_q <= 2**16 keeps
    ki * e below 2**47; the sum of the two parts is below 2**40 after the shift and is clamped
    before it is stored.

    ``step`` runs the three stages in the period end's own call; ``step_isr`` one per call, at
    the period's first three samples, so the interrupt's worst sample carries one stage only.
    The command base follows the last stage. They read only what the interrupt path owns (r_c,
    kp, corr_on are the window work's results as committed), never a field the window work is
    writing.
    """
    law_target(p, s)
    law_step(p, s)
    law_guard(p, s)


def law_target(p, s):
    """Stage 1: the period's drop, the law's target."""
    if not s.corr_on:
        _correction_zero(s)
        return
    s.corr_target = 0 if s.iz_last else drop_period(p, s)


def law_step(p, s):
    """Stage 2: one step of the law, the output clamped and the integral held while it winds up."""
    if not s.corr_on:
        return
    e = -max(s.corr, s.integ) if s.iz_last else s.corr_target - s.corr
    integ = s.integ + rshift_round(p.ki_q * e, GAIN_FRAC)
    kp = 0 if s.kp_off >= 2 else s.kp
    u = rshift_round(kp * e, GAIN_FRAC) + integ
    top = corr_ceiling(p, s)
    if u > top and e > 0:
        integ = s.integ
    s.integ = sat(integ, 0, top)
    corr = sat(u, 0, top)
    s.corr_prev = s.corr
    s.corr = corr


def law_guard(p, s):
    """Stage 3: the ring guard on the step just taken (du = corr - corr_prev against du_prev),
    then the command base."""
    if s.corr_on:
        du = s.corr - s.corr_prev
        rang = ((du > 0 > s.du_prev or du < 0 < s.du_prev) and abs(du) - abs(s.du_prev) > abs(s.du_prev)
                and abs(du) > p.corr_max_q >> 6)
        if s.kp_off < 2:
            s.kp_off = s.kp_off + 1 if rang else 0
            if s.kp_off == 2:
                s.corr = s.integ
                du = s.corr - s.corr_prev
        s.du_prev = du
    s.cmd_base = command_base(p, s)


def _accumulate(p, s, adc_v, adc_i):
    """Clamp one pair of ADC codes and add them to the window's demodulation and code sums;
    return True at a period end.

    Scaling and overflow: codes are clamped to [0, adc_max] (< 2**16) and a
    table entry is below 2**15 in magnitude, so each product fits int32; the
    demodulation shift was chosen offline (algo.params.demod_shift_for) so a
    window of shifted products fits acc_bits <= 32. isum and vsum are below
    2**14 * 2**16 = 2**30. The rail test compares clamped codes only.
    """
    v = sat(adc_v, 0, p.adc_max)
    i = sat(adc_i, 0, p.adc_max)
    if i == 0:
        s.clipped |= 1
    if v == p.adc_max:
        s.clipped |= 2
    if i == p.adc_max:
        s.clipped |= 4
    if i == 0:
        s.i_zero = 1
    n = p.period - 1
    sn = p.ref_tab[s.phase]
    cs = p.ref_tab[(s.phase + (p.period >> 2)) & n]
    s.acc_vi += rshift_round(v * sn, p.demod_shift)
    s.acc_vq += rshift_round(v * cs, p.demod_shift)
    s.acc_ii += rshift_round(i * sn, p.demod_shift)
    s.acc_iq += rshift_round(i * cs, p.demod_shift)
    s.isum += i
    s.vsum += v
    s.psum += i
    s.phase = (s.phase + 1) & n
    s.count += 1
    return s.phase == 0


def _period_sums(p, s):
    """The period end's window bookkeeping: the code sums saved half-way through the window
    (trend removal). Returns True when the window is full."""
    if s.count == p.window >> 1:
        s.isum_h, s.vsum_h = s.isum, s.vsum
    return s.count == p.window


def _window_clear(s):
    """Start the next window's sums."""
    s.acc_vi = s.acc_vq = s.acc_ii = s.acc_iq = 0
    s.isum = s.vsum = s.isum_h = s.vsum_h = 0
    s.count = 0
    s.transient = 0
    s.clipped = 0


def _window_handover(s):
    """Hand the full window to the window work: copy what it reads into the w_* record, mark
    it pending, and start the next window's sums. The half-window differences fit int32: isum,
    vsum < 2**30 and isum_h, vsum_h < 2**29."""
    s.w_acc_vi, s.w_acc_vq, s.w_acc_ii, s.w_acc_iq = s.acc_vi, s.acc_vq, s.acc_ii, s.acc_iq
    s.w_isum = s.isum
    s.w_di = s.isum - 2 * s.isum_h
    s.w_dv = s.vsum - 2 * s.vsum_h
    s.w_clipped, s.w_transient = s.clipped, s.transient
    s.w_state = st.WIN_PENDING
    _window_clear(s)


def _window_late(p, s):
    """A window ended while the last one's work had not finished: drop it and force the
    correction to zero until a commit turns it back on."""
    _window_clear(s)
    s.late_windows = min(s.late_windows + 1, 0xFF)
    s.corr_on = 0
    _correction_zero(s)
    s.cmd_base = command_base(p, s)


def _commit(s):
    """Take over what the finished window work left for the interrupt path: the amplitude, the
    load-step threshold and the correction's inputs (r_c, kp, corr_on); a valid window turns the
    ring guard back on, and a correction held off is zero from here."""
    s.pert_amp = s.pert_next
    s.step_thr = s.thr_next
    s.r_c = s.rc_next
    s.kp = s.kp_next
    s.corr_on = s.on_next
    if s.status == st.STATUS_VALID:
        s.kp_off = 0
    if not s.corr_on:
        _correction_zero(s)
    s.w_state = st.WIN_IDLE


def _step_core(p, s, adc_v, adc_i, staged):
    """One sample (c_ref/step.c ld_step_core): the sums every call; at a period end the
    load-step detector and the period's sum (stage 0), the law's three stages (all in this call
    unless ``staged``, else one per call at the next three samples), and the window's hand-over.

    The interrupt path (staged): a window end hands its sums over (WIN_PENDING); the first
    period end after window_work has finished (WIN_DONE) commits its results; until then the
    correction runs on the last committed ones. When the next window ends and the work has still
    not finished, that window is dropped (late_windows counts it) and the correction is forced
    to zero until the work catches up.
    """
    if _accumulate(p, s, adc_v, adc_i):
        if s.w_state == st.WIN_DONE:
            _commit(s)
        _period_end(s)
        if not staged:
            correct(p, s)
        if _period_sums(p, s):
            if s.w_state == st.WIN_IDLE:
                _window_handover(s)
            else:
                _window_late(p, s)
    elif staged and s.phase <= 3 and s.have_prev:
        (law_target, law_step, law_guard)[s.phase - 1](p, s)
    s.cmd = _command(p, s)
    return s.cmd


def step_isr(p, s, adc_v, adc_i):
    """The interrupt path: one sample, the correction law spread over the period's first three
    samples and the window's work left to ``window_work`` (main loop)."""
    return _step_core(p, s, adc_v, adc_i, True)


def step(p, s, adc_v, adc_i):
    """Take one pair of ADC codes, return the command code for the next sample: the correction
    law whole at each period end, and a window end's work (``window_work``) done and committed in
    the same call, so its amplitude and load-step threshold, and a forced zero of the correction,
    are in the command at once (c_ref/step.c ld_step)."""
    cmd = _step_core(p, s, adc_v, adc_i, False)
    if s.w_state == st.WIN_PENDING and window_work(p, s):
        _commit(s)
        s.cmd_base = command_base(p, s)
        s.cmd = cmd = _command(p, s)
    return cmd
