/*
 * Text vector replay driver: runs ld_init, ld_step, ld_step_isr, ld_window_work and ld_reset on the
 * operations of a text vector file and prints the command and every
 * ld_state_t field after each one. Format (c_ref/textvec.py writes it):
 *
 *   LDTV 1                      first non-comment line
 *   p <33 integers>             ld_params_t fields before ref_tab, in order
 *   t <integers>                ref_tab entries, in order; 256 in all
 *   s <adc_v> <adc_i>           one sample through ld_step
 *   q <adc_v> <adc_i>           one sample through ld_step_isr
 *   w                           ld_window_work (prints what it returned, 0 or 1, in the
 *                               command's place)
 *   r                           ld_reset
 *   i                           ld_init
 *
 * Lines starting with '#' and blank lines are ignored. ld_init runs before
 * the first operation after a complete parameter block; a new 'p' line starts
 * a new block. Each operation prints one line: the command (ld_step's return
 * value, or the state's cmd field for r and i) and then the 30 ld_state_t
 * fields in declaration order, as decimal integers separated by one space.
 *
 * Usage: replay [file]   (reads stdin without a file). Uses only stdio, so it
 * also runs on a target with semihosting. Exit status 0 on success, 2 on
 * malformed input (message on stderr with the line number), 3 on I/O errors.
 */
#include <errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include "linedrop.h"

#define LD_TV_LINE_MAX 4096
#define LD_TV_NPARAMS 33

/* Smallest and largest value of each scalar ld_params_t field, in order. */
static const long ld_tv_lo[LD_TV_NPARAMS] = {
    0, 0, 0, 0, 0,                 /* uint16_t adc_max .. fault_windows */
    0, 0, 0, 0, 0, 0, 0, 0, 0,     /* uint8_t period_log2 .. acc_bits */
    INT32_MIN, INT32_MIN, INT32_MIN, INT32_MIN, INT32_MIN, INT32_MIN,
    INT32_MIN, INT32_MIN, INT32_MIN, INT32_MIN, INT32_MIN,  /* int32_t r_max_q .. step_min */
    INT32_MIN, INT32_MIN, INT32_MIN, INT32_MIN,             /* swing_psum_q .. kp_max_q */
    INT32_MIN, INT32_MIN, INT32_MIN, INT32_MIN              /* kt_s_q .. rot_s_q */
};
static const long ld_tv_hi[LD_TV_NPARAMS] = {
    UINT16_MAX, UINT16_MAX, UINT16_MAX, UINT16_MAX, UINT16_MAX,
    UINT8_MAX, UINT8_MAX, UINT8_MAX, UINT8_MAX, UINT8_MAX,
    UINT8_MAX, UINT8_MAX, UINT8_MAX, UINT8_MAX,
    INT32_MAX, INT32_MAX, INT32_MAX, INT32_MAX, INT32_MAX, INT32_MAX,
    INT32_MAX, INT32_MAX, INT32_MAX, INT32_MAX, INT32_MAX,
    INT32_MAX, INT32_MAX, INT32_MAX, INT32_MAX,
    INT32_MAX, INT32_MAX, INT32_MAX, INT32_MAX
};

static char ld_tv_line[LD_TV_LINE_MAX];
static long ld_tv_val[LD_TV_LINE_MAX / 2];
static long ld_tv_pv[LD_TV_NPARAMS];
static ld_params_t ld_tv_p;
static ld_state_t ld_tv_s;
static unsigned long ld_tv_lineno;

static void ld_tv_fail(const char *what)
{
    fprintf(stderr, "replay: line %lu: %s\n", ld_tv_lineno, what);
    exit(2);
}

static int ld_tv_blank(const char *text)
{
    while (*text == ' ' || *text == '\t' || *text == '\r' || *text == '\n') {
        text++;
    }
    return *text == '\0';
}

/* Parse up to max integers in [lo, hi] from text into out; returns how many. */
static size_t ld_tv_ints(const char *text, long *out, size_t max, long lo, long hi)
{
    size_t n = 0u;
    char *end;
    for (;;) {
        long x;
        while (*text == ' ' || *text == '\t' || *text == '\r' || *text == '\n') {
            text++;
        }
        if (*text == '\0') {
            return n;
        }
        if (n == max) {
            ld_tv_fail("too many values");
        }
        errno = 0;
        x = strtol(text, &end, 10);
        if (end == text || errno != 0 || x < lo || x > hi) {
            ld_tv_fail("bad or out-of-range integer");
        }
        out[n++] = x;
        text = end;
    }
}

static void ld_tv_set_params(void)
{
    const long *v = ld_tv_pv;
    size_t k;
    for (k = 0u; k < LD_TV_NPARAMS; k++) {
        if (v[k] < ld_tv_lo[k] || v[k] > ld_tv_hi[k]) {
            ld_tv_fail("parameter out of its field's range");
        }
    }
    ld_tv_p.adc_max = (uint16_t)v[0];
    ld_tv_p.cmd_min = (uint16_t)v[1];
    ld_tv_p.cmd_max = (uint16_t)v[2];
    ld_tv_p.target_code = (uint16_t)v[3];
    ld_tv_p.fault_windows = (uint16_t)v[4];
    ld_tv_p.period_log2 = (uint8_t)v[5];
    ld_tv_p.window_log2 = (uint8_t)v[6];
    ld_tv_p.tab_bits = (uint8_t)v[7];
    ld_tv_p.demod_shift = (uint8_t)v[8];
    ld_tv_p.r_frac = (uint8_t)v[9];
    ld_tv_p.r_shift = (uint8_t)v[10];
    ld_tv_p.corr_frac = (uint8_t)v[11];
    ld_tv_p.step_rel_shift = (uint8_t)v[12];
    ld_tv_p.acc_bits = (uint8_t)v[13];
    ld_tv_p.r_max_q = (int32_t)v[14];
    ld_tv_p.x_max_q = (int32_t)v[15];
    ld_tv_p.esr_q = (int32_t)v[16];
    ld_tv_p.r_step_max_q = (int32_t)v[17];
    ld_tv_p.corr_gain_q = (int32_t)v[18];
    ld_tv_p.pert_gain_q = (int32_t)v[19];
    ld_tv_p.corr_max_q = (int32_t)v[20];
    ld_tv_p.pert_min = (int32_t)v[21];
    ld_tv_p.pert_max = (int32_t)v[22];
    ld_tv_p.swing_min = (int32_t)v[23];
    ld_tv_p.step_min = (int32_t)v[24];
    ld_tv_p.swing_psum_q = (int32_t)v[25];
    ld_tv_p.ki_q = (int32_t)v[26];
    ld_tv_p.kc_q = (int32_t)v[27];
    ld_tv_p.kp_max_q = (int32_t)v[28];
    ld_tv_p.kt_s_q = (int32_t)v[29];
    ld_tv_p.kt_c_q = (int32_t)v[30];
    ld_tv_p.rot_c_q = (int32_t)v[31];
    ld_tv_p.rot_s_q = (int32_t)v[32];
}

static void ld_tv_print(uint16_t cmd)
{
    const ld_state_t *s = &ld_tv_s;
    printf("%u %ld %ld %ld %ld %ld %ld %ld %ld %ld %ld %ld %ld %ld %ld %ld %ld %ld %ld %ld %lu "
           "%u %u %u %u %u %u %u %u %u %u %u "
           "%ld %ld %ld %ld %ld %ld %ld %ld %ld %ld %ld %ld %ld %ld %ld"
           " %u %u %u %u %u %u %u\n",
           (unsigned)cmd, (long)s->acc_vi, (long)s->acc_vq, (long)s->acc_ii, (long)s->acc_iq,
           (long)s->isum, (long)s->vsum, (long)s->isum_h, (long)s->vsum_h,
           (long)s->psum, (long)s->psum_prev, (long)s->r_est, (long)s->r_raw,
           (long)s->corr, (long)s->corr_target, (long)s->integ, (long)s->du_prev,
           (long)s->pert_amp, (long)s->cmd_base, (long)s->swing, (unsigned long)s->windows,
           (unsigned)s->phase, (unsigned)s->count, (unsigned)s->bad_windows, (unsigned)s->cmd,
           (unsigned)s->have_prev, (unsigned)s->transient, (unsigned)s->status,
           (unsigned)s->clipped, (unsigned)s->valid_run, (unsigned)s->kp_off,
           (unsigned)s->i_zero,
           (long)s->w_acc_vi, (long)s->w_acc_vq, (long)s->w_acc_ii, (long)s->w_acc_iq,
           (long)s->w_isum, (long)s->w_di, (long)s->w_dv, (long)s->pert_next, (long)s->step_thr,
           (long)s->thr_next, (long)s->r_c, (long)s->rc_next, (long)s->kp, (long)s->kp_next,
           (long)s->corr_prev, (unsigned)s->w_clipped, (unsigned)s->w_transient, (unsigned)s->w_state,
           (unsigned)s->late_windows, (unsigned)s->corr_on, (unsigned)s->on_next,
           (unsigned)s->iz_last);
}

int main(int argc, char **argv)
{
    FILE *in = stdin;
    int have_header = 0, have_params = 0, ready = 0;
    size_t n_tab = 0u;

    if (argc > 1 && (in = fopen(argv[1], "r")) == NULL) {
        fprintf(stderr, "replay: cannot open %s\n", argv[1]);
        return 3;
    }
    while (fgets(ld_tv_line, (int)sizeof ld_tv_line, in) != NULL) {
        const char *rest = ld_tv_line + 1;
        long *val = ld_tv_val;
        ld_tv_lineno++;
        if (strchr(ld_tv_line, '\n') == NULL && !feof(in)) {
            ld_tv_fail("line too long");
        }
        if (ld_tv_line[0] == '#' || ld_tv_blank(ld_tv_line)) {
            continue;
        }
        if (!have_header) {
            if (strncmp(ld_tv_line, "LDTV 1", 6) != 0 || !ld_tv_blank(ld_tv_line + 6)) {
                ld_tv_fail("expected header 'LDTV 1'");
            }
            have_header = 1;
            continue;
        }
        switch (ld_tv_line[0]) {
        case 'p':
            if (ld_tv_ints(rest, ld_tv_pv, LD_TV_NPARAMS, INT32_MIN, INT32_MAX) != LD_TV_NPARAMS) {
                ld_tv_fail("a 'p' line needs 33 values");
            }
            ld_tv_set_params();
            have_params = 1;
            ready = 0;
            n_tab = 0u;
            break;
        case 't': {
            size_t k, n = ld_tv_ints(rest, val, LD_TAB_MAX - n_tab, INT16_MIN, INT16_MAX);
            if (!have_params) {
                ld_tv_fail("'t' before 'p'");
            }
            for (k = 0u; k < n; k++) {
                ld_tv_p.ref_tab[n_tab + k] = (int16_t)val[k];
            }
            n_tab += n;
            break;
        }
        case 's': case 'q': case 'w': case 'r': case 'i':
            if (!have_params || n_tab != LD_TAB_MAX) {
                ld_tv_fail("operation before a complete parameter block");
            }
            if (!ready || ld_tv_line[0] == 'i') {
                ld_init(&ld_tv_p, &ld_tv_s);
                ready = 1;
            }
            if (ld_tv_line[0] == 's' || ld_tv_line[0] == 'q') {
                uint16_t cmd;
                if (ld_tv_ints(rest, val, 2u, 0, UINT16_MAX) != 2u) {
                    ld_tv_fail("an 's' or 'q' line needs adc_v and adc_i");
                }
                cmd = ld_tv_line[0] == 's'
                          ? ld_step(&ld_tv_p, &ld_tv_s, (uint16_t)val[0], (uint16_t)val[1])
                          : ld_step_isr(&ld_tv_p, &ld_tv_s, (uint16_t)val[0], (uint16_t)val[1]);
                ld_tv_print(cmd);
            } else if (ld_tv_line[0] == 'w') {
                ld_tv_print(ld_window_work(&ld_tv_p, &ld_tv_s));   /* what it returned */
            } else {
                if (ld_tv_line[0] == 'r') {
                    ld_reset(&ld_tv_p, &ld_tv_s);
                }
                ld_tv_print(ld_tv_s.cmd);
            }
            break;
        default:
            ld_tv_fail("unknown line type");
        }
    }
    if (ferror(in) || fflush(stdout) != 0) {
        fprintf(stderr, "replay: I/O error\n");
        return 3;
    }
    return 0;
}
