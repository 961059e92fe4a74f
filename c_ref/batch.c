/*
 * Batch stepping for the host (mirrors algo/batch.py): many independent
 * instances over many samples per call, so that the caller's per-call
 * overhead does not dominate. Not needed in firmware.
 */
#include "linedrop.h"

void ld_step_batch(const ld_params_t *params, ld_state_t *states, size_t n_inst,
                   const uint16_t *adc_v, const uint16_t *adc_i, size_t n_samples,
                   uint16_t *cmd_out)
{
    size_t k, t;
    for (k = 0; k < n_inst; k++) {
        const ld_params_t *p = &params[k];
        ld_state_t *s = &states[k];
        size_t base = k * n_samples;
        for (t = 0; t < n_samples; t++) {
            cmd_out[base + t] = ld_step(p, s, adc_v[base + t], adc_i[base + t]);
        }
    }
}
