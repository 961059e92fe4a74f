/*
 * Per-sample step, init and reset (mirrors algo/step.py).
 *
 * One call per ADC sample: demodulate the voltage and current codes against
 * the sine and cosine references; at each period end watch for load steps and
 * move the correction one step of its proportional-plus-integral law; hand the
 * window over to its work when it is full; return the next command code.
 * Integer-only, no division, no globals.
 */
#include <string.h>
#include "linedrop.h"
#include "fixed.h"

/*
 * Command code for the next sample: the per-window base plus the perturbation.
 * Scaling and overflow: pert_amp (<= 2**15) times a table entry (< 2**15)
 * is below 2**30; cmd_base is at most 2**16 + 2**16 codes; the int32 sum is
 * clamped to [cmd_min, cmd_max].
 */
static inline uint16_t ld_command(const ld_params_t *p, const ld_state_t *s)
{
    unsigned tb = (unsigned)p->tab_bits - 1u;
    int32_t pert = (s->pert_amp * p->ref_tab[s->phase] + (int32_t)(1L << (tb - 1u))) >> tb;
    return (uint16_t)ld_sat(s->cmd_base + pert, p->cmd_min, p->cmd_max);
}

/* A fresh state: no estimate, no correction, perturbation at its floor. */
void ld_init(const ld_params_t *p, ld_state_t *s)
{
    memset(s, 0, sizeof *s);
    ld_reset(p, s);
}

/*
 * Restart measurement and drop the correction; keep the resistance estimate.
 * The kept estimate is for reporting only: the correction stays at zero until a valid window
 * after the reset, and that window replaces the estimate outright (valid_run is 0).
 */
void ld_reset(const ld_params_t *p, ld_state_t *s)
{
    int32_t r_est = s->r_est;
    uint32_t windows = s->windows;
    memset(s, 0, sizeof *s);
    s->r_est = r_est;
    s->windows = windows;
    s->pert_amp = p->pert_min;
    s->pert_next = p->pert_min;
    s->step_thr = ld_step_threshold(p, 0);
    s->thr_next = s->step_thr;
    s->bad_windows = p->fault_windows;
    s->cmd_base = ld_command_base(p, s);
    s->cmd = ld_command(p, s);
}

/*
 * Stage 0 of a period end: flag a load step when consecutive whole-period current sums differ
 * by more than a share of the current swing (step_thr, ld_step_threshold of the last valid
 * window's swing), and keep the period's sum and current-at-0 flag for the correction law.
 * Scaling and overflow: period sums are below 2**24 (256 samples of 16-bit codes), so their
 * difference fits int32.
 */
static void ld_period_end(ld_state_t *s)
{
    if (s->have_prev != 0u && ld_abs32(s->psum - s->psum_prev) > s->step_thr) {
        s->transient = 1u;
    }
    s->psum_prev = s->psum;
    s->iz_last = s->i_zero;
    s->have_prev = 1u;
    s->psum = 0;
    s->i_zero = 0u;
}

/*
 * The period's estimated drop (R-hat - ESR) * mean current in Q corr_frac DAC codes: what the
 * correction tracks, from the committed r_c = R-hat - ESR and the period sum psum_prev. Not
 * clamped to corr_max_q: with the correction at its ceiling the error must still read the load
 * voltage's shortfall.
 * Scaling and overflow: r_c is in [0, 2**31) and psum_prev below 2**24, so their product is
 * below 2**55; after the shift the V-code drop (Q LD_DROP_FRAC) is saturated to int32, and times
 * corr_gain_q (int32) it is below 2**62.
 */
static int32_t ld_drop_period(const ld_params_t *p, const ld_state_t *s)
{
    unsigned sh = (unsigned)p->r_frac + p->period_log2 - LD_DROP_FRAC;
    int32_t drop = ld_sat_s32(ld_rshift_round64((int64_t)s->r_c * s->psum_prev, sh));
    int64_t d = ld_rshift_round64((int64_t)drop * p->corr_gain_q,
                                  LD_GAIN_FRAC + LD_DROP_FRAC - (unsigned)p->corr_frac);
    return (int32_t)ld_sat64(d, 0, INT32_MAX);
}

/* The correction and its state at zero (a forced zero, or no confirmed estimate). */
static void ld_correction_zero(ld_state_t *s)
{
    s->corr = 0;
    s->corr_target = 0;
    s->integ = 0;
    s->du_prev = 0;
    s->corr_prev = 0;
}

/*
 * Highest correction the command can carry this period, Q corr_frac DAC codes: corr_max_q,
 * lowered to the room the command has above target_code under cmd_max with the perturbation
 * on top (ld_command_base's own cap), so the law's output is the correction the plant gets. A
 * correction above that room would reach the command only in part, the law's error would read
 * the load higher than it is, and near the ceiling the loop locks into a cycle from one period
 * to the next with the load left low.
 * Scaling and overflow: cmd_max - pert_amp - target_code is below 2**16 and corr_frac at most
 * 8, so the room fits int32.
 */
static int32_t ld_corr_ceiling(const ld_params_t *p, const ld_state_t *s)
{
    int32_t room = (int32_t)p->cmd_max - (int32_t)p->target_code;
    room -= s->pert_amp;
    if (room < 0) {
        room = 0;
    }
    room = (int32_t)((uint32_t)room << p->corr_frac);
    return room < p->corr_max_q ? room : p->corr_max_q;
}

/*
 * One period of the correction law, in three stages (ld_law_target, ld_law_step, ld_law_guard):
 * proportional-plus-integral on the error e = drop - corr.
 * With V-hat = (target + corr) - (R-hat - ESR) * I the supply's reading of the load voltage,
 * e = target - V-hat. corr = kp * e + integ, integ += ki * e, with kp = R-hat * C / tau and
 * ki = T_period / tau: the zero at R-hat * C cancels the cable-capacitor lag, the loop closes
 * with time constant tau, and no steady error is left. The output is clamped to
 * [0, the ceiling] (ld_corr_ceiling); the integral does not move while the output sits above
 * the ceiling and the error pushes further up (conditional integration, the anti-windup). At the floor it moves
 * freely: it is itself kept in [0, the ceiling], so it cannot wind below zero, and holding it
 * there would undo a load dump: the proportional part takes the output to 0, the held
 * integral brings it straight back the next period, and the correction swings between 0 and
 * its old value every period. While the committed window work holds the correction off
 * (corr_on 0: the fault counter at fault_windows, or no second valid window has confirmed the
 * estimate yet, valid_run < 2), the correction and its integral are zero.
 * A period with a current code at 0 tracks a drop of zero: the load draws less than the
 * perturbation's current swing, the ADC cannot show the negative half, and the period sum of
 * what it does show reads high. Tracking it would let each correction step's charging current
 * (seen when positive, clipped when negative) ratchet the correction up. With the target at
 * zero the correction can only fall while the current clips; the load then sits low by at most
 * (R - ESR) times a current below the swing, until the window's `clipped` outcome has halved
 * the perturbation enough for the current to clear code 0. Its error is taken against the
 * larger of the correction and its integral: once the proportional part has taken the output
 * to 0, a current still at code 0 says the load sits at or above the supply (after a load
 * dump the capacitor feeds back into the supply, which the unipolar ADC cannot show), and the
 * integral falls at the loop's rate instead of holding until the capacitor has discharged
 * through the cable.
 * Ring guard: with the load capacitor there, a step of the correction draws its own charging
 * current and the error hardly sees it; without it (capacitor open) the error sees the whole
 * step and a proportional gain above 1 makes the correction swing rail to rail every period.
 * Two steps in a row that each reverse the last one, more than double it and exceed a 64th
 * of corr_max turn the proportional part off (kp_off reaches 2) until the next valid window,
 * from the period that trips it on: that period's output is the integral alone, so the step
 * that would have been the third swing is never taken. (A load with a negative incremental
 * resistance, constant power, makes the swing grow several-fold a period; an absolute growth
 * test against the ceiling let it reach the ceiling first.) One such step alone (the start's
 * first kick can be one) only counts (kp_off 1). The integral part alone is stable without
 * the capacitor.
 * Scaling and overflow: corr and corr_target are in [0, 2**31), so |e| < 2**31, and du, du_prev
 * and |du| - |du_prev| fit int32. kp (the committed ld_gain_kp of r_est) is at most
 * kp_max_q <= 2**24, so kp * e is below 2**55; ki_q <= 2**16 keeps
 * ki * e below 2**47; the sum of the two parts is below 2**40 after the shift and is clamped
 * before it is stored. (The doubling test is written |du| - |du_prev| > |du_prev|, the same
 * integers, so it never forms 2 |du_prev|.)
 * ld_step runs the three stages in the period end's own call; ld_step_isr one per call, at the
 * period's first three samples, so the interrupt's worst sample carries one stage only. The
 * command base follows the last stage: the correction reaches the command three samples later.
 * They read only what the interrupt path owns (r_c, kp, corr_on are the window work's results
 * as committed), never a field the window work is writing.
 */

/* Stage 1: the period's drop, the law's target. */
static void ld_law_target(const ld_params_t *p, ld_state_t *s)
{
    if (s->corr_on == 0u) {
        ld_correction_zero(s);
        return;
    }
    s->corr_target = s->iz_last != 0u ? 0 : ld_drop_period(p, s);
}

/* Stage 2: one step of the law, the output clamped and the integral held while it winds up. */
static void ld_law_step(const ld_params_t *p, ld_state_t *s)
{
    int32_t e, corr, top, kp;
    int64_t integ, u;

    if (s->corr_on == 0u) {
        return;
    }
    if (s->iz_last != 0u) {
        e = -(s->corr > s->integ ? s->corr : s->integ);
    } else {
        e = s->corr_target - s->corr;
    }
    integ = (int64_t)s->integ + ld_rshift_round64((int64_t)p->ki_q * e, LD_GAIN_FRAC);
    kp = s->kp_off < 2u ? s->kp : 0;
    u = ld_rshift_round64((int64_t)kp * e, LD_GAIN_FRAC) + integ;
    top = ld_corr_ceiling(p, s);
    if (u > top && e > 0) {
        integ = s->integ;
    }
    s->integ = (int32_t)ld_sat64(integ, 0, top);
    corr = (int32_t)ld_sat64(u, 0, top);
    s->corr_prev = s->corr;
    s->corr = corr;
}

/*
 * Stage 3: the ring guard on the step just taken (du = corr - corr_prev against du_prev), then
 * the command base.
 */
static void ld_law_guard(const ld_params_t *p, ld_state_t *s)
{
    int32_t du = s->corr - s->corr_prev;
    int32_t adu = ld_abs32(du);
    int32_t adu_prev = ld_abs32(s->du_prev);
    int rang;

    if (s->corr_on != 0u) {
        rang = ((du > 0 && s->du_prev < 0) || (du < 0 && s->du_prev > 0)) &&
               adu - adu_prev > adu_prev && adu > (p->corr_max_q >> 6);
        if (s->kp_off < 2u) {
            s->kp_off = rang ? (uint8_t)(s->kp_off + 1u) : 0u;
            if (s->kp_off == 2u) {
                s->corr = s->integ;
                du = s->corr - s->corr_prev;
            }
        }
        s->du_prev = du;
    }
    s->cmd_base = ld_command_base(p, s);
}

/*
 * Clamp one pair of ADC codes and add them to the window's demodulation and code sums; return
 * 1 at a period end.
 * Scaling and overflow: codes are clamped to [0, adc_max] (< 2**16) and a
 * table entry is below 2**15 in magnitude, so each product fits int32; the
 * demodulation shift was chosen offline (algo.params.demod_shift_for) so a
 * window of shifted products fits acc_bits <= 32. isum and vsum are below
 * 2**14 * 2**16 = 2**30. The rail test compares clamped codes only.
 */
static inline uint8_t ld_accumulate(const ld_params_t *p, ld_state_t *s, uint16_t adc_v,
                                uint16_t adc_i)
{
    int32_t v = adc_v > p->adc_max ? p->adc_max : adc_v;
    int32_t i = adc_i > p->adc_max ? p->adc_max : adc_i;
    unsigned ds = p->demod_shift;
    int32_t half = (int32_t)((1UL << ds) >> 1);
    uint16_t n = (uint16_t)((1u << p->period_log2) - 1u);
    int32_t sn = p->ref_tab[s->phase];
    int32_t cs = p->ref_tab[(s->phase + (1u << p->period_log2 >> 2)) & n];

    if (i == 0) {
        s->clipped |= 1u;
    }
    if (v == p->adc_max) {
        s->clipped |= 2u;
    }
    if (i == p->adc_max) {
        s->clipped |= 4u;
    }
    if (i == 0) {
        s->i_zero = 1u;
    }
    s->acc_vi += (v * sn + half) >> ds;
    s->acc_vq += (v * cs + half) >> ds;
    s->acc_ii += (i * sn + half) >> ds;
    s->acc_iq += (i * cs + half) >> ds;
    s->isum += i;
    s->vsum += v;
    s->psum += i;
    s->phase = (uint16_t)((s->phase + 1u) & n);
    s->count++;
    return s->phase == 0u ? 1u : 0u;
}

/*
 * The period end's window bookkeeping: the code sums saved half-way through the window (trend
 * removal). Returns 1 when the window is full.
 */
static inline uint8_t ld_period_sums(const ld_params_t *p, ld_state_t *s)
{
    if (s->count == (uint16_t)(1u << p->window_log2 >> 1)) {
        s->isum_h = s->isum;
        s->vsum_h = s->vsum;
    }
    return s->count == (uint16_t)(1u << p->window_log2) ? 1u : 0u;
}

/* Start the next window's sums. */
static void ld_window_clear(ld_state_t *s)
{
    s->acc_vi = 0;
    s->acc_vq = 0;
    s->acc_ii = 0;
    s->acc_iq = 0;
    s->isum = 0;
    s->vsum = 0;
    s->isum_h = 0;
    s->vsum_h = 0;
    s->count = 0u;
    s->transient = 0u;
    s->clipped = 0u;
}

/*
 * Hand the full window to the window work: copy what it reads into the w_* record, mark it
 * pending, and start the next window's sums. The half-window differences fit int32: isum,
 * vsum < 2**30 and isum_h, vsum_h < 2**29.
 */
static void ld_window_handover(ld_state_t *s)
{
    s->w_acc_vi = s->acc_vi;
    s->w_acc_vq = s->acc_vq;
    s->w_acc_ii = s->acc_ii;
    s->w_acc_iq = s->acc_iq;
    s->w_isum = s->isum;
    s->w_di = s->isum - 2 * s->isum_h;
    s->w_dv = s->vsum - 2 * s->vsum_h;
    s->w_clipped = s->clipped;
    s->w_transient = s->transient;
    s->w_state = LD_WIN_PENDING;
    ld_window_clear(s);
}

/*
 * A window ended while the last one's work had not finished: drop it and force the correction
 * to zero until a commit turns it back on.
 */
static void ld_window_late(const ld_params_t *p, ld_state_t *s)
{
    ld_window_clear(s);
    if (s->late_windows < UINT8_MAX) {
        s->late_windows++;
    }
    s->corr_on = 0u;
    ld_correction_zero(s);
    s->cmd_base = ld_command_base(p, s);
}

/*
 * Take over what the finished window work left for the interrupt path: the amplitude, the
 * load-step threshold and the correction's inputs (r_c, kp, corr_on); a valid window turns the
 * ring guard back on, and a correction held off is zero from here.
 */
static void ld_commit(ld_state_t *s)
{
    s->pert_amp = s->pert_next;
    s->step_thr = s->thr_next;
    s->r_c = s->rc_next;
    s->kp = s->kp_next;
    s->corr_on = s->on_next;
    if (s->status == LD_STATUS_VALID) {
        s->kp_off = 0u;
    }
    if (s->corr_on == 0u) {
        ld_correction_zero(s);
    }
    s->w_state = LD_WIN_IDLE;
}

/*
 * One sample: the sums every call; at a period end the load-step detector and the period's
 * sum (stage 0), the correction law's three stages (all in this call when staged is 0, else
 * one per call at the next three samples), and the window's hand-over.
 * The interrupt path (staged): a window end hands its sums over (LD_WIN_PENDING); the first
 * period end after ld_window_work has finished (LD_WIN_DONE) commits its results; until then
 * the correction runs on the last committed ones. When the next window ends and the work has
 * still not finished, that window is dropped (late_windows counts it) and the correction is
 * forced to zero until the work catches up.
 * Scaling and overflow: as each part's.
 */
/* Inlined into both entry points in a build for speed (one call less per sample for ld_step),
 * kept once in a build for size. */
#if defined(__GNUC__) && !defined(__OPTIMIZE_SIZE__)
#define LD_HOT_INLINE static inline __attribute__((always_inline))
#else
#define LD_HOT_INLINE static inline
#endif

LD_HOT_INLINE uint16_t ld_step_core(const ld_params_t *p, ld_state_t *s, uint16_t adc_v,
                                    uint16_t adc_i, uint8_t staged)
{
    if (ld_accumulate(p, s, adc_v, adc_i) != 0u) {
        if (s->w_state == LD_WIN_DONE) {
            ld_commit(s);
        }
        ld_period_end(s);
        if (staged == 0u) {
            ld_law_target(p, s);
            ld_law_step(p, s);
            ld_law_guard(p, s);
        }
        if (ld_period_sums(p, s) != 0u) {
            if (s->w_state == LD_WIN_IDLE) {
                ld_window_handover(s);
            } else {
                ld_window_late(p, s);
            }
        }
    } else if (staged != 0u && s->phase <= 3u && s->have_prev != 0u) {
        if (s->phase == 1u) {
            ld_law_target(p, s);
        } else if (s->phase == 2u) {
            ld_law_step(p, s);
        } else {
            ld_law_guard(p, s);
        }
    }
    s->cmd = ld_command(p, s);
    return s->cmd;
}

/*
 * The interrupt path: one sample, the correction law spread over the period's first three
 * samples and the window's work left to ld_window_work (main loop).
 */
uint16_t ld_step_isr(const ld_params_t *p, ld_state_t *s, uint16_t adc_v, uint16_t adc_i)
{
    return ld_step_core(p, s, adc_v, adc_i, 1u);
}

/*
 * Take one pair of ADC codes, return the command code for the next sample: the correction law
 * whole at each period end, and a window end's work (ld_window_work) done and committed in the
 * same call, so its amplitude and load-step threshold, and a forced zero of the correction, are
 * in the command at once.
 */
uint16_t ld_step(const ld_params_t *p, ld_state_t *s, uint16_t adc_v, uint16_t adc_i)
{
    uint16_t cmd = ld_step_core(p, s, adc_v, adc_i, 0u);
    if (s->w_state == LD_WIN_PENDING && ld_window_work(p, s) != 0u) {
        ld_commit(s);
        s->cmd_base = ld_command_base(p, s);
        s->cmd = ld_command(p, s);
        cmd = s->cmd;
    }
    return cmd;
}

uint32_t ld_version(void)
{
    return ((uint32_t)LD_VERSION_MAJOR << 16) | ((uint32_t)LD_VERSION_MINOR << 8) |
           (uint32_t)LD_VERSION_PATCH;
}

size_t ld_state_size(void)
{
    return sizeof(ld_state_t);
}

size_t ld_params_size(void)
{
    return sizeof(ld_params_t);
}
