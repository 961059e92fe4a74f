/*
 * linedrop: sense-wire-free line-drop compensation, portable C99 reference.
 *
 * Bit-exact with the Python model in algo/. Copy this folder into firmware:
 * fill an ld_params_t offline (linedrop design / linedrop vectors write one as
 * a header), call ld_init once, then ld_step once per ADC sample.
 */
#ifndef LINEDROP_H
#define LINEDROP_H

#include <stdint.h>
#include <stddef.h>

#define LD_VERSION_MAJOR 0
#define LD_VERSION_MINOR 3
#define LD_VERSION_PATCH 0

#define LD_TAB_MAX 256   /* longest perturbation period, samples */
#define LD_GAIN_FRAC 16  /* fraction bits of corr_gain_q and pert_gain_q */
#define LD_DROP_FRAC 8   /* fraction bits of the window drop in V-ADC codes */
#define LD_NORM_BITS 14  /* current demodulation pair normalised to this many bits */

/* Window outcome codes (ld_state_t.status). */
#define LD_STATUS_NONE 0
#define LD_STATUS_VALID 1
#define LD_STATUS_LOW_SWING 2
#define LD_STATUS_TRANSIENT 3
#define LD_STATUS_R_HIGH 4
#define LD_STATUS_REACTIVE 5
#define LD_STATUS_CLIPPED 6
#define LD_STATUS_R_LOW 7

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
    uint8_t corr_shift;      /* correction smoothing shift */
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
    int32_t step_min;        /* period-sum ADC codes */
    int16_t ref_tab[LD_TAB_MAX]; /* one period of sine, Q(tab_bits-1) */
} ld_params_t;

/* RAM state of one instance. */
typedef struct {
    int32_t acc_vi;        /* voltage x sine, sum of shifted products */
    int32_t acc_vq;        /* voltage x cosine */
    int32_t acc_ii;        /* current x sine */
    int32_t acc_iq;        /* current x cosine */
    int32_t isum;          /* sum of current codes over the window */
    int32_t psum;          /* sum of current codes over the current period */
    int32_t psum_prev;     /* sum over the previous whole period */
    int32_t r_est;         /* estimate incl. ESR, Q r_frac V-code per I-code */
    int32_t r_raw;         /* last window's raw real part, saturated */
    int32_t corr;          /* correction applied, Q corr_frac DAC codes */
    int32_t corr_target;   /* correction the smoothing moves toward */
    int32_t pert_amp;      /* perturbation amplitude, DAC codes */
    int32_t cmd_base;      /* target_code + rounded correction, DAC codes (set per window) */
    uint32_t windows;      /* windows finished (wraps) */
    uint16_t phase;        /* sample index within the period */
    uint16_t count;        /* sample index within the window */
    uint16_t bad_windows;  /* consecutive windows without a valid estimate */
    uint16_t cmd;          /* last command, DAC code */
    uint8_t have_prev;     /* psum_prev holds a whole period */
    uint8_t transient;     /* a load step was seen in this window */
    uint8_t status;        /* outcome of the last window, LD_STATUS_* */
    uint8_t clipped;       /* a code sat at a rail in this window (v or i at adc_max, i at 0) */
} ld_state_t;

void ld_init(const ld_params_t *p, ld_state_t *s);
void ld_reset(const ld_params_t *p, ld_state_t *s);
uint16_t ld_step(const ld_params_t *p, ld_state_t *s, uint16_t adc_v, uint16_t adc_i);
void ld_window_end(const ld_params_t *p, ld_state_t *s);
int32_t ld_command_base(const ld_params_t *p, const ld_state_t *s);

/* Step n_inst independent instances over n_samples each. Instance k uses
 * params[k] and states[k]; its inputs and outputs are at [k * n_samples + t]. */
void ld_step_batch(const ld_params_t *params, ld_state_t *states, size_t n_inst,
                   const uint16_t *adc_v, const uint16_t *adc_i, size_t n_samples,
                   uint16_t *cmd_out);

uint32_t ld_version(void);
size_t ld_state_size(void);
size_t ld_params_size(void);

#endif /* LINEDROP_H */
