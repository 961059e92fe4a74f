/*
 * Window-end estimate and correction update (mirrors algo/estimator.py).
 *
 * Runs once per measurement window: the real and quadrature parts of V/I,
 * the window's classification, the resistance estimate, the correction
 * target, the perturbation amplitude and one smoothing step of the held
 * correction. The only division of the algorithm is here.
 */
#include "linedrop.h"
#include "fixed.h"

/*
 * Scaling and overflow: the current pair is shifted right by sh so its larger
 * magnitude has at most LD_NORM_BITS+1 bits; the voltage pair (int32) takes
 * the same shift, so num and xnum are below 2**46 and den below 2**30.
 * num << r_frac (r_frac <= 16) stays below 2**62, x_max_q * den below 2**61.
 * den > 0 because the larger current magnitude is at least swing_min >= 1.
 * Order: too little current swing first (a cable open with the current near
 * code 0 stays a fault), then a code at a rail, a load step, and the
 * real-part and quadrature limits.
 */
static uint8_t ld_classify(const ld_params_t *p, const ld_state_t *s, int32_t *r_raw)
{
    int32_t ai = ld_abs32(s->acc_ii);
    int32_t aq = ld_abs32(s->acc_iq);
    int32_t m = ai > aq ? ai : aq;
    unsigned bl, sh;
    int32_t vi, vq, ii, iq;
    int64_t den, num, xnum, axnum;

    *r_raw = 0;
    if (m < p->swing_min) {
        return LD_STATUS_LOW_SWING;
    }
    bl = ld_bit_length((uint32_t)m);
    sh = bl > LD_NORM_BITS ? bl - LD_NORM_BITS : 0u;
    vi = ld_rshift_round_safe(s->acc_vi, sh);
    vq = ld_rshift_round_safe(s->acc_vq, sh);
    ii = ld_rshift_round_safe(s->acc_ii, sh);
    iq = ld_rshift_round_safe(s->acc_iq, sh);
    den = (int64_t)ii * ii + (int64_t)iq * iq;
    num = (int64_t)vi * ii + (int64_t)vq * iq;
    xnum = (int64_t)vq * ii - (int64_t)vi * iq;
    *r_raw = ld_sat_s32(ld_div_trunc(num * ((int64_t)1 << p->r_frac), den));
    if (s->clipped != 0u) {
        return LD_STATUS_CLIPPED;
    }
    if (s->transient != 0u) {
        return LD_STATUS_TRANSIENT;
    }
    if (*r_raw > p->r_max_q) {
        return LD_STATUS_R_HIGH;
    }
    if (*r_raw < 0) {
        return LD_STATUS_R_LOW;
    }
    axnum = xnum < 0 ? -xnum : xnum;
    if (axnum * ((int64_t)1 << p->r_frac) > (int64_t)p->x_max_q * den) {
        return LD_STATUS_REACTIVE;
    }
    return LD_STATUS_VALID;
}

/*
 * Window-mean drop r * I in V-ADC codes, Q LD_DROP_FRAC, saturated to int32.
 * Scaling and overflow: r_q (Q r_frac, < 2**31) times isum (< 2**30) is below
 * 2**61; the shift drops r_frac and the window's log2 length, keeping
 * LD_DROP_FRAC fraction bits (r_frac >= LD_DROP_FRAC).
 */
static int32_t ld_drop_vq(int32_t r_q, int32_t isum, const ld_params_t *p)
{
    unsigned sh = (unsigned)p->r_frac + p->window_log2 - LD_DROP_FRAC;
    return ld_sat_s32(ld_rshift_round64((int64_t)r_q * isum, sh));
}

/*
 * Perturbation amplitude for the next window (DAC codes, before the clamp).
 * A window without enough current swing doubles it, so a cable longer than
 * the floor was sized for still starts; a window with a code at a rail halves
 * it, so the swing backs off the rail; otherwise it is pert_fraction of the
 * estimated drop, falling at most by half a window.
 * Scaling and overflow: pert_amp <= 32767, so doubling fits int32 and halving
 * is a shift of a non-negative value; a drop
 * (Q LD_DROP_FRAC, int32) times pert_gain_q (Q LD_GAIN_FRAC, int32) is below
 * 2**62 before its shift.
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
 * perturbation, recomputed once per window.
 * Scaling and overflow: corr <= corr_max_q < 2**31, rounded without forming
 * corr + half; the result is at most 2**16 + 2**16 codes.
 */
int32_t ld_command_base(const ld_params_t *p, const ld_state_t *s)
{
    return (int32_t)p->target_code + ld_rshift_round_safe(s->corr, p->corr_frac);
}

/*
 * Scaling and overflow: estimate arithmetic stays in int32 because a valid
 * window's r_raw is clamped to [0, r_max_q] before it moves r_est in [0, r_max_q]; a drop
 * (Q LD_DROP_FRAC, int32) times a gain (Q LD_GAIN_FRAC, int32) is below 2**62
 * before its shift; results are clamped to int32 ranges given in params.
 */
void ld_window_end(const ld_params_t *p, ld_state_t *s)
{
    int32_t r_raw;
    uint8_t status = ld_classify(p, s, &r_raw);
    int32_t drop_total, drop_comp, r_comp;

    s->r_raw = r_raw;
    if (status == LD_STATUS_VALID) {
        int32_t target = r_raw > 0 ? r_raw : 0;
        int32_t d = ld_step_toward(s->r_est, target, p->r_shift) - s->r_est;
        d = ld_sat(d, -p->r_step_max_q, p->r_step_max_q);
        s->r_est = ld_sat(s->r_est + d, 0, p->r_max_q);
        s->bad_windows = 0u;
    } else if (status != LD_STATUS_TRANSIENT && status != LD_STATUS_CLIPPED &&
               s->bad_windows < UINT16_MAX) {
        /* A load step or a code at a rail only holds the estimate; counting it as a fault
         * window would let a step spread over several windows by the load capacitor force
         * the correction off. */
        s->bad_windows++;
    }
    if (s->bad_windows >= p->fault_windows) {
        s->r_est = 0;
    }
    drop_total = ld_drop_vq(s->r_est, s->isum, p);
    r_comp = s->r_est > p->esr_q ? s->r_est - p->esr_q : 0;
    drop_comp = ld_drop_vq(r_comp, s->isum, p);
    if (status == LD_STATUS_VALID || status == LD_STATUS_TRANSIENT ||
        status == LD_STATUS_CLIPPED) {
        unsigned sh = LD_GAIN_FRAC + LD_DROP_FRAC - (unsigned)p->corr_frac;
        int64_t t = ld_rshift_round64((int64_t)drop_comp * p->corr_gain_q, sh);
        s->corr_target = (int32_t)ld_sat64(t, 0, p->corr_max_q);
    } else {
        s->corr_target = 0;
    }
    s->pert_amp = (int32_t)ld_sat64(ld_next_pert_amp(p, s, status, drop_total),
                                    p->pert_min, p->pert_max);
    if (s->bad_windows >= p->fault_windows) {
        s->corr = 0;
    } else {
        s->corr = ld_step_toward(s->corr, s->corr_target, p->corr_shift);
    }
    s->cmd_base = ld_command_base(p, s);
    s->status = status;
    s->windows++;
    s->acc_vi = 0;
    s->acc_vq = 0;
    s->acc_ii = 0;
    s->acc_iq = 0;
    s->isum = 0;
    s->count = 0u;
    s->transient = 0u;
    s->clipped = 0u;
}
