"""Corner-case tables for the fixed-point primitives: algo/fixed.py and c_ref/fixed.h vs exact rationals.

Rows are grouped by category (zero, one LSB, min/max, saturation edges,
rounding ties, carries). Each row is checked three ways: the Python primitive
against ``fractions.Fraction`` arithmetic, the C primitive (compiled through a
small cffi shim) against the same, and - for rounding and saturation - against
the general-purpose fixed-point library **apytypes** (PyPI), whose
``QuantizationMode.TIES_POS`` / ``TO_NEG`` and ``OverflowMode.SAT`` name the
semantics linedrop claims: round half toward +inf, arithmetic shift floors,
clamp on overflow.
"""
import pytest

from algo import fixed
from support.fixed_shim import (INT32_MAX, INT32_MIN, INT64_MAX, INT64_MIN, exact_bit_length,
                        exact_div_trunc, exact_rshift_round, exact_sat, exact_step_toward, load)
from support.tools import require_module, require_tool


@pytest.fixture(scope="module")
def c(tmp_path_factory):
    require_tool("gcc")
    return load(tmp_path_factory.mktemp("fixed_shim"))


def _rows(table):
    """Flatten ``{category: [row, ...]}`` into parametrize values with readable ids."""
    return [pytest.param(*row, id=f"{cat}-{'_'.join(map(str, row))}")
            for cat, rows in table.items() for row in rows]


def _singles(table):
    return _rows({cat: [(v,) for v in rows] for cat, rows in table.items()})


# (x, s): the int32 contract is INT32_MIN <= x and x + 2**(s-1) <= INT32_MAX.
RSHIFT32 = {
    "zero": [(0, 0), (0, 1), (0, 16), (0, 31)],
    "one_lsb": [(1, 0), (-1, 0), (1, 1), (-1, 1), (1, 2), (-1, 2), (1, 31), (-1, 31)],
    "ties": [(3, 1), (-3, 1), (2, 2), (-2, 2), (6, 2), (-6, 2), (1 << 15, 16), (-(1 << 15), 16),
             (1 << 29, 30), (-(3 << 29), 30), (5 << 7, 8), (-(5 << 7), 8)],
    "beside_ties": [((1 << 15) - 1, 16), (-(1 << 15) - 1, 16), ((1 << 15) + 1, 16),
                    (-(1 << 15) + 1, 16)],
    "min_max": [(INT32_MAX, 0), (INT32_MIN, 0), (INT32_MIN, 1), (INT32_MIN, 16), (INT32_MIN, 31),
                (INT32_MAX - 1, 1), (INT32_MAX - (1 << 15), 16), (INT32_MAX - (1 << 30), 31)],
    "carries": [(0xFFFF, 4), (0xFFFF, 1), (-0xFFFF, 4), (0x7FFF7FFF, 16), (-0x7FFF8000, 16),
                (0x3FFFFFFF, 30), (-0x40000000, 30)],
}

RSHIFT64 = {
    "zero": [(0, 0), (0, 63)],
    "one_lsb": [(1, 1), (-1, 1), (1, 62), (-1, 62), (1, 63), (-1, 63)],
    "ties": [(3, 1), (-3, 1), (1 << 39, 40), (-(1 << 39), 40), (1 << 61, 62), (-(3 << 61), 62)],
    "min_max": [(INT64_MAX, 0), (INT64_MIN, 0), (INT64_MIN, 1), (INT64_MIN, 63),
                (INT64_MAX - (1 << 23), 24), (INT64_MAX - (1 << 62), 63)],
    "carries": [((1 << 40) - 1, 8), (-(1 << 40) + 1, 8), ((1 << 62) - 1, 62), (0xFFFFFFFF, 32)],
}


@pytest.mark.parametrize("x, s", _rows(RSHIFT32))
def test_rshift_round_rounds_half_up_in_python_and_c_int32(c, x, s):
    assert s == 0 or x + (1 << (s - 1)) <= INT32_MAX, "row violates the int32 contract"
    want = exact_rshift_round(x, s)
    assert fixed.rshift_round(x, s) == want
    assert c.t_rshift_round(x, s) == want


@pytest.mark.parametrize("x, s", _rows(RSHIFT64))
def test_rshift_round_rounds_half_up_in_python_and_c_int64(c, x, s):
    assert s == 0 or x + (1 << (s - 1)) <= INT64_MAX, "row violates the int64 contract"
    want = exact_rshift_round(x, s)
    assert fixed.rshift_round(x, s) == want
    assert c.t_rshift_round64(x, s) == want


SAT32 = {
    "zero": [(0, 0, 0), (0, -1, 1), (0, 1, 5), (0, -5, -1)],
    "one_lsb": [(-1, 0, 10), (11, 0, 10), (1, 0, 10), (9, 0, 10), (-6, -5, 5), (6, -5, 5)],
    "saturation_edges": [(10, 0, 10), (0, 0, 10), (-5, -5, 5), (5, -5, 5), (7, 7, 7), (6, 7, 7),
                         (8, 7, 7)],
    "min_max": [(INT32_MIN, INT32_MIN, INT32_MAX), (INT32_MAX, INT32_MIN, INT32_MAX),
                (INT32_MIN, 0, 65535), (INT32_MAX, 0, 65535), (INT32_MAX, INT32_MIN, INT32_MIN),
                (INT32_MIN, INT32_MAX, INT32_MAX)],
}


@pytest.mark.parametrize("x, lo, hi", _rows(SAT32))
def test_sat_clamps_to_the_closed_range_in_python_and_c(c, x, lo, hi):
    want = exact_sat(x, lo, hi)
    assert fixed.sat(x, lo, hi) == want
    assert c.t_sat(x, lo, hi) == want
    assert c.t_sat64(x, lo, hi) == want


SAT_S32 = {
    "zero": [0],
    "one_lsb": [1, -1],
    "saturation_edges": [INT32_MAX, INT32_MAX + 1, INT32_MIN, INT32_MIN - 1, INT32_MAX - 1,
                         INT32_MIN + 1],
    "min_max": [INT64_MAX, INT64_MIN, INT64_MAX - 1, INT64_MIN + 1],
    "carries": [1 << 32, -(1 << 32), (1 << 32) - 1, (1 << 32) + INT32_MAX, 1 << 62],
}


@pytest.mark.parametrize("x", _singles(SAT_S32))
def test_sat_s32_clamps_any_int64_to_int32_in_python_and_c(c, x):
    want = exact_sat(x, INT32_MIN, INT32_MAX)
    assert fixed.sat_s32(x) == want
    assert c.t_sat_s32(x) == want
    assert c.t_sat64(x, INT32_MIN, INT32_MAX) == want


# (a, b): b != 0 and not (INT64_MIN / -1), whose quotient does not fit.
DIV = {
    "zero": [(0, 1), (0, -1), (0, INT64_MAX)],
    "one_lsb": [(1, 2), (-1, 2), (1, -2), (-1, -2), (1, 1), (-1, 1), (1, -1), (-1, -1)],
    "ties": [(3, 2), (-3, 2), (3, -2), (-3, -2), (7, 2), (-7, 2), (-7, -2)],
    "beside_ties": [(5, 3), (-5, 3), (4, 3), (-4, 3), (-(1 << 40) - 1, 1 << 20)],
    "min_max": [(INT64_MAX, 1), (INT64_MIN, 1), (INT64_MIN + 1, -1), (INT64_MAX, INT64_MAX),
                (INT64_MIN, INT64_MAX), (INT64_MAX, INT64_MIN), (INT64_MIN, INT64_MIN),
                ((1 << 62) - 1, 1), (-(1 << 62) + 1, (1 << 30) - 1)],
    "carries": [((1 << 46) << 16, (1 << 29) + 1), (-(1 << 61), 3), ((1 << 32) - 1, 1 << 16)],
}


@pytest.mark.parametrize("a, b", _rows(DIV))
def test_div_trunc_rounds_toward_zero_like_c_in_python_and_c(c, a, b):
    want = exact_div_trunc(a, b)
    assert fixed.div_trunc(a, b) == want
    assert c.t_div_trunc(a, b) == want


BITS = {
    "zero": [0],
    "one_lsb": [1, 2, 3],
    "carries": [(1 << k) - 1 for k in range(2, 33)] + [1 << k for k in range(2, 32)],
    "min_max": [0xFFFFFFFF, 0x80000000, 0x7FFFFFFF],
}


@pytest.mark.parametrize("u", _singles(BITS))
def test_bit_length_counts_significant_bits_in_python_and_c(c, u):
    want = exact_bit_length(u)
    assert fixed.bit_length(u) == want
    assert c.t_bit_length(u) == want


ABS = {"zero": [0], "one_lsb": [1, -1], "min_max": [INT32_MAX, -INT32_MAX, INT32_MIN + 1]}


@pytest.mark.parametrize("x", _singles(ABS))
def test_abs32_matches_python_abs_away_from_int32_min(c, x):
    assert c.t_abs32(x) == abs(x)


STEP = {
    "zero": [(0, 0, 0), (0, 0, 8), (INT32_MAX, INT32_MAX, 3), (INT32_MIN, INT32_MIN, 3)],
    "one_lsb": [(0, 1, 8), (0, -1, 8), (1, 0, 8), (-1, 0, 8), (5, 6, 0), (5, 6, 3), (6, 5, 3)],
    "ties": [(0, 2, 2), (0, -2, 2), (0, 6, 2), (0, -6, 2), (10, 11, 1), (11, 10, 1)],
    "dead_band": [(0, 3, 3), (0, -3, 3), (100, 97, 3), (100, 103, 3), (-4, 0, 8), (4, 0, 8)],
    # Contract (c_ref/fixed.h): target - x fits int32, as for the estimate and the correction.
    "min_max": [(0, INT32_MAX, 0), (INT32_MAX, 0, 0), (0, INT32_MAX, 1), (INT32_MAX, 0, 1),
                (0, INT32_MAX, 31), (INT32_MAX, 0, 31), (-1, INT32_MAX - 1, 8),
                (INT32_MIN, -1, 8), (-1, INT32_MIN, 31)],
    "carries": [(0x7FFF, 0x8000, 8), (0xFFFF, 0x10FFFF, 4), (-0x8000, -0x7FFF, 8)],
}


@pytest.mark.parametrize("x, target, s", _rows(STEP))
def test_step_toward_moves_a_rounded_fraction_and_never_stalls_in_python_and_c(c, x, target, s):
    want = exact_step_toward(x, target, s)
    assert min(x, target) <= want <= max(x, target)
    assert (want != x) == (target != x)
    assert fixed.step_toward(x, target, s) == want
    assert c.t_step_toward(x, target, s) == want


_W = 80  # apytypes working width: every int64 row plus its fraction bits fits


def _apy(x, frac_bits, mode, int_bits=_W):
    """``x * 2**-frac_bits`` quantised by apytypes (QuantizationMode named ``mode``) to a
    saturated integer of ``int_bits`` bits."""
    apytypes = require_module("apytypes")
    mode = getattr(apytypes.QuantizationMode, mode)
    v = apytypes.APyFixed(x & ((1 << _W) - 1), bits=_W, frac_bits=frac_bits)
    bits = v.cast(int_bits=int_bits, frac_bits=0, quantization=mode, overflow=apytypes.OverflowMode.SAT).to_bits()
    return bits - (1 << int_bits) if bits >> (int_bits - 1) else bits


@pytest.mark.parametrize("x, s", _rows(RSHIFT32) + _rows(RSHIFT64))
def test_rshift_round_is_apytypes_rounding_with_ties_toward_positive(x, s):
    assert fixed.rshift_round(x, s) == _apy(x, s, "TIES_POS")


@pytest.mark.parametrize("x, s", _rows(RSHIFT32) + _rows(RSHIFT64))
def test_arithmetic_right_shift_is_apytypes_rounding_toward_negative(x, s):
    """The model's ``>>`` (like C's on the supported targets) floors negative values."""
    assert x >> s == _apy(x, s, "TO_NEG")


@pytest.mark.parametrize("x", _singles(SAT_S32))
def test_sat_s32_is_an_apytypes_saturating_cast_to_32_bits(c, x):
    want = _apy(x, 0, "TO_NEG", int_bits=32)
    assert fixed.sat_s32(x) == want
    assert c.t_sat_s32(x) == want
