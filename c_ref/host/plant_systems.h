/*
 * Host-only: the exact zero-order-hold systems of one scenario (harness/plant/linear_model.py,
 * continuous_models, expm_batch, discretise and DiscreteSystems.refresh), so the compiled
 * closed loop refreshes a discretisation without going back to Python.
 */
#ifndef LDP_PLANT_SYSTEMS_H
#define LDP_PLANT_SYSTEMS_H

/* Entries of one scenario's voltage-mode and current-limit-mode step matrices. */
#define LDP_W0_LEN 25
#define LDP_W1_LEN 30

/* The step matrices of one scenario, as DiscreteSystems.w holds them: w0[c * 5 + r] and
 * w1[c * 5 + r] multiply input c (v_int, i_cable, v_cap, v_cmd, i_src, i_lim) into output r
 * (v_int', i_supply, v_cap', v_supply, v_load). r ohm, l H, c F, esr ohm, g S (leakage and
 * folded load), omega rad/s (0: ideal supply), is_open nonzero for an open cable, dt_s s. */
void ldp_systems(double r, double l, double c, double esr, double g, double omega, int is_open,
                 double dt_s, double *w0, double *w1);

#endif
