/*
 * Host-only compiled closed loop (see plant_loop.h). Each block below names the numpy code it
 * follows; the order of floating-point operations is the same, so the two agree to rounding.
 */
#include <math.h>
#include <string.h>
#include "plant_loop.h"
#include "plant_systems.h"

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

/* One scenario's working copy while its block of samples runs: its step matrices and plant
 * inputs side by side (the batch holds them scenario last, n apart, which a scenario's own
 * loop would read from as many cache lines). */
typedef struct {
    double w0[LDP_W0_LEN];
    double w1[LDP_W1_LEN];
    double z[6];
} ldp_local_t;

/* DiscreteSystems.advance for one scenario: out[r] = sum over c of w[c * 5 + r] z[c], each sum
 * taken in einsum's order (c ascending, from 0.0); the five rows side by side, so the five sums
 * do not wait on each other. */
static void ldp_product(const double *w, const double *z, size_t n_in, double out[5])
{
    size_t r, c;
    for (r = 0; r < 5; r++) {
        out[r] = 0.0;
    }
    for (c = 0; c < n_in; c++) {
        for (r = 0; r < 5; r++) {
            out[r] += w[c * 5 + r] * z[c];
        }
    }
}

/* One scenario's sample after the checks: Plant.step from the clamp on, LoadBank.advance and
 * update_lockout, Adc.convert with stuck codes, and the next command. */
static void ldp_sample(ldp_batch_t *b, ldp_local_t *loc, size_t j, size_t k, size_t row, double g, double i_n)
{
    size_t n = b->n, r;
    double *z = loc->z;
    double command_v, v0 = b->v_load[j], out[5], outc[5], noise_v, noise_i;
    int64_t vc, ic;
    uint16_t next;

    /* closed_loop.drive: the command codes through the DAC. */
    command_v = ldp_min(ldp_max(b->cmd[j], 0.0), b->dac_max[j]) * b->v_per_code[j];
    /* Plant.step: clamp, load current source, the linear step. */
    z[3] = ldp_min(ldp_max(command_v, 0.0), b->max_v[j]);
    z[4] = i_n + (g - b->g_fold[j]) * v0;
    ldp_product(loc->w0, z, 5, out);
    /* Plant._limit. */
    if (b->has_limit) {
        int to_cc = out[1] > b->i_lim[j];
        if (b->mode[j] || to_cc) {
            int now;
            ldp_product(loc->w1, z, 6, outc);
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
    z[0] = out[0];
    z[1] = out[1];
    z[2] = out[2];
    b->v_load[j] = out[4];
    /* LoadBank.update_lockout. */
    if (b->lockout[j]) {
        b->on[j] = (uint8_t)(b->on[j] ? out[4] >= b->cutoff_v[j] : out[4] >= b->restart_v[j]);
    }
    /* Rig.sample: supply-side voltage and current through the ADC. */
    noise_v = b->noise[(k * 2) * n + j];
    noise_i = b->noise[(k * 2 + 1) * n + j];
    vc = ldp_code(out[3], b->lsb[j], b->gain[j], b->offset[j], noise_v, b->adc_max[j]);
    ic = ldp_code(out[1], b->lsb[n + j], b->gain[n + j], b->offset[n + j], noise_i, b->adc_max[j]);
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

/* CableBank.r_at for cable j at t_s. */
static double ldp_cable_r(const ldp_batch_t *b, size_t j, double t_s)
{
    double ramp_s = b->ramp_s[j];
    double frac = ramp_s > 0 ? ldp_min(ldp_max(t_s / ramp_s, 0.0), 1.0) : 1.0;
    double temp = b->t0_c[j] + (b->t1_c[j] - b->t0_c[j]) * frac;
    double rho = b->rho20[j] * (1.0 + b->alpha[j] * (temp - b->t_ref_c));
    return b->r_start[j] * (rho / b->rho0[j]);
}

/* CableBank.first_drift_k's test: the resistance at sample k has drifted from r_ref. */
static int ldp_drifted(const ldp_batch_t *b, size_t j, double k, double r_ref)
{
    return fabs(ldp_cable_r(b, j, k * b->dt_s) - r_ref) > b->r_refresh_rel * r_ref;
}

/* CableBank.first_drift_k for cable j: the first sample k >= k_from whose resistance has
 * drifted from r_ref, or inf. The ramp is monotonic, so a guess from its slope is walked to
 * the one first sample; the numpy walk reaches the same one. */
static double ldp_first_drift(const ldp_batch_t *b, size_t j, double r_ref, double k_from)
{
    double r0 = ldp_cable_r(b, j, 0.0), r1 = ldp_cable_r(b, j, INFINITY);
    double slope, target, t_hit, k;
    if (!(fabs(r1 - r_ref) > b->r_refresh_rel * r_ref)) {
        return INFINITY;
    }
    slope = (r1 - r0) / (b->ramp_s[j] > 0 ? b->ramp_s[j] : 1.0);
    target = r_ref * (1.0 + (slope > 0 ? 1.0 : slope < 0 ? -1.0 : 0.0) * b->r_refresh_rel);
    t_hit = slope != 0 ? (target - r0) / slope : 0.0;
    k = ceil(t_hit / b->dt_s);
    k = isfinite(k) && k > k_from ? k : k_from;
    while (k > k_from && ldp_drifted(b, j, k - 1.0, r_ref)) {
        k -= 1.0;
    }
    while (!ldp_drifted(b, j, k, r_ref)) {
        k += 1.0;
    }
    return k;
}

/* Step matrices computed in one call, kept for scenarios with the same parameters (a batch of
 * copies refreshes them all at the same sample), as DiscreteSystems.refresh shares them. */
#define LDP_CACHE 8
#define LDP_KEY 8
typedef struct {
    size_t used, next;
    double key[LDP_CACHE][LDP_KEY];
    double w0[LDP_CACHE][LDP_W0_LEN];
    double w1[LDP_CACHE][LDP_W1_LEN];
} ldp_cache_t;

/* A scenario's step matrices from the batch (scenario last) into its working copy, and back. */
static void ldp_get_w(const ldp_batch_t *b, ldp_local_t *loc, size_t j)
{
    size_t q, n = b->n;
    for (q = 0; q < LDP_W0_LEN; q++) {
        loc->w0[q] = b->w0[q * n + j];
    }
    for (q = 0; q < LDP_W1_LEN; q++) {
        loc->w1[q] = b->w1[q * n + j];
    }
}

static void ldp_put_w(ldp_batch_t *b, const ldp_local_t *loc, size_t j)
{
    size_t q, n = b->n;
    for (q = 0; q < LDP_W0_LEN; q++) {
        b->w0[q * n + j] = loc->w0[q];
    }
    for (q = 0; q < LDP_W1_LEN; q++) {
        b->w1[q * n + j] = loc->w1[q];
    }
}

/* DiscreteSystems.refresh for scenario j from the parameters now in b.
 *
 * A constant-power load folds in a negative conductance: the load end's own pole is then
 * unstable in current limit (and in voltage mode below -1/r), and such a segment grows any
 * difference between two discretisations. plant_systems.c agrees with numpy's to a few ulps
 * of each entry, which one collapse was seen to grow to twice the 1e-12 the two plants are
 * held to, so a scenario with a constant-power load takes numpy's own (numpy_refresh). Every
 * other load keeps the shunt conductance at or above zero, where differences decay. */
static void ldp_refresh(ldp_batch_t *b, ldp_local_t *loc, size_t j, ldp_cache_t *cache)
{
    size_t e, q;
    int by_numpy = b->numpy_refresh != NULL && b->kind[j] == LDP_CP;
    double key[LDP_KEY];
    key[0] = b->r[j];
    key[1] = b->l_h[j];
    key[2] = b->c_f[j];
    key[3] = b->esr[j];
    key[4] = b->g_fold[j] + b->g_leak[j];
    key[5] = b->omega[j];
    key[6] = b->open[j];
    key[7] = by_numpy;
    for (e = 0; e < cache->used; e++) {
        for (q = 0; q < LDP_KEY && cache->key[e][q] == key[q]; q++) {
        }
        if (q == LDP_KEY) {
            break;
        }
    }
    if (e < cache->used) {
        memcpy(loc->w0, cache->w0[e], sizeof loc->w0);
        memcpy(loc->w1, cache->w1[e], sizeof loc->w1);
        ldp_put_w(b, loc, j);
    } else if (by_numpy) {
        b->numpy_refresh(j);
        ldp_get_w(b, loc, j);
    } else {
        ldp_systems(key[0], key[1], key[2], key[3], key[4], key[5], b->open[j], b->dt_s, loc->w0, loc->w1);
        ldp_put_w(b, loc, j);
    }
    if (e == cache->used) {
        e = cache->next;
        cache->next = (cache->next + 1) % LDP_CACHE;
        cache->used += cache->used < LDP_CACHE;
        memcpy(cache->key[e], key, sizeof key);
        memcpy(cache->w0[e], loc->w0, sizeof loc->w0);
        memcpy(cache->w1[e], loc->w1, sizeof loc->w1);
    }
    b->refreshes++;
}

/* Plant._sync for scenario j at sample k: refold a load conductance past the tolerance, or
 * follow a cable ramp past its drift, with the resistance of the moment. */
static void ldp_sync(ldp_batch_t *b, ldp_local_t *loc, size_t j, size_t k, double t, double g, ldp_cache_t *cache)
{
    int stale = ldp_stale(g, b->g_fold[j], b->refold_rel);
    if (b->ramp[j] && (double)k >= b->ramp_k[j]) {
        stale |= fabs(ldp_cable_r(b, j, t) - b->r[j]) > b->r_refresh_rel * b->r[j];
    }
    if (!stale) {
        return;
    }
    b->r[j] = ldp_cable_r(b, j, t);
    b->g_fold[j] = g;
    ldp_refresh(b, loc, j, cache);
    if (b->ramp[j]) {
        b->ramp_k[j] = ldp_first_drift(b, j, b->r[j], (double)k);
    }
}

/* How many of the samples from k0 run before one the numpy plant must prepare. */
static size_t ldp_until_stop(const ldp_batch_t *b, size_t k0, size_t n_samples, int *why)
{
    size_t done;
    *why = LDP_DONE;
    for (done = 0; done < n_samples; done++) {
        size_t k = k0 + done;
        double t_end = (double)(k + 1) * b->dt_s;
        if (done >= b->noise_rows) {
            *why = LDP_NOISE;
            break;
        }
        if (!(b->stuck_lo <= t_end && t_end < b->stuck_hi)) {
            *why = LDP_STUCK;
            break;
        }
        if (done > 0 && (double)k * b->dt_s >= b->t_next_s) {
            *why = LDP_WINDOW;
            break;
        }
    }
    return done;
}

/* Scenarios are run a group at a time, sample by sample within the group, for a block of
 * samples: a group fills whole cache lines of every per-sample array (noise, recording) at
 * each sample, and its working copies stay in cache for the block. */
#define LDP_GROUP 16
#define LDP_BLOCK 256

size_t ldp_run(ldp_batch_t *b, size_t k0, size_t n_samples, size_t rec_row, int *why)
{
    size_t n = b->n, n_run = ldp_until_stop(b, k0, n_samples, why), blk, g0, j, done, q;
    ldp_cache_t cache;
    ldp_local_t loc[LDP_GROUP];
    cache.used = 0;
    cache.next = 0;
    for (j = 0; j < n; j++) {
        b->ramp_k[j] = b->ramp[j] ? ldp_first_drift(b, j, b->r[j], (double)k0) : INFINITY;
    }
    for (blk = 0; blk < n_run; blk += LDP_BLOCK) {
        size_t end = blk + LDP_BLOCK < n_run ? blk + LDP_BLOCK : n_run;
        for (g0 = 0; g0 < n; g0 += LDP_GROUP) {
            size_t g1 = g0 + LDP_GROUP < n ? g0 + LDP_GROUP : n;
            for (j = g0; j < g1; j++) {
                ldp_get_w(b, &loc[j - g0], j);
                for (q = 0; q < 6; q++) {
                    loc[j - g0].z[q] = b->z[q * n + j];
                }
            }
            for (done = blk; done < end; done++) {
                size_t k = k0 + done;
                double t = (double)k * b->dt_s, g, i_n;
                for (j = g0; j < g1; j++) {
                    ldp_companion(b, j, t, b->v_load[j], &g, &i_n);
                    if (done > 0) {
                        ldp_sync(b, &loc[j - g0], j, k, t, g, &cache);
                    }
                    ldp_sample(b, &loc[j - g0], j, done, rec_row + done, g, i_n);
                }
            }
            for (j = g0; j < g1; j++) {
                for (q = 0; q < 6; q++) {
                    b->z[q * n + j] = loc[j - g0].z[q];
                }
            }
        }
    }
    return n_run;
}
