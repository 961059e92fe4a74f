/*
 * linedrop: sense-wire-free line-drop compensation, portable C99 reference.
 *
 * Bit-exact with the Python model in algo/. Copy this folder into firmware:
 * fill an ld_params_t offline (linedrop design / linedrop vectors write one as
 * a header), call ld_init once, then per ADC sample either ld_step (the window's
 * work done inside the call that ends it) or ld_step_isr from the interrupt with
 * ld_window_work from the main loop (PORTING.md, "The interrupt path").
 */
#ifndef LINEDROP_H
#define LINEDROP_H

#include <stdint.h>
#include <stddef.h>

#define LD_VERSION_MAJOR 0
#define LD_VERSION_MINOR 5
#define LD_VERSION_PATCH 0

#define LD_TAB_MAX 256    /* longest perturbation period, samples */
#define LD_GAIN_FRAC 16u  /* fraction bits of corr_gain_q, pert_gain_q, ki_q, kc_q, kp_max_q */
#define LD_DROP_FRAC 8u   /* fraction bits of the window drop in V-ADC codes */
#define LD_NORM_BITS 14u  /* current demodulation pair normalised to this many bits */
#define LD_KT_FRAC 16u    /* fraction bits of the trend-removal constants kt_s_q, kt_c_q */
#define LD_ROT_FRAC 14u   /* fraction bits of the voltage phase rotation rot_c_q, rot_s_q */
#define LD_SWING_FRAC 24u /* fraction bits of swing_psum_q */
#define LD_KP_MAX_Q ((int32_t)1 << 24) /* ceiling of any proportional gain (256), Q LD_GAIN_FRAC */

/* Window outcome codes (ld_state_t.status). */
#define LD_STATUS_NONE 0u
#define LD_STATUS_VALID 1u
#define LD_STATUS_LOW_SWING 2u
#define LD_STATUS_TRANSIENT 3u
#define LD_STATUS_R_HIGH 4u
#define LD_STATUS_REACTIVE 5u
#define LD_STATUS_CLIPPED 6u
#define LD_STATUS_R_LOW 7u

/* Window hand-over between ld_step_isr and ld_window_work (ld_state_t.w_state). */
#define LD_WIN_IDLE 0    /* no finished window waits: the interrupt path owns every field */
#define LD_WIN_PENDING 1 /* a finished window's sums are in the w_* record for ld_window_work */
#define LD_WIN_DONE 2    /* ld_window_work has finished; the next period end commits it */

/* Keeps the compiler from moving stores across the hand-over flag (ld_window_work). Define it
 * for your compiler if it is not GCC or Clang; a single core needs no hardware barrier. */
#ifndef LD_COMPILER_BARRIER
#if defined(__GNUC__)
#define LD_COMPILER_BARRIER() __asm__ __volatile__("" ::: "memory")
#else
#define LD_COMPILER_BARRIER() ((void)0)
#endif
#endif

/* Read-only parameters, computed offline (algo/params.py); may live in flash. */
typedef struct {
    uint16_t adc_max;        /* largest ADC code; inputs are clamped to it */
    uint16_t cmd_min;        /* lowest command, DAC code */
    uint16_t cmd_max;        /* highest command, DAC code */
    uint16_t target_code;    /* load target, DAC code */
    uint16_t fault_windows;  /* bad windows before the correction is forced to zero */
    uint8_t period_log2;     /* perturbation period, log2 samples */
    uint8_t window_log2;     /* measurement window, log2 samples */
    uint8_t tab_bits;        /* reference table word length (signed) */
    uint8_t demod_shift;     /* right shift of each demodulation product */
    uint8_t r_frac;          /* fraction bits of resistances (V-code per I-code) */
    uint8_t r_shift;         /* estimate filter shift */
    uint8_t corr_frac;       /* fraction bits of the correction (DAC codes) */
    uint8_t step_rel_shift;  /* load-step detector relative threshold shift */
    uint8_t acc_bits;        /* declared accumulator width, checked offline */
    int32_t r_max_q;         /* Q r_frac */
    int32_t x_max_q;         /* Q r_frac */
    int32_t esr_q;           /* Q r_frac */
    int32_t r_step_max_q;    /* Q r_frac */
    int32_t corr_gain_q;     /* Q LD_GAIN_FRAC: k * V-ADC LSB / DAC LSB */
    int32_t pert_gain_q;     /* Q LD_GAIN_FRAC: pert_fraction * V-ADC LSB / DAC LSB */
    int32_t corr_max_q;      /* Q corr_frac DAC codes */
    int32_t pert_min;        /* DAC codes */
    int32_t pert_max;        /* DAC codes, at most 32767 */
    int32_t swing_min;       /* current demodulation magnitude, accumulator units */
    int32_t step_min;        /* load-step detector floor, period-sum ADC codes */
    int32_t swing_psum_q;    /* current swing (demod. units) -> period-sum codes, Q LD_SWING_FRAC */
    int32_t ki_q;            /* integral gain per period T_period / tau, Q LD_GAIN_FRAC, <= 2**16 */
    int32_t kc_q;            /* C / tau per (V-code/I-code), Q LD_GAIN_FRAC: kp = r_est * kc_q */
    int32_t kp_max_q;        /* proportional gain ceiling, Q LD_GAIN_FRAC (<= LD_KP_MAX_Q) */
    int32_t kt_s_q;          /* trend leak into sine sums per unit half-sum change, Q LD_KT_FRAC */
    int32_t kt_c_q;          /* the same for the cosine sums */
    int32_t rot_c_q;         /* cos of the voltage phase correction, Q LD_ROT_FRAC */
    int32_t rot_s_q;         /* sin of the voltage phase correction, Q LD_ROT_FRAC */
    int16_t ref_tab[LD_TAB_MAX]; /* one period of sine, Q(tab_bits-1) */
} ld_params_t;

/* RAM state of one instance. */
typedef struct {
    int32_t acc_vi;        /* voltage x sine, sum of shifted products */
    int32_t acc_vq;        /* voltage x cosine */
    int32_t acc_ii;        /* current x sine */
    int32_t acc_iq;        /* current x cosine */
    int32_t isum;          /* sum of current codes over the window */
    int32_t vsum;          /* sum of voltage codes over the window */
    int32_t isum_h;        /* isum at the window's half (trend removal) */
    int32_t vsum_h;        /* vsum at the window's half */
    int32_t psum;          /* sum of current codes over the current period */
    int32_t psum_prev;     /* sum over the previous whole period */
    int32_t r_est;         /* estimate incl. ESR, Q r_frac V-code per I-code */
    int32_t r_raw;         /* last window's raw real part, saturated */
    int32_t corr;          /* correction applied, Q corr_frac DAC codes */
    int32_t corr_target;   /* the last period's estimated drop (R-hat - ESR) * I, same format */
    int32_t integ;         /* integral part of the correction, same format, in [0, corr_max_q] */
    int32_t du_prev;       /* the last period's change of corr, same format */
    int32_t pert_amp;      /* perturbation amplitude, DAC codes */
    int32_t cmd_base;      /* target_code + rounded correction, DAC codes (set per period) */
    int32_t swing;         /* last valid window's current swing, demodulation units (sets step_thr) */
    uint32_t windows;      /* windows finished (wraps) */
    uint16_t phase;        /* sample index within the period */
    uint16_t count;        /* sample index within the window */
    uint16_t bad_windows;  /* consecutive windows without a valid estimate (saturates) */
    uint16_t cmd;          /* last command, DAC code */
    uint8_t have_prev;     /* psum_prev holds a whole period */
    uint8_t transient;     /* a load step was seen in this window */
    uint8_t status;        /* outcome of the last window, LD_STATUS_* */
    uint8_t clipped;       /* rails hit in this window: 1 current at 0, 2 voltage at adc_max, 4 current at adc_max */
    uint8_t valid_run;     /* valid windows since init, reset or a forced zero (saturates) */
    uint8_t kp_off;        /* ring guard: 1 after one growing reversal, 2 (P off) after two, to a valid window */
    uint8_t i_zero;        /* a current code 0 in this period (the load draws less than the swing) */
    /* The finished window, as the window work reads it (filled at every window end). */
    int32_t w_acc_vi;      /* acc_vi at the window end */
    int32_t w_acc_vq;      /* acc_vq */
    int32_t w_acc_ii;      /* acc_ii */
    int32_t w_acc_iq;      /* acc_iq */
    int32_t w_isum;        /* isum */
    int32_t w_di;          /* isum - 2 * isum_h: the current's half-window trend */
    int32_t w_dv;          /* vsum - 2 * vsum_h */
    int32_t pert_next;     /* perturbation amplitude the window work chose, DAC codes (committed to pert_amp) */
    int32_t step_thr;      /* load-step threshold in force, period-sum codes, saturated to int32 */
    int32_t thr_next;      /* the threshold from the window work's swing (committed to step_thr) */
    int32_t r_c;           /* R-hat - ESR in force for the correction, Q r_frac, >= 0 */
    int32_t rc_next;       /* the window work's r_est - esr_q, floored at 0 (committed to r_c) */
    int32_t kp;            /* proportional gain in force, Q LD_GAIN_FRAC in [0, kp_max_q] */
    int32_t kp_next;       /* the window work's gain from r_est (committed to kp) */
    int32_t corr_prev;     /* corr before this period's step, between the law's stages 2 and 3 */
    uint8_t w_clipped;     /* clipped at the window end */
    uint8_t w_transient;   /* transient at the window end */
    uint8_t w_state;       /* LD_WIN_*: the hand-over to ld_window_work */
    uint8_t late_windows;  /* windows dropped because the window work had not finished (saturates) */
    uint8_t corr_on;       /* 1: the correction runs (a confirmed estimate, no forced zero) */
    uint8_t on_next;       /* the window work's corr_on (committed) */
    uint8_t iz_last;       /* i_zero of the last whole period, for the law's stages */
} ld_state_t;

void ld_init(const ld_params_t *p, ld_state_t *s);
void ld_reset(const ld_params_t *p, ld_state_t *s);
/* One sample, the window's work included in the call that ends a window. */
uint16_t ld_step(const ld_params_t *p, ld_state_t *s, uint16_t adc_v, uint16_t adc_i);
/* One sample for the ADC interrupt: a window end only hands its sums to ld_window_work. */
uint16_t ld_step_isr(const ld_params_t *p, ld_state_t *s, uint16_t adc_v, uint16_t adc_i);
/* The window's work (estimate, outcome, amplitude), from the main loop; 1 if it did one. */
uint8_t ld_window_work(const ld_params_t *p, ld_state_t *s);
int32_t ld_command_base(const ld_params_t *p, const ld_state_t *s);
int32_t ld_step_threshold(const ld_params_t *p, int32_t swing);

/* Step n_inst independent instances over n_samples each. Instance k uses
 * params[k] and states[k]; its inputs and outputs are at [k * n_samples + t]. */
void ld_step_batch(const ld_params_t *params, ld_state_t *states, size_t n_inst,
                   const uint16_t *adc_v, const uint16_t *adc_i, size_t n_samples,
                   uint16_t *cmd_out);

uint32_t ld_version(void);
size_t ld_state_size(void);
size_t ld_params_size(void);

#endif /* LINEDROP_H */
