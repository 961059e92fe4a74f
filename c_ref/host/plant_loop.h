/*
 * Host-only compiled closed loop: the harness's plant (harness/plant/plant.py), its ADC and
 * command DAC (harness/plant/sensing.py) and the C algorithm (ld_step), advanced for many
 * scenarios and many samples per call. Not part of the firmware reference; the numpy plant
 * is the reference this file follows operation for operation.
 */
#ifndef LDP_PLANT_LOOP_H
#define LDP_PLANT_LOOP_H

#include <stddef.h>
#include <stdint.h>
#include "linedrop.h"

/* Recorded channels, in the order of ldp_batch_t.rec. */
#define LDP_N_REC 12

/* Why ldp_run returned. */
#define LDP_DONE 0      /* every requested sample ran */
#define LDP_WINDOW 1    /* a fault or load window edge is due */
#define LDP_STUCK 2     /* the stuck-ADC window changes at the next sample's end */
#define LDP_NOISE 3     /* the noise block is used up */

/* Pointers to the caller's arrays; every per-scenario array has n entries. */
typedef struct {
    size_t n;
    double dt_s;
    /* Discrete systems, input-major, scenario last: w0 (5, 5, n), w1 (6, 5, n); refreshed in
     * place (Plant._sync) from the parameters they were last computed with. */
    double *w0;
    double *w1;
    double *r;                /* loop resistance, ohm */
    const double *l_h;
    const double *c_f;        /* capacitance of this window, F */
    const double *esr;        /* ESR of this window, ohm */
    const double *g_leak;     /* leakage conductance, S */
    const double *omega;      /* supply loop bandwidth, rad/s */
    const uint8_t *open;      /* cable open (the systems' own, this window) */
    size_t refreshes;         /* discretisations refreshed, counted */
    /* Refreshes scenario j's w0 and w1 with the numpy plant's own discretisation, where the
     * load end is unstable (see ldp_refresh); NULL: plant_systems.c's everywhere. */
    void (*numpy_refresh)(size_t j);
    /* Cable ramps (CableBank): which ramp, their constants, the next sample each drifts. */
    const uint8_t *ramp;
    const double *r_start;
    const double *t0_c;
    const double *t1_c;
    const double *ramp_s;
    const double *rho20;
    const double *alpha;
    const double *rho0;
    double t_ref_c;           /* conductors.T_REF_C */
    double r_refresh_rel;     /* plant.R_REFRESH_REL */
    double *ramp_k;           /* CableBank.first_drift_k of each ramp; inf elsewhere */
    /* Plant inputs and state z (6, n): v_int, i_cable, v_cap, v_cmd, i_src, i_lim. */
    double *z;
    double *v_load;
    double *g_fold;           /* conductance folded into the systems, S */
    const double *max_v;
    const double *i_lim;      /* inf where the supply has no limit */
    int has_limit;
    const uint8_t *closed;    /* cable not open (this window) */
    const uint8_t *shorted;   /* load short (this window) */
    double g_short;           /* 1 / LOAD_SHORT_OHM */
    uint8_t *mode;            /* in current limit */
    /* Loads. */
    const int32_t *kind;      /* 0 constant current, 1 resistive, 2 constant power, 3 lamp */
    const double *val_base;   /* value of the window (A, ohm, W) */
    const uint8_t *prof;      /* follows a profile segment: val = slope (t - x0) + y0 */
    const double *slope;
    const double *x0;
    const double *y0;
    const uint8_t *lockout;
    uint8_t *on;
    const double *cutoff_v;
    const double *restart_v;
    const double *r_hot;
    const double *rated_w;
    const double *lamp_tc;
    double *u;                /* lamp filament temperature, normalised */
    double lamp_exp;          /* LAMP_R_EXPONENT */
    double lamp_u_amb;        /* LAMP_U_AMBIENT */
    double lamp_u_amb4;       /* LAMP_U_AMBIENT ** 4 */
    double refold_rel;        /* REFOLD_REL */
    /* ADC: lsb, gain and offset (2, n) for V then I, code max; noise (rows, 2, n), LSB. */
    const double *lsb;
    const double *gain;
    const double *offset;
    const double *adc_max;
    const double *noise;
    size_t noise_rows;
    const int64_t *stuck_v;   /* forced code, -1 where not stuck; NULL: none */
    const int64_t *stuck_i;
    double stuck_lo, stuck_hi;
    /* DAC. */
    const double *v_per_code;
    const double *dac_max;
    /* Algorithm: ld_step on params/states, or a constant command (algo NULL). */
    const ld_params_t *params;
    ld_state_t *states;
    const double *cmd_const;
    double *cmd;              /* command codes in force (from the last step) */
    /* Windows. */
    double t_next_s;
    /* Recording: LDP_N_REC float arrays (rows, n), NULL to skip; units for r_est and corr. */
    float *rec[LDP_N_REC];
    double *trace;            /* NULL, or (rows, 4, n): v_supply, i_supply, v_load, next command code */
    const double *r_unit;
    const double *corr_unit;
} ldp_batch_t;

/* Run samples k0 .. k0 + n_samples - 1 (recorded from row rec_row); stops early before a
 * sample the numpy plant must prepare (a window edge), except sample k0 (already prepared by
 * the caller). A load refold or a cable ramp refresh is done here, as Plant._sync does it.
 * Returns the samples done; *why gets LDP_DONE or the reason it stopped. */
size_t ldp_run(ldp_batch_t *b, size_t k0, size_t n_samples, size_t rec_row, int *why);

#endif
