"""Properties of the fixed-point primitives: Python and C agree with exact rationals on random in-contract inputs."""
import pytest
from hypothesis import assume, given, strategies as st

from algo import fixed
from support.fixed_shim import (INT32_MAX, INT32_MIN, INT64_MAX, INT64_MIN, exact_bit_length,
                        exact_div_trunc, exact_rshift_round, exact_sat, exact_step_toward, load)
from support.tools import require_tool

i32 = st.integers(INT32_MIN, INT32_MAX)
i64 = st.integers(INT64_MIN, INT64_MAX)


@pytest.fixture(scope="module")
def c(tmp_path_factory):
    require_tool("gcc")
    return load(tmp_path_factory.mktemp("fixed_shim_props"))


@st.composite
def shifts_in_contract(draw, bits):
    """(x, s) with x + 2**(s-1) inside the signed ``bits``-bit range."""
    s = draw(st.integers(0, bits - 1))
    hi = (1 << (bits - 1)) - 1 - ((1 << (s - 1)) if s else 0)
    return draw(st.integers(-(1 << (bits - 1)), hi)), s


@given(shifts_in_contract(32))
def test_rshift_round_int32_equals_exact_rounding_in_python_and_c(c, xs):
    x, s = xs
    want = exact_rshift_round(x, s)
    assert fixed.rshift_round(x, s) == want == c.t_rshift_round(x, s)


@given(shifts_in_contract(64))
def test_rshift_round_int64_equals_exact_rounding_in_python_and_c(c, xs):
    x, s = xs
    want = exact_rshift_round(x, s)
    assert fixed.rshift_round(x, s) == want == c.t_rshift_round64(x, s)


@given(i32, i32, i32)
def test_sat_equals_exact_clamp_in_python_and_c(c, x, a, b):
    lo, hi = min(a, b), max(a, b)
    want = exact_sat(x, lo, hi)
    assert fixed.sat(x, lo, hi) == want == c.t_sat(x, lo, hi) == c.t_sat64(x, lo, hi)


@given(i64)
def test_sat_s32_equals_exact_clamp_in_python_and_c(c, x):
    assert fixed.sat_s32(x) == exact_sat(x, INT32_MIN, INT32_MAX) == c.t_sat_s32(x)


@given(i64, i64.filter(lambda b: b != 0))
def test_div_trunc_equals_exact_truncation_in_python_and_c(c, a, b):
    assume(not (a == INT64_MIN and b == -1))  # the quotient does not fit int64
    want = exact_div_trunc(a, b)
    assert fixed.div_trunc(a, b) == want == c.t_div_trunc(a, b)


@given(i32, st.integers(0, 31))
def test_overflow_free_rounding_shift_equals_exact_rounding_for_every_int32(c, x, s):
    """ld_rshift_round_safe has no precondition: it never forms x + 2**(s-1)."""
    assert c.t_rshift_round_safe(x, s) == exact_rshift_round(x, s) == fixed.rshift_round(x, s)


@given(st.integers(0, 0xFFFFFFFF))
def test_bit_length_equals_exact_count_in_python_and_c(c, u):
    assert fixed.bit_length(u) == exact_bit_length(u) == c.t_bit_length(u)


@given(i32, i32, st.integers(0, 31))
def test_step_toward_equals_exact_step_in_python_and_c_and_stays_between(c, x, target, s):
    assume(INT32_MIN <= target - x <= INT32_MAX)  # the contract in c_ref/fixed.h
    want = exact_step_toward(x, target, s)
    assert min(x, target) <= want <= max(x, target)
    assert fixed.step_toward(x, target, s) == want == c.t_step_toward(x, target, s)
