/*
 * Host-only exact discretisation of one scenario (see plant_systems.h). Each function names
 * the numpy code it follows and keeps its order of operations, so the two agree to rounding
 * (tests/test_plant_systems.py).
 */
#include <math.h>
#include <string.h>
#include "plant_systems.h"

#define LDP_NX 3        /* states */
#define LDP_NA 6        /* states and inputs: the augmented matrix's size */

/* Pade(13) coefficients and the 1-norm bound of linear_model._PADE13 and _THETA13. */
static const double ldp_pade13[14] = {
    64764752532480000.0, 32382376266240000.0, 7771770303897600.0, 1187353796428800.0,
    129060195264000.0, 10559470521600.0, 670442572800.0, 33522128640.0, 1323241920.0,
    40840800.0, 960960.0, 16380.0, 182.0, 1.0};
static const double ldp_theta13 = 5.371920351148152;

typedef double ldp_row_t[LDP_NA];
typedef double ldp_mat_t[LDP_NA][LDP_NA];

/* continuous_models for one scenario and mode: the rows dx/dt and y as coefficients of
 * [x (3), u (3)]; a, b, c_out, d are their first three and last three columns. */
static void ldp_continuous(double r, double l, double c, double esr, double g, double omega,
                           int is_open, int current_mode, ldp_row_t dx[3], ldp_row_t y[3])
{
    int q;
    for (q = 0; q < LDP_NA; q++) {
        double e0 = q == 0, e1 = q == 1, e2 = q == 2, e3 = q == 3, e4 = q == 4, e5 = q == 5;
        double v_int = omega > 0 ? e0 : e3;
        double i, v_load, v_sup, dx1 = 0.0;
        if (is_open) {
            i = 0.0;
            v_load = (esr * (i - e4) + e2) / (1.0 + esr * g);
            v_sup = v_int;
        } else if (current_mode) {
            i = e5;
            v_load = (esr * (i - e4) + e2) / (1.0 + esr * g);
            v_sup = r * e5 + v_load;
        } else if (l > 0) {
            i = e1;
            v_load = (esr * (i - e4) + e2) / (1.0 + esr * g);
            v_sup = v_int;
            dx1 = (v_int - r * e1 - v_load) / l;
        } else {
            v_load = (esr * v_int / r - esr * e4 + e2) / (1.0 + esr * g + esr / r);
            i = (v_int - v_load) / r;
            v_sup = v_int;
        }
        dx[0][q] = omega > 0 ? omega * (e3 - e0) : 0.0;
        dx[1][q] = dx1;
        dx[2][q] = (i - e4 - g * v_load) / c;
        y[0][q] = v_sup;
        y[1][q] = i;
        y[2][q] = v_load;
    }
}

/* out = a b, 6x6 (out may not alias a or b). */
static void ldp_matmul(ldp_mat_t a, ldp_mat_t b, ldp_mat_t out)
{
    int i, j, k;
    for (i = 0; i < LDP_NA; i++) {
        for (j = 0; j < LDP_NA; j++) {
            double acc = 0.0;
            for (k = 0; k < LDP_NA; k++) {
                acc += a[i][k] * b[k][j];
            }
            out[i][j] = acc;
        }
    }
}

/* Solve p x = q for x (6x6, six right-hand sides) by Gaussian elimination with partial
 * pivoting, as LAPACK's gesv (numpy.linalg.solve) does; p and q are overwritten. */
static void ldp_solve(ldp_mat_t p, ldp_mat_t q, ldp_mat_t x)
{
    int i, j, k;
    for (k = 0; k < LDP_NA; k++) {
        int piv = k;
        for (i = k + 1; i < LDP_NA; i++) {
            if (fabs(p[i][k]) > fabs(p[piv][k])) {
                piv = i;
            }
        }
        if (piv != k) {
            double t[LDP_NA];
            memcpy(t, p[k], sizeof t);
            memcpy(p[k], p[piv], sizeof t);
            memcpy(p[piv], t, sizeof t);
            memcpy(t, q[k], sizeof t);
            memcpy(q[k], q[piv], sizeof t);
            memcpy(q[piv], t, sizeof t);
        }
        for (i = k + 1; i < LDP_NA; i++) {
            double f = p[i][k] / p[k][k];
            for (j = k; j < LDP_NA; j++) {
                p[i][j] -= f * p[k][j];
            }
            for (j = 0; j < LDP_NA; j++) {
                q[i][j] -= f * q[k][j];
            }
        }
    }
    for (i = LDP_NA - 1; i >= 0; i--) {
        for (j = 0; j < LDP_NA; j++) {
            double acc = q[i][j];
            for (k = i + 1; k < LDP_NA; k++) {
                acc -= p[i][k] * x[k][j];
            }
            x[i][j] = acc / p[i][i];
        }
    }
}

/* expm_batch for one matrix: Pade(13) with scaling and squaring (Higham 2005, Algorithm 2.3). */
static void ldp_expm(ldp_mat_t m, ldp_mat_t e)
{
    const double *b = ldp_pade13;
    ldp_mat_t a, a2, a4, a6, t, u, v, p, q;
    double norm = 0.0, scale;
    int i, j, s, k;
    for (j = 0; j < LDP_NA; j++) {
        double col = 0.0;
        for (i = 0; i < LDP_NA; i++) {
            col += fabs(m[i][j]);
        }
        norm = col > norm ? col : norm;
    }
    s = (int)ceil(log2((norm > 1e-300 ? norm : 1e-300) / ldp_theta13));
    s = s > 0 ? s : 0;
    scale = ldexp(1.0, s);
    for (i = 0; i < LDP_NA; i++) {
        for (j = 0; j < LDP_NA; j++) {
            a[i][j] = m[i][j] / scale;
        }
    }
    ldp_matmul(a, a, a2);
    ldp_matmul(a2, a2, a4);
    ldp_matmul(a4, a2, a6);
    for (i = 0; i < LDP_NA; i++) {
        for (j = 0; j < LDP_NA; j++) {
            t[i][j] = b[13] * a6[i][j] + b[11] * a4[i][j] + b[9] * a2[i][j];
        }
    }
    ldp_matmul(a6, t, u);
    for (i = 0; i < LDP_NA; i++) {
        for (j = 0; j < LDP_NA; j++) {
            t[i][j] = u[i][j] + b[7] * a6[i][j] + b[5] * a4[i][j] + b[3] * a2[i][j] + b[1] * (i == j);
        }
    }
    ldp_matmul(a, t, u);
    for (i = 0; i < LDP_NA; i++) {
        for (j = 0; j < LDP_NA; j++) {
            t[i][j] = b[12] * a6[i][j] + b[10] * a4[i][j] + b[8] * a2[i][j];
        }
    }
    ldp_matmul(a6, t, v);
    for (i = 0; i < LDP_NA; i++) {
        for (j = 0; j < LDP_NA; j++) {
            v[i][j] = v[i][j] + b[6] * a6[i][j] + b[4] * a4[i][j] + b[2] * a2[i][j] + b[0] * (i == j);
            p[i][j] = v[i][j] - u[i][j];
            q[i][j] = v[i][j] + u[i][j];
        }
    }
    ldp_solve(p, q, e);
    for (k = 0; k < s; k++) {
        ldp_matmul(e, e, t);
        memcpy(e, t, sizeof(ldp_mat_t));
    }
}

/* discretise and DiscreteSystems.refresh for one mode: w[c * 5 + r] of the first n_in inputs. */
static void ldp_mode(double r, double l, double c, double esr, double g, double omega, int is_open,
                     int current_mode, double dt_s, int n_in, double *w)
{
    static const int out_rows[5] = {0, 4, 2, 3, 5};   /* linear_model.OUT_ROWS */
    ldp_row_t dx[3], y[3];
    ldp_mat_t aug, e;
    double full[LDP_NA][LDP_NA];
    int i, j, k;
    ldp_continuous(r, l, c, esr, g, omega, is_open, current_mode, dx, y);
    memset(aug, 0, sizeof aug);
    for (i = 0; i < LDP_NX; i++) {
        for (j = 0; j < LDP_NA; j++) {
            aug[i][j] = dx[i][j] * dt_s;
        }
    }
    ldp_expm(aug, e);
    /* [[phi, gamma], [c_out phi, c_out gamma + d]]. */
    for (i = 0; i < LDP_NX; i++) {
        for (j = 0; j < LDP_NA; j++) {
            double acc = 0.0;
            full[i][j] = e[i][j];
            for (k = 0; k < LDP_NX; k++) {
                acc += y[i][k] * e[k][j];
            }
            full[LDP_NX + i][j] = j < LDP_NX ? acc : acc + y[i][j];
        }
    }
    for (j = 0; j < n_in; j++) {
        for (i = 0; i < 5; i++) {
            w[j * 5 + i] = full[out_rows[i]][j];
        }
    }
}

void ldp_systems(double r, double l, double c, double esr, double g, double omega, int is_open,
                 double dt_s, double *w0, double *w1)
{
    ldp_mode(r, l, c, esr, g, omega, is_open, 0, dt_s, 5, w0);
    ldp_mode(r, l, c, esr, g, omega, is_open, 1, dt_s, 6, w1);
}
