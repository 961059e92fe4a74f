"""Range analysis: the interval every state field of the algorithm can occupy, per parameter block.

Each bound mirrors a "scaling and overflow" paragraph of algo/step.py,
algo/estimator.py and c_ref/step.c, c_ref/estimator.c, computed from one
parameter block instead of the worst case over all of them. The proof suite
(tests/test_proof_safety_props.py) checks every field of the model and the C
reference against :func:`state_bounds` after every closed-loop sample, and
:func:`declared_width_violations` checks each bound against the field's C type (the
accumulators against the declared ``acc_bits``).
"""
from algo.fixed import rshift_round
from algo.params import Params
from algo.state import STATE_FIELDS

S32 = (-(1 << 31), (1 << 31) - 1)

#: C type of each ``ld_state_t`` field, as (lo, hi) of the type.
STATE_TYPES = {
    "acc_vi": S32, "acc_vq": S32, "acc_ii": S32, "acc_iq": S32, "isum": S32, "vsum": S32,
    "isum_h": S32, "vsum_h": S32, "psum": S32, "psum_prev": S32, "r_est": S32, "r_raw": S32,
    "corr": S32, "corr_target": S32, "integ": S32, "du_prev": S32, "pert_amp": S32,
    "cmd_base": S32, "swing": S32, "windows": (0, (1 << 32) - 1), "phase": (0, 0xFFFF),
    "count": (0, 0xFFFF), "bad_windows": (0, 0xFFFF), "cmd": (0, 0xFFFF), "have_prev": (0, 0xFF),
    "transient": (0, 0xFF), "status": (0, 0xFF), "clipped": (0, 0xFF), "valid_run": (0, 0xFF),
    "kp_off": (0, 0xFF), "i_zero": (0, 0xFF),
    "w_acc_vi": S32, "w_acc_vq": S32, "w_acc_ii": S32, "w_acc_iq": S32, "w_isum": S32,
    "w_di": S32, "w_dv": S32, "pert_next": S32, "step_thr": S32, "thr_next": S32, "r_c": S32, "rc_next": S32, "kp": S32,
    "kp_next": S32, "corr_prev": S32, "corr_on": (0, 0xFF), "on_next": (0, 0xFF), "iz_last": (0, 0xFF), "w_clipped": (0, 0xFF),
    "w_transient": (0, 0xFF), "w_state": (0, 0xFF), "late_windows": (0, 0xFF),
}


def _product_range(p: Params):
    """Interval of one rounded, shifted demodulation product ``rshift_round(code * tab, ds)``.

    Codes are clamped to [0, adc_max]; table entries lie in [-amp, amp] with
    amp = 2**(tab_bits-1) - 1; rshift_round is monotone, so the ends map to the ends.
    """
    amp = (1 << (p.tab_bits - 1)) - 1
    return rshift_round(-p.adc_max * amp, p.demod_shift), rshift_round(p.adc_max * amp, p.demod_shift)


def state_bounds(p: Params):
    """Inclusive ``{field: (lo, hi)}`` for every ``ld_state_t`` field, valid after init, reset and any step.

    Parameters
    ----------
    p : algo.params.Params
        The integer parameter block.

    Notes
    -----
    * ``acc_*``: at most one window of products (step.py: "a window of shifted
      products fits acc_bits"); the bound is ``window`` products of the extreme sign.
    * ``isum``, ``vsum``: ``window`` codes of at most adc_max ("isum and vsum are below
      2**30"); ``isum_h``, ``vsum_h`` are snapshots of them at the window's half, same bound.
    * ``psum``, ``psum_prev``: one period of codes ("period sums are below 2**24").
    * ``r_est``: clamped to [0, r_max_q] (estimator.update_estimate, or 0 when forced);
      ``r_raw`` is only saturated to int32.
    * ``corr``, ``integ``: clamped to [0, corr_max_q] in step.correct, or forced to 0.
    * ``du_prev``: the last period's change of corr, a difference of two values in
      [0, corr_max_q] (or 0 when forced), so within +-corr_max_q; ``kp_off`` counts to 2 and holds.
    * ``corr_target``: step.drop_period, saturated to [0, 2**31 - 1] and deliberately not
      clamped to corr_max_q (the error must still read the shortfall at the ceiling).
    * ``swing``: int32-saturated magnitude of the current pair (estimator.classify), >= 0.
    * ``valid_run``: saturating uint8 count of valid windows (estimator.update_estimate).
    * ``pert_amp``: clamped to [pert_min, pert_max] at every window end; init sets pert_min.
    * ``w_*``: the window record, copies of the sums above at a window end; ``w_di``, ``w_dv``
      are a window sum less twice its half-window snapshot, within +-window * adc_max.
      ``pert_next`` and ``thr_next`` are what window_work leaves for pert_amp and step_thr, with
      their bounds (reset sets both too). ``kp``: estimator.gain_kp, clamped to [0, kp_max_q]
      (r_est >= 0), and ``kp_next`` the same; ``step_thr``: estimator.step_threshold, at least
      step_min, int32-saturated. ``r_c``, ``rc_next``: r_est - esr_q floored at 0, so within
      [0, r_max_q]; ``corr_prev``: a correction, in [0, corr_max_q].
    * ``cmd``: clamped to [cmd_min, cmd_max] in step._command; ``cmd_base`` is target_code
      plus the rounded correction (estimator.command_base), set at init, reset and every
      period end.
    """
    lo, hi = _product_range(p)
    win, per = p.window, p.period
    bounds = {
        "acc_vi": (win * lo, win * hi), "acc_vq": (win * lo, win * hi),
        "acc_ii": (win * lo, win * hi), "acc_iq": (win * lo, win * hi),
        "isum": (0, win * p.adc_max), "vsum": (0, win * p.adc_max),
        "isum_h": (0, win * p.adc_max), "vsum_h": (0, win * p.adc_max),
        "psum": (0, per * p.adc_max), "psum_prev": (0, per * p.adc_max),
        "r_est": (0, p.r_max_q), "r_raw": S32,
        "corr": (0, p.corr_max_q), "integ": (0, p.corr_max_q), "corr_target": (0, S32[1]),
        "du_prev": (-p.corr_max_q, p.corr_max_q),
        "swing": (0, S32[1]), "valid_run": (0, 0xFF), "kp_off": (0, 2), "i_zero": (0, 1),
        "pert_amp": (p.pert_min, p.pert_max),
        "windows": (0, (1 << 32) - 1),
        "phase": (0, per - 1), "count": (0, win - 1),
        "bad_windows": (0, 0xFFFF),
        "cmd": (p.cmd_min, p.cmd_max),
        "have_prev": (0, 1), "transient": (0, 1), "status": (0, 7), "clipped": (0, 7),
        "cmd_base": (p.target_code, p.target_code + rshift_round(p.corr_max_q, p.corr_frac)),
        "w_acc_vi": (win * lo, win * hi), "w_acc_vq": (win * lo, win * hi),
        "w_acc_ii": (win * lo, win * hi), "w_acc_iq": (win * lo, win * hi),
        "w_isum": (0, win * p.adc_max),
        "w_di": (-win * p.adc_max, win * p.adc_max), "w_dv": (-win * p.adc_max, win * p.adc_max),
        "pert_next": (p.pert_min, p.pert_max), "kp": (0, p.kp_max_q), "kp_next": (0, p.kp_max_q),
        "step_thr": (p.step_min, S32[1]), "thr_next": (p.step_min, S32[1]),
        "r_c": (0, p.r_max_q), "rc_next": (0, p.r_max_q),
        "corr_prev": (0, p.corr_max_q), "corr_on": (0, 1), "on_next": (0, 1), "iz_last": (0, 1),
        "w_clipped": (0, 7), "w_transient": (0, 1), "w_state": (0, 2), "late_windows": (0, 0xFF),
    }
    return {name: bounds[name] for name in STATE_FIELDS}


def declared_width_violations(p: Params):
    """Fields and intermediates whose range-analysis bound leaves their declared type.

    Returns a list of strings (empty when the parameter block is safe). The
    accumulators are checked against ``acc_bits`` (the declared width), every other
    state field against its C type, intermediates against int64.
    """
    out = []
    acc_type = (-(1 << (p.acc_bits - 1)), (1 << (p.acc_bits - 1)) - 1)
    for name, (lo, hi) in state_bounds(p).items():
        t_lo, t_hi = acc_type if name.startswith(("acc_", "w_acc_")) else STATE_TYPES[name]
        if lo < t_lo or hi > t_hi:
            out.append(f"{name}: [{lo}, {hi}] outside [{t_lo}, {t_hi}]")
    return out


def bound_violations(p: Params, state: dict):
    """``{field: (value, (lo, hi))}`` for every field of ``state`` (ints) outside :func:`state_bounds`."""
    return {k: (v, b) for k, b in state_bounds(p).items()
            for v in [int(state[k])] if not b[0] <= v <= b[1]}
