/*
 * Per-sample step, init and reset (mirrors algo/step.py).
 *
 * One call per ADC sample: demodulate the voltage and current codes against
 * the sine and cosine references, watch for load steps at each period end,
 * finish the window when it is full, and return the next command code.
 * Integer-only, no division, no globals.
 */
#include <string.h>
#include "linedrop.h"
#include "fixed.h"

/*
 * Command code for the next sample: the per-window base plus the perturbation.
 * Scaling and overflow: pert_amp (<= 32767) times a table entry (|.| < 2**15)
 * is below 2**30; cmd_base is at most 2**17 codes; the int32 sum is clamped
 * to [cmd_min, cmd_max].
 */
static inline uint16_t ld_command(const ld_params_t *p, const ld_state_t *s)
{
    unsigned tb = (unsigned)p->tab_bits - 1u;
    int32_t pert = (s->pert_amp * p->ref_tab[s->phase] + (int32_t)(1L << (tb - 1u))) >> tb;
    return (uint16_t)ld_sat(s->cmd_base + pert, p->cmd_min, p->cmd_max);
}

void ld_init(const ld_params_t *p, ld_state_t *s)
{
    memset(s, 0, sizeof *s);
    ld_reset(p, s);
}

/* Restart measurement and drop the correction; keep the resistance estimate
 * as the starting point for the next valid window. */
void ld_reset(const ld_params_t *p, ld_state_t *s)
{
    int32_t r_est = s->r_est;
    uint32_t windows = s->windows;
    memset(s, 0, sizeof *s);
    s->r_est = r_est;
    s->windows = windows;
    s->pert_amp = p->pert_min;
    s->bad_windows = p->fault_windows;
    s->cmd_base = ld_command_base(p, s);
    s->cmd = ld_command(p, s);
}

/*
 * Scaling and overflow: period sums are below 2**24 (256 samples of 16-bit
 * codes), so their difference and the shifted threshold fit int32.
 */
static void ld_period_end(const ld_params_t *p, ld_state_t *s)
{
    if (s->have_prev != 0u) {
        int32_t thr = s->psum_prev >> p->step_rel_shift;
        if (thr < p->step_min) {
            thr = p->step_min;
        }
        if (ld_abs32(s->psum - s->psum_prev) > thr) {
            s->transient = 1u;
        }
    }
    s->psum_prev = s->psum;
    s->have_prev = 1u;
    s->psum = 0;
}

/*
 * Scaling and overflow: codes are clamped to [0, adc_max] (< 2**16) and a
 * table entry is below 2**15 in magnitude, so each product plus its rounding
 * half fits int32 (checked offline); demod_shift was chosen offline so a
 * window of shifted products fits acc_bits <= 32. isum < 2**14 * 2**16.
 * The rail test compares clamped codes only.
 * A window ends on a period end, so its check sits inside the period's.
 */
uint16_t ld_step(const ld_params_t *p, ld_state_t *s, uint16_t adc_v, uint16_t adc_i)
{
    int32_t v = adc_v > p->adc_max ? p->adc_max : adc_v;
    int32_t i = adc_i > p->adc_max ? p->adc_max : adc_i;
    unsigned ds = p->demod_shift;
    int32_t half = (int32_t)((1UL << ds) >> 1);
    uint16_t n = (uint16_t)((1u << p->period_log2) - 1u);
    int32_t sn = p->ref_tab[s->phase];
    int32_t cs = p->ref_tab[(s->phase + (1u << p->period_log2 >> 2)) & n];

    if (v == p->adc_max || i == p->adc_max || i == 0) {
        s->clipped = 1u;
    }
    s->acc_vi += (v * sn + half) >> ds;
    s->acc_vq += (v * cs + half) >> ds;
    s->acc_ii += (i * sn + half) >> ds;
    s->acc_iq += (i * cs + half) >> ds;
    s->isum += i;
    s->psum += i;
    s->phase = (uint16_t)((s->phase + 1u) & n);
    s->count++;
    if (s->phase == 0u) {
        ld_period_end(p, s);
        if (s->count == (uint16_t)(1u << p->window_log2)) {
            ld_window_end(p, s);
        }
    }
    s->cmd = ld_command(p, s);
    return s->cmd;
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
