/*
 * Host-only compiled closed loop (see plant_loop.h). Each block below names the numpy code it
 * follows; the order of floating-point operations is the same, so the two agree to rounding.
 */
#include <math.h>
#include "plant_loop.h"

#define LDP_CC 0
#define LDP_RES 1
#define LDP_CP 2
#define LDP_LAMP 3

/* numpy's maximum/minimum: a NaN in either operand gives NaN. */
static double ldp_max(double a, double b) { return (a != a || a >= b) ? a : b; }
static double ldp_min(double a, double b) { return (a != a || a <= b) ? a : b; }

/* LoadBank.value_at, _statics and companion, and Plant._wanted's short, for scenario j at t. */
static void ldp_companion(const ldp_batch_t *b, size_t j, double t, double v, double *g, double *i_n)
{
    int kind = b->kind[j];
    double val = b->prof[j] ? b->slope[j] * (t - b->x0[j]) + b->y0[j] : b->val_base[j];
    double gg = 0.0, ii = 0.0;
    if (kind == LDP_RES) {
        gg = 1.0 / val;
    } else if (kind == LDP_CC) {
        ii = val;
    } else if (kind == LDP_CP) {
        gg = -val / (v * v);
        ii = 2.0 * val / v;
    }
    if (b->lockout[j] && !b->on[j]) {
        gg = 0.0;
        ii = 0.0;
    }
    if (kind == LDP_LAMP) {
        gg = 1.0 / (b->r_hot[j] * pow(b->u[j], b->lamp_exp));
    }
    if (b->shorted[j]) {
        gg = b->g_short;
        ii = 0.0;
    }
    *g = gg;
    *i_n = ii;
}

/* Plant._sync's staleness test: |g - g_fold| > rel * max(|g|, |g_fold|), false with a NaN. */
static int ldp_stale(double g, double gf, double rel)
{
    double m = ldp_max(fabs(g), fabs(gf));
    return fabs(g - gf) > rel * m;
}

/* Sensing.Adc.convert for one channel. */
static int64_t ldp_code(double x, double lsb, double gain, double offset, double noise, double max)
{
    double raw = x * lsb;
    raw = raw * gain;
    raw = raw + offset;
    raw = raw + noise;
    raw = raw + 0.5;
    raw = floor(raw);
    raw = ldp_min(ldp_max(raw, 0.0), max);
    return (int64_t)raw;
}

/* One scenario's sample after the checks: Plant.step from the clamp on, LoadBank.advance and
 * update_lockout, Adc.convert with stuck codes, and the next command. */
static void ldp_sample(ldp_batch_t *b, size_t j, size_t k, size_t row, double g, double i_n)
{
    size_t n = b->n, r, c;
    double *z = b->z;
    double command_v, v0 = b->v_load[j], out[5], outc[5], noise_v, noise_i;
    int64_t vc, ic;
    uint16_t next;

    /* closed_loop.drive: the command codes through the DAC. */
    command_v = ldp_min(ldp_max(b->cmd[j], 0.0), b->dac_max[j]) * b->v_per_code[j];
    /* Plant.step: clamp, load current source, the linear step. */
    z[3 * n + j] = ldp_min(ldp_max(command_v, 0.0), b->max_v[j]);
    z[4 * n + j] = i_n + (g - b->g_fold[j]) * v0;
    for (r = 0; r < 5; r++) {
        double acc = 0.0;
        for (c = 0; c < 5; c++) {
            acc += b->w0[(c * 5 + r) * n + j] * z[c * n + j];
        }
        out[r] = acc;
    }
    /* Plant._limit. */
    if (b->has_limit) {
        int to_cc = out[1] > b->i_lim[j];
        if (b->mode[j] || to_cc) {
            int now;
            for (r = 0; r < 5; r++) {
                double acc = 0.0;
                for (c = 0; c < 6; c++) {
                    acc += b->w1[(c * 5 + r) * n + j] * z[c * n + j];
                }
                outc[r] = acc;
            }
            now = (b->mode[j] || to_cc) && !(b->mode[j] && outc[3] > out[3]) && b->closed[j];
            if (now) {
                for (r = 0; r < 5; r++) {
                    out[r] = outc[r];
                }
            }
            b->mode[j] = (uint8_t)now;
        }
    }
    /* LoadBank.advance: the lamp filament, forward Euler with the sample's starting voltage. */
    if (b->kind[j] == LDP_LAMP) {
        double u = b->u[j];
        double p = v0 * v0 / (b->r_hot[j] * pow(u, b->lamp_exp)) / b->rated_w[j];
        double loss = (pow(u, 4.0) - b->lamp_u_amb4) / (1.0 - b->lamp_u_amb4);
        double du = (p - loss) / b->lamp_tc[j];
        b->u[j] = ldp_max(u + b->dt_s * du, b->lamp_u_amb);
    }
    z[j] = out[0];
    z[n + j] = out[1];
    z[2 * n + j] = out[2];
    b->v_load[j] = out[4];
    /* LoadBank.update_lockout. */
    if (b->lockout[j]) {
        b->on[j] = (uint8_t)(b->on[j] ? out[4] >= b->cutoff_v[j] : out[4] >= b->restart_v[j]);
    }
    /* Rig.sample: supply-side voltage and current through the ADC. */
    noise_v = b->noise[(k * 2) * n + j];
    noise_i = b->noise[(k * 2 + 1) * n + j];
    vc = ldp_code(out[3], b->lsb[j], b->gain[j], b->offset[j], noise_v, b->adc_max[j]);
    ic = ldp_code(out[1], b->lsb[n + j], b->gain[j], b->offset[j], noise_i, b->adc_max[j]);
    if (b->stuck_v && b->stuck_v[j] >= 0) {
        vc = b->stuck_v[j];
    }
    if (b->stuck_i && b->stuck_i[j] >= 0) {
        ic = b->stuck_i[j];
    }
    if (b->params) {
        next = ld_step(&b->params[j], &b->states[j], (uint16_t)vc, (uint16_t)ic);
        b->cmd[j] = (double)next;
    } else {
        b->cmd[j] = b->cmd_const[j];
    }
    /* closed_loop.stream: the recorded channels. */
    {
        float **rec = b->rec;
        size_t at = row * n + j;
        if (rec[0]) rec[0][at] = (float)out[3];
        if (rec[1]) rec[1][at] = (float)out[1];
        if (rec[2]) rec[2][at] = (float)out[4];
        if (rec[3]) rec[3][at] = (float)command_v;
        if (b->params) {
            const ld_state_t *s = &b->states[j];
            if (rec[4]) rec[4][at] = (float)((double)s->r_est * b->r_unit[j]);
            if (rec[5]) rec[5][at] = (float)((double)s->corr * b->corr_unit[j]);
            if (rec[6]) rec[6][at] = (float)s->windows;
            if (rec[7]) rec[7][at] = (float)s->status;
            if (rec[8]) rec[8][at] = (float)s->kp_off;
        } else {
            if (rec[4]) rec[4][at] = (float)(0.0 * b->r_unit[j]);
            if (rec[5]) rec[5][at] = (float)(0.0 * b->corr_unit[j]);
        }
        if (b->trace) {
            b->trace[(row * 4) * n + j] = out[3];
            b->trace[(row * 4 + 1) * n + j] = out[1];
            b->trace[(row * 4 + 2) * n + j] = out[4];
            b->trace[(row * 4 + 3) * n + j] = b->cmd[j];
        }
        if (rec[9]) rec[9][at] = (float)vc;
        if (rec[10]) rec[10][at] = (float)ic;
        if (rec[11]) rec[11][at] = (float)b->cmd[j];
    }
}

size_t ldp_run(ldp_batch_t *b, size_t k0, size_t n_samples, size_t rec_row, int *why)
{
    size_t done, j, n = b->n;
    *why = LDP_DONE;
    for (done = 0; done < n_samples; done++) {
        size_t k = k0 + done;
        double t = (double)k * b->dt_s;
        double t_end = (double)(k + 1) * b->dt_s;
        if (done >= b->noise_rows) {
            *why = LDP_NOISE;
            return done;
        }
        if (!(b->stuck_lo <= t_end && t_end < b->stuck_hi)) {
            *why = LDP_STUCK;
            return done;
        }
        if (done > 0 && (t >= b->t_next_s || (double)k >= b->ramp_due_k)) {
            *why = LDP_WINDOW;
            return done;
        }
        for (j = 0; j < n; j++) {
            ldp_companion(b, j, t, b->v_load[j], &b->g_scratch[j], &b->i_scratch[j]);
            if (done > 0 && ldp_stale(b->g_scratch[j], b->g_fold[j], b->refold_rel)) {
                *why = LDP_REFOLD;
                return done;
            }
        }
        for (j = 0; j < n; j++) {
            ldp_sample(b, j, done, rec_row + done, b->g_scratch[j], b->i_scratch[j]);
        }
    }
    return done;
}
