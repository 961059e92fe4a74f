"""The correction law's ring guard and anti-windup in algo/step.py on hand-set states, worked by
hand from algo.step.correct's docstring (mirrored line for line by c_ref/step.c, which
tests/test_bitexact_props.py holds to the model).

The law runs with a proportional gain of exactly 1 (kp_max_q = 1.0 in Q GAIN_FRAC, reached by a
large estimate), no integral gain and the ESR allowance zero, so one period gives
corr = e + integ with e = drop - corr; with the integral equal to the correction in force, the new
correction is the period's drop and its step du = drop - corr. drop_period reads the committed
r_c = estimate - ESR allowance, 2**16 (Q16, so 1.0 V-code per I-code), against the last period's
sum psum_prev of current codes as psum_prev / 2 in Q corr_frac DAC codes for the default settings
(a 32-sample period and unit gains: psum_prev * 2**16 >> 13, then * 2**16 >> 20), so a drop is
set through psum_prev = 2 * drop. The committed inputs come from the window work itself
(_law_state).
"""
from dataclasses import replace

import pytest

from algo import estimator, step
from algo.config import AlgoConfig
from algo.params import GAIN_FRAC, derive
from algo.state import WIN_PENDING, State

P = derive(AlgoConfig())
P_LAW = replace(P, ki_q=0, kp_max_q=1 << GAIN_FRAC, corr_max_q=1 << 12, esr_q=0)
CORR = 1000                   # correction in force, Q corr_frac codes (the integral the same)
GUARD = P_LAW.corr_max_q >> 6  # a swing must exceed corr_max / 64 to count: 64


def _law_state(p=P_LAW, r_est=1 << 16, **fields):
    """A State whose committed correction inputs (r_c, kp, corr_on) are what the window work
    leaves for the estimate ``r_est`` with valid_run 2 (a window of zero sums: low swing, the
    estimate held, one bad window), with ``fields`` set on top; the perturbation amplitude at 0
    as in the worked figures."""
    s = State(r_est=r_est, valid_run=2, w_state=WIN_PENDING)
    assert estimator.window_work(p, s) == 1
    step._commit(s)
    s.pert_amp = 0
    for name, value in fields.items():
        setattr(s, name, value)
    return s


def _period(drop, du_prev, kp_off, corr=CORR):
    s = _law_state(corr=corr, integ=corr, du_prev=du_prev, kp_off=kp_off,
                   psum_prev=2 * drop)
    assert step.drop_period(P_LAW, s) == drop       # the module docstring's arithmetic
    step.correct(P_LAW, s)
    return s.corr, s.kp_off, s.du_prev


@pytest.mark.parametrize("drop, du_prev, kp_off, want", [
    (CORR + 500, -200, 1, (CORR, 2, 0)),       # the second reversing swing over double: P off, integral alone
    (CORR - 500, 200, 1, (CORR, 2, 0)),        # the same downward
    (CORR + 500, -200, 0, (CORR + 500, 1, 500)),   # the first only counts
    (CORR + 400, -200, 1, (CORR + 400, 0, 400)),   # exactly double is not more than double
    (CORR + 500, 200, 1, (CORR + 500, 0, 500)),    # no reversal
    (CORR + 500, 0, 1, (CORR + 500, 0, 500)),      # nothing to reverse
    (CORR + 50, -20, 1, (CORR + 50, 0, 50)),           # more than double but under corr_max / 64
    (CORR + GUARD, -20, 1, (CORR + GUARD, 0, GUARD)),  # a swing of corr_max / 64 is too small ...
    (CORR + GUARD + 1, -20, 1, (CORR, 2, 0)),          # ... one code more trips the guard
    (CORR - 500, 1, 1, (CORR, 2, 0)),          # a one-code step reversed counts too ...
    (CORR + 500, -1, 1, (CORR, 2, 0)),         # ... either way
    (CORR - 500, -200, 1, (CORR - 500, 0, -500)),  # no reversal, downward
    (CORR - 500, 0, 1, (CORR - 500, 0, -500)),     # nothing to reverse, downward
    (CORR + 500, -200, 2, (CORR, 2, 0)),       # P off: the output is the integral until a valid window
    (CORR + 40000, -200, 2, (CORR, 2, 0)),     # ... however large the error (a gain of 1 LSB would add 1)
], ids=["trips_up", "trips_down", "first_swing_counts", "exactly_double", "same_direction", "no_previous_step",
        "below_the_swing_floor", "at_the_swing_floor", "above_the_swing_floor", "one_code_step_reversed", "one_code_step_reversed_up",
        "same_direction_down", "no_previous_step_down", "stays_off", "stays_off_large_error"])
def test_the_ring_guard_turns_the_proportional_part_off_on_the_second_reversing_swing_over_double(
        drop, du_prev, kp_off, want):
    assert _period(drop, du_prev, kp_off) == want


def test_the_integral_holds_while_the_output_sits_above_the_ceiling_and_the_error_pushes_up():
    # kp 1 and ki 1/2: e = 3000 - 1000 = 2000 asks for u = 2000 + (1000 + 1000) = 4000, above the
    # ceiling (corr_max_q 2048; the command's room is larger), so the integral stays at 1000
    # instead of moving to 2000, and the output is the ceiling.
    p = replace(P_LAW, ki_q=1 << (GAIN_FRAC - 1), corr_max_q=2048)
    s = _law_state(corr=CORR, integ=CORR, psum_prev=2 * 3000)
    step.correct(p, s)
    assert (s.corr, s.integ) == (2048, CORR)


def test_at_exactly_the_ceiling_the_integral_still_moves():
    # kp 1, ki 1/2, integral 848 under a correction of 1000: e = 1800 - 1000 = 800 gives
    # u = 800 + (848 + 400) = 2048, the ceiling itself, so the integral moves to 1248.
    p = replace(P_LAW, ki_q=1 << (GAIN_FRAC - 1), corr_max_q=2048)
    s = _law_state(corr=CORR, integ=848, psum_prev=2 * 1800)
    step.correct(p, s)
    assert (s.corr, s.integ) == (2048, 1248)


def test_the_ceiling_is_the_command_room_less_the_perturbation_peak():
    p = replace(P, corr_max_q=1 << 20)
    s = State(pert_amp=100)
    assert step.corr_ceiling(p, s) == (p.cmd_max - p.target_code - 100) << p.corr_frac
    assert step.corr_ceiling(replace(p, corr_max_q=5), s) == 5
    s.pert_amp = p.cmd_max - p.target_code + 1      # no room at all: the ceiling is 0
    assert step.corr_ceiling(p, s) == 0


@pytest.mark.parametrize("change, transient", [(100, 0), (101, 1), (-101, 1)],
                         ids=["at_the_threshold", "one_above", "one_above_downward"])
def test_a_load_step_is_a_period_sum_change_of_more_than_the_threshold(change, transient):
    # No swing yet: the threshold is step_min itself.
    thr = estimator.step_threshold(replace(P, step_min=100), 0)
    assert thr == 100
    s = State(have_prev=1, psum_prev=5000, psum=5000 + change, step_thr=thr)
    step._period_end(s)
    assert (s.transient, s.psum_prev) == (transient, 5000 + change)


def test_at_one_code_of_error_above_the_ceiling_the_integral_holds():
    # integral 2047 under a 2048 ceiling, e = 1: u = 1 + (2047 + 1) = 2049 > 2048, so it holds.
    p = replace(P_LAW, ki_q=1 << (GAIN_FRAC - 1), corr_max_q=2048)
    s = _law_state(corr=2047, integ=2047, psum_prev=2 * 2048)
    step.correct(p, s)
    assert (s.corr, s.integ) == (2048, 2047)


@pytest.mark.parametrize("integ, want_integ", [(10, 0), (1000, 500)], ids=["integral_floors_at_0", "integral_falls"])
def test_a_load_dump_takes_the_output_and_the_integral_down_to_zero_never_below(integ, want_integ):
    # Drop 0 against a correction of 1000: e = -1000, u = -1000 + (integ - 500) < 0.
    p = replace(P_LAW, ki_q=1 << (GAIN_FRAC - 1))
    s = _law_state(corr=CORR, integ=integ, psum_prev=0)
    step.correct(p, s)
    assert (s.corr, s.integ) == (0, want_integ)


def test_a_period_with_a_current_code_at_zero_tracks_no_drop_and_takes_its_error_against_the_correction():
    # i_zero: the drop read is 0 and e = -max(corr, integ) = -1000, so u = -1000 + 1000 = 0.
    s = _law_state(corr=CORR, integ=CORR, psum_prev=2 * 5000, iz_last=1)
    step.correct(P_LAW, s)
    assert (s.corr_target, s.corr) == (0, 0)


@pytest.mark.parametrize("esr_q, psum, want", [(0, 3000, 1500), (1 << 15, 3000, 750), (1 << 16, 3000, 0),
                                               (1 << 16, 1 << 20, 0), (1 << 17, 1 << 20, 0)],
                         ids=["no_allowance", "half_the_estimate", "all_of_it", "all_of_it_at_a_large_current",
                              "more_than_the_estimate"])
def test_the_drop_tracked_is_the_estimate_less_the_esr_allowance_times_the_current_never_below_zero(esr_q, psum, want):
    # A one-LSB estimate left over would read 2**20 * 2**-13 * 2**-4 = 8 codes at the large current.
    p = replace(P_LAW, esr_q=esr_q)
    s = _law_state(p, psum_prev=psum)
    assert step.drop_period(p, s) == want
