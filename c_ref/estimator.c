/*
 * Window-end estimate and perturbation update (mirrors algo/estimator.py).
 *
 * Runs once per measurement window, on the w_* record a window end leaves (inside ld_step, or
 * from the main loop after ld_step_isr): removes the DC and a linear trend from the
 * demodulation sums, turns them into the real and quadrature parts of V/I,
 * classifies the window, and updates the resistance estimate and the
 * perturbation amplitude. The correction itself moves every period
 * (ld_correct in step.c). The only divisions of the algorithm are here.
 */
#include "linedrop.h"
#include "fixed.h"

/*
 * A demodulation sum less the share a linear trend left in it.
 * diff is the second half-window's code sum less the first's; the trend's slope is
 * diff / (W**2 / 4) and it adds slope * sum(tab * t) to the sum, which kt_q holds per unit diff
 * (algo.params.trend_constants). DC needs no removal: whole periods of the table sum to zero.
 * Scaling and overflow: |diff| < 2**31 and |kt_q| < 2**31, so the product is below 2**62; the
 * result is within 2**31 of an int32 sum and is kept in int64.
 */
static inline int64_t ld_detrend(int32_t acc, int32_t diff, int32_t kt_q)
{
    return (int64_t)acc - ld_rshift_round64((int64_t)diff * kt_q, LD_KT_FRAC);
}

/*
 * The voltage pair turned back by the sampling phase (adc_phase_samples), in place.
 * Scaling and overflow: |vi|, |vq| < 2**33 and |rot_*_q| <= 2**ROT_FRAC, so each product is below
 * 2**48 and their sum below 2**49 (int64).
 */
static inline void ld_rotate(int64_t *vi, int64_t *vq, const ld_params_t *p)
{
    int64_t a = *vi, b = *vq;
    *vi = ld_rshift_round64(a * p->rot_c_q + b * p->rot_s_q, LD_ROT_FRAC);
    *vq = ld_rshift_round64(b * p->rot_c_q - a * p->rot_s_q, LD_ROT_FRAC);
}

static inline int64_t ld_abs64(int64_t x)
{
    return x < 0 ? -x : x;
}

/* Bit length of 0 <= u < 2**63, from the 32-bit ld_bit_length. */
static inline unsigned ld_bit_length64(int64_t u)
{
    uint32_t hi = (uint32_t)((uint64_t)u >> 32);
    return hi != 0u ? 32u + ld_bit_length(hi) : ld_bit_length((uint32_t)u);
}

/*
 * Return the status of the finished window and set *r_raw.
 * Order: too little current swing first (a cable open with the current near
 * code 0 stays a fault), then a code at a rail, a real part above r_max, a load step, and
 * the remaining real-part and quadrature limits. A real part above r_max outranks a load step:
 * with the capacitor gone the correction's own steps move the current and read as load steps
 * every window, while a load step with the capacitor there leaves the detrended real part near
 * the loop's, far below r_max; as a load step it would never count toward the forced zero.
 * A valid window also leaves its (detrended) current swing for
 * the load-step detector (swing; ld_window_work turns it into thr_next).
 * Scaling and overflow: the detrended pairs are within 2**32 and the rotated voltage pair
 * within 2**33 in magnitude. The current pair is shifted right by sh so its larger
 * magnitude has at most NORM_BITS+1 bits; the voltage pair takes the same shift, so it stays
 * below 2**33 and num and xnum below 2**49, den below 2**31. num << r_frac
 * (r_frac <= 16) is below 2**65 only in theory: the voltage pair is then clamped to +-2**31
 * after the shift (its ratio to the current pair is at most 2**31 / 2**14 V-codes per I-code
 * before saturating r_raw anyway), which keeps num << r_frac below 2**62 and
 * x_max_q * den below 2**62: int64 suffices.
 * So the shifted current pair is within 2**14 and the clamped voltage pair within int32: both
 * are held as int32 and their products are 32 x 32 -> 64-bit multiplies (one instruction on a
 * Cortex-M3/M4; a 64 x 64 multiply there is three).
 * den > 0 because the larger current magnitude is at least swing_min >= 1. Two checks state
 * what the range analysis shows and a value analysis cannot see through the shared shift (one
 * interval per variable): the shifted current pair is saturated to +-2**NORM_BITS (rounding
 * 2**b - 1 right by b - NORM_BITS never exceeds 2**NORM_BITS) and den = 0 reads low swing.
 * Neither ever acts; both are mirrored in the model.
 */
/* The normalised current pair's bound (see ld_classify). */
#define LD_NORM_LIM ((int64_t)1 << LD_NORM_BITS)

static uint8_t ld_classify(const ld_params_t *p, ld_state_t *s, int32_t *r_raw)
{
    int32_t di = s->w_di;
    int32_t dv = s->w_dv;
    int64_t ii0 = ld_detrend(s->w_acc_ii, di, p->kt_s_q);
    int64_t iq0 = ld_detrend(s->w_acc_iq, di, p->kt_c_q);
    int64_t m = ld_abs64(ii0) > ld_abs64(iq0) ? ld_abs64(ii0) : ld_abs64(iq0);
    int64_t vi0, vq0, den, num, xnum;
    int32_t vi, vq, ii, iq;
    unsigned bl, sh;

    *r_raw = 0;
    if (m < p->swing_min) {
        return LD_STATUS_LOW_SWING;
    }
    vi0 = ld_detrend(s->w_acc_vi, dv, p->kt_s_q);
    vq0 = ld_detrend(s->w_acc_vq, dv, p->kt_c_q);
    ld_rotate(&vi0, &vq0, p);
    bl = ld_bit_length64(m);
    sh = bl > LD_NORM_BITS ? bl - LD_NORM_BITS : 0u;
    vi = ld_sat_s32(ld_rshift_round64(vi0, sh));
    vq = ld_sat_s32(ld_rshift_round64(vq0, sh));
    ii = (int32_t)ld_sat64(ld_rshift_round64(ii0, sh), -LD_NORM_LIM, LD_NORM_LIM);
    iq = (int32_t)ld_sat64(ld_rshift_round64(iq0, sh), -LD_NORM_LIM, LD_NORM_LIM);
    den = (int64_t)ii * ii + (int64_t)iq * iq;
    if (den == 0) {
        return LD_STATUS_LOW_SWING;
    }
    num = (int64_t)vi * ii + (int64_t)vq * iq;
    xnum = (int64_t)vq * ii - (int64_t)vi * iq;
    *r_raw = ld_sat_s32(ld_div_trunc(num * ((int64_t)1 << p->r_frac), den));
    if (s->w_clipped != 0u) {
        return LD_STATUS_CLIPPED;
    }
    if (*r_raw > p->r_max_q) {
        return LD_STATUS_R_HIGH;
    }
    if (s->w_transient != 0u) {
        return LD_STATUS_TRANSIENT;
    }
    if (*r_raw < 0) {
        return LD_STATUS_R_LOW;
    }
    if (ld_abs64(xnum) * ((int64_t)1 << p->r_frac) > (int64_t)p->x_max_q * den) {
        return LD_STATUS_REACTIVE;
    }
    s->swing = ld_sat_s32(m);
    return LD_STATUS_VALID;
}

/*
 * The correction's proportional gain for an estimate r_est: R-hat * C / tau, kp = r_est * kc_q,
 * capped at kp_max_q.
 * Scaling and overflow: r_est (< 2**31) times kc_q (< 2**31) is below 2**62; the result is
 * clamped to kp_max_q <= 2**24, so it is held as int32.
 */
static int32_t ld_gain_kp(const ld_params_t *p, int32_t r_est)
{
    int64_t kp64 = ld_rshift_round64((int64_t)r_est * p->kc_q, p->r_frac);
    return kp64 > p->kp_max_q ? p->kp_max_q : (int32_t)kp64;
}

/*
 * The load-step detector's threshold for a current swing: a share 2**-step_rel_shift of the
 * swing in period-sum codes, at least step_min.
 * Scaling and overflow: swing (< 2**31) times swing_psum_q (int32, checked in
 * algo.params.derive) is below 2**62; after the shift it can still exceed int32, and is
 * saturated there: a period-sum difference is below 2**24, so the comparison is unchanged.
 */
int32_t ld_step_threshold(const ld_params_t *p, int32_t swing)
{
    int64_t thr = ld_rshift_round64((int64_t)swing * p->swing_psum_q,
                                    LD_SWING_FRAC + (unsigned)p->step_rel_shift);
    if (thr < p->step_min) {
        thr = p->step_min;
    }
    return ld_sat_s32(thr);
}

/*
 * Window-mean drop r * I in V-ADC codes, Q LD_DROP_FRAC, saturated to int32.
 * Scaling and overflow: r_q (Q r_frac, < 2**31) times isum (< 2**30) is
 * below 2**61; the shift removes r_frac fraction bits and the window's
 * log2 length, keeping LD_DROP_FRAC (r_frac >= LD_DROP_FRAC).
 */
static int32_t ld_drop_vq(int32_t r_q, int32_t isum, const ld_params_t *p)
{
    unsigned sh = (unsigned)p->r_frac + p->window_log2 - LD_DROP_FRAC;
    return ld_sat_s32(ld_rshift_round64((int64_t)r_q * isum, sh));
}

/*
 * Perturbation amplitude for the next window (DAC codes, before the clamp).
 * A window without enough current swing doubles the amplitude, so a cable
 * longer than the floor was sized for still starts; a window with a code at
 * a rail halves it, so the swing backs off the rail; otherwise the amplitude
 * is pert_fraction of the estimated drop, falling at most by half a window.
 * Scaling and overflow: pert_amp <= 32767, so doubling fits int32 and
 * halving is a shift of a non-negative value; drop
 * (Q LD_DROP_FRAC, int32) times pert_gain_q (Q LD_GAIN_FRAC, int32) is below 2**62.
 */
static int64_t ld_next_pert_amp(const ld_params_t *p, const ld_state_t *s, uint8_t status,
                                int32_t drop_total)
{
    int64_t a, half;
    if (status == LD_STATUS_LOW_SWING) {
        return (int64_t)s->pert_amp * 2;
    }
    if (status == LD_STATUS_CLIPPED) {
        return (int64_t)(s->pert_amp >> 1);
    }
    a = ld_rshift_round64((int64_t)drop_total * p->pert_gain_q, LD_GAIN_FRAC + LD_DROP_FRAC);
    half = s->pert_amp >> 1;
    return a > half ? a : half;
}

/*
 * target_code + the correction rounded to DAC codes: the command less the
 * perturbation, recomputed once per period.
 * Kept at most cmd_max - pert_amp (but never below target_code), so the perturbation on top
 * of it is not cut by the ceiling: a cut sine lowers the command's mean by an amount that
 * depends on the correction, and near the ceiling the loop then rings with that cut from one
 * period to the next. The correction in the state is not changed; only the command is.
 * Scaling and overflow: corr is at most corr_max_q < 2**31; after the shift
 * it is at most 2**16 codes, so the sum fits int32 (rounded without forming
 * corr + half); cmd_max - pert_amp is above -2**15.
 */
int32_t ld_command_base(const ld_params_t *p, const ld_state_t *s)
{
    int32_t base = (int32_t)p->target_code + ld_rshift_round_safe(s->corr, p->corr_frac);
    int32_t top = (int32_t)p->cmd_max - s->pert_amp;

    if (top < (int32_t)p->target_code) {
        top = (int32_t)p->target_code;
    }
    return base < top ? base : top;
}

/*
 * Fold a valid window into the estimate.
 * The first valid window after init, a reset or a forced zero is taken as it is (valid_run 0);
 * the correction starts only once a second valid window confirms it: one within r_step_max of
 * it is averaged in (gain 1/2), one further off replaces it and waits for its own confirmation
 * (a window caught in a recharge or a current limit reads wrong once, not twice alike). Then
 * the gain falls as 1/4, 1/8 ... with the count of valid windows, down to the steady
 * 2**-r_shift, each step at most r_step_max.
 * Scaling and overflow: r_raw and r_est are in [0, r_max_q], so every difference fits int32.
 */
static void ld_update_estimate(const ld_params_t *p, ld_state_t *s, int32_t r_raw)
{
    unsigned shift = ld_bit_length(s->valid_run);
    if (shift > p->r_shift) {
        shift = p->r_shift;
    }
    if (s->valid_run == 0u ||
        (s->valid_run == 1u && ld_abs32(r_raw - s->r_est) > p->r_step_max_q)) {
        s->r_est = r_raw;
        s->valid_run = 1u;
        return;
    }
    {
        int32_t d = ld_step_toward(s->r_est, r_raw, shift) - s->r_est;
        d = ld_sat(d, -p->r_step_max_q, p->r_step_max_q);
        s->r_est = ld_sat(s->r_est + d, 0, p->r_max_q);
    }
    if (s->valid_run < UINT8_MAX) {
        s->valid_run++;
    }
}

/*
 * The window's work: classify the w_* record, update the estimate and the fault counter, and
 * leave for the interrupt path the amplitude, the load-step threshold and the correction's
 * inputs (the *_next fields, committed at a period end); returns 1, or 0 when no window waits
 * (w_state not LD_WIN_PENDING).
 * Called by ld_step at a window end, or by the firmware's main loop after ld_step_isr. It
 * writes only fields the interrupt path leaves alone while a window waits, and marks its end
 * (LD_WIN_DONE) with the last store. Compiler barriers around the flag's read and before its
 * store keep the compiler from caching the flag across calls or moving a result's store past
 * it (a single core needs no hardware barrier; the flag is one byte, written whole).
 * Scaling and overflow: drop (Q LD_DROP_FRAC, int32) times pert_gain_q (Q LD_GAIN_FRAC, int32) is
 * below 2**62 before its shift (ld_next_pert_amp).
 */
uint8_t ld_window_work(const ld_params_t *p, ld_state_t *s)
{
    int32_t r_raw;
    uint8_t status;
    int32_t drop_total;

    LD_COMPILER_BARRIER();
    if (s->w_state != (uint8_t)LD_WIN_PENDING) {
        return 0u;
    }
    LD_COMPILER_BARRIER();
    status = ld_classify(p, s, &r_raw);
    s->r_raw = r_raw;
    if (status == LD_STATUS_VALID) {
        ld_update_estimate(p, s, s->r_raw);
        s->bad_windows = 0u;
    } else if (status != LD_STATUS_TRANSIENT &&
               !(status == LD_STATUS_CLIPPED && (s->w_clipped & 2u) == 0u &&
                 (s->w_clipped & 5u) != 5u) &&
               s->bad_windows < UINT16_MAX) {
        /* A load step or a current code at one rail only holds the estimate; counting it as
         * a fault window would let a step spread over several windows by the load capacitor
         * force the correction to zero. The voltage at its rail, or the current at both rails
         * in one window, is a fault window: the supply is outside what the voltage ADC reads
         * (design warns where v_full_scale_v is below max_v), or the current swings over the
         * ADC's whole range, as when a plant without its capacitor runs away. */
        s->bad_windows++;
    }
    if (s->bad_windows >= p->fault_windows) {
        s->r_est = 0;
        s->valid_run = 0u;
    }
    s->on_next = (s->bad_windows < p->fault_windows && s->valid_run >= 2u) ? 1u : 0u;
    s->rc_next = s->r_est > p->esr_q ? s->r_est - p->esr_q : 0;
    s->kp_next = ld_gain_kp(p, s->r_est);
    s->thr_next = ld_step_threshold(p, s->swing);
    drop_total = ld_drop_vq(s->r_est, s->w_isum, p);
    s->pert_next = (int32_t)ld_sat64(ld_next_pert_amp(p, s, status, drop_total),
                                     p->pert_min, p->pert_max);
    s->status = status;
    s->windows++;
    LD_COMPILER_BARRIER();
    s->w_state = (uint8_t)LD_WIN_DONE;
    return 1u;
}
