"""Window-end rules of algo/estimator.py on hand-set sums and states, worked by hand from the
rules its docstrings and algo/config.py's SETTINGS state (mirrored line for line by
c_ref/estimator.c, which tests/test_bitexact_props.py holds to the model).

The classification cases set the trend sums to zero (no trend to remove), the sampling phase to
none (rot_c_q = 1.0, rot_s_q = 0) and r_frac to 12 with a current pair of (4096, 0) or
(2048, 2048), so the real part is the voltage pair's in-phase code itself: r_raw =
(vi * 4096 << 12) / 4096**2 = vi, and the quadrature test reads |xnum| << 12 against x_max_q * den.
Each boundary is the one the setting names: swing_min_a is the smallest swing accepted,
r_max_ohm and x_max_ohm the largest plausible parts, a real part below zero is no passive plant.
"""
from dataclasses import replace

import pytest

from algo import estimator as est
from algo import state as st
from algo.config import AlgoConfig
from algo.params import ROT_FRAC, derive

P = derive(AlgoConfig())
#: Real part read as vi itself (module docstring).
P_UNIT = replace(P, r_frac=12, rot_c_q=1 << ROT_FRAC, rot_s_q=0, swing_min=1, r_max_q=1 << 20, x_max_q=1 << 20)
I_CODE = 4096


def _window(vi, vq=0, ii=I_CODE, iq=0):
    """A State whose finished window (the w_* record) holds these demodulation sums and no trend."""
    return st.State(w_acc_vi=vi, w_acc_vq=vq, w_acc_ii=ii, w_acc_iq=iq, w_state=st.WIN_PENDING)


@pytest.mark.parametrize("swing_min, status", [(I_CODE, st.STATUS_VALID), (I_CODE + 1, st.STATUS_LOW_SWING)],
                         ids=["swing_at_swing_min_accepted", "swing_one_below_low_swing"])
def test_the_smallest_current_swing_accepted_is_swing_min(swing_min, status):
    assert est.classify(replace(P_UNIT, swing_min=swing_min), _window(100))[0] == status


@pytest.mark.parametrize("vi, r_max_q, status", [
    (1000, 1000, st.STATUS_VALID),      # at r_max: plausible
    (1001, 1000, st.STATUS_R_HIGH),     # one LSB above
    (5000, 1000, st.STATUS_R_HIGH),     # far above
    (0, 1000, st.STATUS_VALID),         # zero resistance is passive
    (-1, 1000, st.STATUS_R_LOW),        # one LSB below zero is not
], ids=["at_r_max", "one_above_r_max", "far_above_r_max", "zero", "one_below_zero"])
def test_the_real_part_is_read_as_vi_and_judged_against_zero_and_r_max(vi, r_max_q, status):
    got, r_raw = est.classify(replace(P_UNIT, r_max_q=r_max_q), _window(vi))
    assert (got, r_raw) == (status, vi)


@pytest.mark.parametrize("x_max_q, status", [(1 << 9, st.STATUS_VALID), ((1 << 9) - 1, st.STATUS_REACTIVE)],
                         ids=["at_x_max", "one_below"])
def test_the_quadrature_part_at_x_max_is_plausible_and_above_it_reactive(x_max_q, status):
    # vq = 512 against (4096, 0): xnum = 512 * 4096 = 2**21, den = 2**24, and |xnum| << 12 = 2**33
    # equals x_max_q * den exactly at x_max_q = 2**9 (1/8 in Q12).
    assert est.classify(replace(P_UNIT, x_max_q=x_max_q), _window(1000, vq=512))[0] == status


def test_a_voltage_in_phase_with_a_current_at_45_degrees_has_no_quadrature_part():
    # V = 0.5 I with both pairs at 45 degrees: xnum = vq ii - vi iq = 0, however small x_max.
    status, r_raw = est.classify(replace(P_UNIT, x_max_q=1), _window(1024, 1024, 2048, 2048))
    assert (status, r_raw) == (st.STATUS_VALID, 1 << 11)


P_EST = replace(P, r_step_max_q=100, r_shift=4, r_max_q=1 << 20)


def _updated(valid_run, r_est, r_raw):
    s = st.State(valid_run=valid_run, r_est=r_est)
    est.update_estimate(P_EST, s, r_raw)
    return s.r_est, s.valid_run


@pytest.mark.parametrize("valid_run, r_est, r_raw, want", [
    (0, 0, 777, (777, 1)),          # the first valid window is taken as it is
    (1, 1000, 1200, (1200, 1)),     # a second one more than r_step_max off replaces it, unconfirmed
    (1, 1000, 1100, (1050, 2)),     # one exactly r_step_max off is averaged in (gain 1/2)
    (2, 1000, 5000, (1100, 3)),     # later windows move at most r_step_max up ...
    (2, 1000, 0, (900, 3)),         # ... and down (gain 1/4 asks for -250)
    (3, 1, 0, (0, 4)),              # at least one LSB toward the window: reaches 0
    (254, 1000, 1000, (1000, 255)),
    (255, 1000, 1000, (1000, 255)),  # valid_run is a uint8 that saturates
], ids=["first", "second_far_replaces", "second_at_step_averages", "third_clamped_up", "third_clamped_down",
        "reaches_zero", "run_to_255", "run_saturates"])
def test_the_estimate_takes_the_first_window_replaces_an_unconfirmed_one_and_moves_at_most_r_step_max(
        valid_run, r_est, r_raw, want):
    assert _updated(valid_run, r_est, r_raw) == want


def test_the_perturbation_amplitude_falls_at_most_by_half_a_window():
    s = st.State(pert_amp=1000)
    assert est.next_pert_amp(P, s, st.STATUS_VALID, 0) == 500


def test_the_command_base_leaves_the_perturbation_room_under_cmd_max_whatever_the_correction():
    # A window end can raise pert_amp after the period's correction was bounded with the old one.
    s = st.State(corr=(P.cmd_max - P.target_code) << P.corr_frac, pert_amp=100)
    assert est.command_base(P, s) == P.cmd_max - 100
    s.corr = 5 << P.corr_frac
    assert est.command_base(P, s) == P.target_code + 5


@pytest.mark.parametrize("before, after", [(0xFFFE, 0xFFFF), (0xFFFF, 0xFFFF)])
def test_the_bad_window_count_is_a_uint16_that_saturates(before, after):
    s = st.State(bad_windows=before, w_state=st.WIN_PENDING)
    assert est.window_work(P, s) == 1    # all sums zero: a low-swing window, a fault window
    assert (s.status, s.bad_windows, s.w_state) == (st.STATUS_LOW_SWING, after, st.WIN_DONE)


def test_the_window_work_does_nothing_unless_a_window_waits():
    s = st.State(bad_windows=3)
    assert est.window_work(P, s) == 0
    assert s == st.State(bad_windows=3)
