/*
 * libFuzzer target: ld_step under every valid params block and any ADC sequence.
 *
 * Build and run (see c_ref/fuzz/README.md):
 *   clang -std=c99 -g -O1 -fsanitize=fuzzer,address,undefined \
 *         -fno-sanitize-recover=all -I c_ref c_ref/fuzz/fuzz_step.c \
 *         c_ref/step.c c_ref/estimator.c c_ref/fixed.c -o fuzz_step
 *   ./fuzz_step -max_total_time=600 corpus/
 *
 * Input bytes: [0] params block index (mod LD_FUZZ_N_PARAMS); [1] mode: bit 0
 * selects raw codes or a random walk, bit 1 asks for an ld_reset; [2] the
 * sample (x 64) at which that reset happens; then pairs of samples. Raw mode
 * reads little-endian uint16 (v, i) pairs, so codes above adc_max exercise the
 * input clamp; walk mode reads int8 (dv, di) steps from a mid-scale start.
 * The pairs are replayed cyclically until at least three windows have run, so
 * the window-end arithmetic runs for every block, long windows included.
 *
 * Besides sanitizer findings, every state invariant the range analysis
 * promises is checked after every step; a violation aborts (a crash report).
 */
#include <stdint.h>
#include <stdlib.h>
#include <string.h>
#include "linedrop.h"
#include "params_corpus.h"

#define LD_FUZZ_HEADER 3u
#define LD_FUZZ_MAX_STEPS 65536u

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);

static void ld_fuzz_require(int ok)
{
    if (!ok) {
        abort();
    }
}

static int ld_fuzz_within(int32_t x, int64_t bound)
{
    return (int64_t)x <= bound && (int64_t)x >= -bound;
}

/* Every bound the offline range analysis guarantees, checked after a step. */
static void ld_fuzz_check(const ld_params_t *p, const ld_state_t *s, uint16_t cmd)
{
    int64_t acc_lim = ((int64_t)1 << (p->acc_bits - 1u)) - 1;
    int64_t window = (int64_t)1 << p->window_log2;
    int64_t period = (int64_t)1 << p->period_log2;

    ld_fuzz_require(cmd == s->cmd && cmd >= p->cmd_min && cmd <= p->cmd_max);
    ld_fuzz_require(ld_fuzz_within(s->acc_vi, acc_lim) && ld_fuzz_within(s->acc_vq, acc_lim));
    ld_fuzz_require(ld_fuzz_within(s->acc_ii, acc_lim) && ld_fuzz_within(s->acc_iq, acc_lim));
    ld_fuzz_require(s->isum >= 0 && s->isum <= (int64_t)p->adc_max * window);
    ld_fuzz_require(s->vsum >= 0 && s->vsum <= (int64_t)p->adc_max * window);
    ld_fuzz_require(s->isum_h >= 0 && s->isum_h <= s->isum);
    ld_fuzz_require(s->vsum_h >= 0 && s->vsum_h <= s->vsum);
    ld_fuzz_require(s->psum >= 0 && s->psum <= (int64_t)p->adc_max * period);
    ld_fuzz_require(s->psum_prev >= 0 && s->psum_prev <= (int64_t)p->adc_max * period);
    ld_fuzz_require(s->r_est >= 0 && s->r_est <= p->r_max_q);
    ld_fuzz_require(s->corr >= 0 && s->corr <= p->corr_max_q);
    ld_fuzz_require(s->integ >= 0 && s->integ <= p->corr_max_q);
    ld_fuzz_require(s->corr_target >= 0);   /* the drop itself: not clamped to corr_max_q */
    ld_fuzz_require(s->swing >= 0);
    ld_fuzz_require(s->pert_amp >= p->pert_min && s->pert_amp <= p->pert_max);
    ld_fuzz_require(s->cmd_base >= p->target_code &&
                    s->cmd_base <= p->target_code + (p->corr_max_q >> p->corr_frac) + 1);
    ld_fuzz_require(s->phase < period && s->count < window);
    ld_fuzz_require(s->status <= LD_STATUS_R_LOW);
    ld_fuzz_require(s->have_prev <= 1u && s->transient <= 1u && s->clipped <= 7u && s->i_zero <= 1u);
    ld_fuzz_require(s->bad_windows < p->fault_windows ||
                    (s->corr == 0 && s->integ == 0 && s->corr_target == 0 && s->valid_run == 0u));
}

static uint16_t ld_fuzz_walk(uint16_t x, uint8_t b)
{
    int32_t y = (int32_t)x + (int8_t)b;
    return (uint16_t)(y < 0 ? 0 : (y > UINT16_MAX ? UINT16_MAX : y));
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    const ld_params_t *p;
    ld_state_t s;
    size_t n_pairs, k, n_steps;
    uint8_t mode;
    size_t reset_at;
    uint16_t v, i;

    if (size < LD_FUZZ_HEADER + 4u) {
        return 0;
    }
    p = &ld_fuzz_params[data[0] % LD_FUZZ_N_PARAMS];
    mode = data[1];
    reset_at = (size_t)data[2] * 64u;
    data += LD_FUZZ_HEADER;
    size -= LD_FUZZ_HEADER;
    n_pairs = size / 4u;
    n_steps = 3u * ((size_t)1 << p->window_log2);
    if (n_steps < n_pairs) {
        n_steps = n_pairs;
    }
    if (n_steps > LD_FUZZ_MAX_STEPS) {
        n_steps = LD_FUZZ_MAX_STEPS;
    }
    ld_init(p, &s);
    ld_fuzz_check(p, &s, s.cmd);
    v = (uint16_t)(p->adc_max / 2u);
    i = (uint16_t)(p->adc_max / 4u);
    for (k = 0; k < n_steps; k++) {
        const uint8_t *b = data + 4u * (k % n_pairs);
        uint16_t cmd;
        if ((mode & 1u) == 0u) {
            v = (uint16_t)(b[0] | (b[1] << 8));
            i = (uint16_t)(b[2] | (b[3] << 8));
        } else {
            v = ld_fuzz_walk(v, b[0]);
            i = ld_fuzz_walk(i, b[2]);
        }
        if ((mode & 2u) != 0u && k == reset_at) {
            ld_reset(p, &s);
            ld_fuzz_check(p, &s, s.cmd);
        }
        cmd = ld_step(p, &s, v, i);
        ld_fuzz_check(p, &s, cmd);
    }
    return 0;
}
