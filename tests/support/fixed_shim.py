"""Exposes the static inline primitives of c_ref/fixed.h to Python through a tiny cffi module.

Also holds the exact rational reference (``fractions.Fraction``) each
primitive is held to, so the table tests and the property tests share one
definition of "right".
"""
import importlib.util
import math
import os
from fractions import Fraction

from cffi import FFI

C_REF = os.path.join(os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__)))), "c_ref")

INT32_MIN, INT32_MAX = -(1 << 31), (1 << 31) - 1
INT64_MIN, INT64_MAX = -(1 << 63), (1 << 63) - 1

_CDEF = """
int32_t t_sat(int32_t x, int32_t lo, int32_t hi);
int64_t t_sat64(int64_t x, int64_t lo, int64_t hi);
int32_t t_sat_s32(int64_t x);
int32_t t_rshift_round(int32_t x, unsigned s);
int32_t t_rshift_round_safe(int32_t x, unsigned s);
int64_t t_rshift_round64(int64_t x, unsigned s);
int64_t t_div_trunc(int64_t a, int64_t b);
unsigned t_bit_length(uint32_t u);
int32_t t_abs32(int32_t x);
int32_t t_step_toward(int32_t x, int32_t target, unsigned s);
"""

_SOURCE = """
#include "fixed.h"
int32_t t_sat(int32_t x, int32_t lo, int32_t hi) { return ld_sat(x, lo, hi); }
int64_t t_sat64(int64_t x, int64_t lo, int64_t hi) { return ld_sat64(x, lo, hi); }
int32_t t_sat_s32(int64_t x) { return ld_sat_s32(x); }
int32_t t_rshift_round(int32_t x, unsigned s) { return ld_rshift_round(x, s); }
int32_t t_rshift_round_safe(int32_t x, unsigned s) { return ld_rshift_round_safe(x, s); }
int64_t t_rshift_round64(int64_t x, unsigned s) { return ld_rshift_round64(x, s); }
int64_t t_div_trunc(int64_t a, int64_t b) { return ld_div_trunc(a, b); }
unsigned t_bit_length(uint32_t u) { return ld_bit_length(u); }
int32_t t_abs32(int32_t x) { return ld_abs32(x); }
int32_t t_step_toward(int32_t x, int32_t target, unsigned s) { return ld_step_toward(x, target, s); }
"""

_cache = {}


def load(tmp_dir):
    """Compile (once per process) and import the shim; returns its ``lib``."""
    if "lib" not in _cache:
        ffi = FFI()
        ffi.cdef(_CDEF)
        ffi.set_source("_ld_fixed_shim", _SOURCE, include_dirs=[C_REF], extra_compile_args=["-std=c99"])
        path = ffi.compile(tmpdir=str(tmp_dir), verbose=False)
        spec = importlib.util.spec_from_file_location("_ld_fixed_shim", path)
        mod = importlib.util.module_from_spec(spec)
        spec.loader.exec_module(mod)
        _cache["lib"] = mod.lib
    return _cache["lib"]


# Exact references: what each primitive means, in rational arithmetic.

def exact_sat(x, lo, hi):
    return min(max(x, lo), hi)


def exact_rshift_round(x, s):
    """x / 2**s rounded to nearest, ties toward +inf."""
    return math.floor(Fraction(x, 1 << s) + Fraction(1, 2))


def exact_div_trunc(a, b):
    """a / b rounded toward zero."""
    return math.trunc(Fraction(a, b))


def exact_bit_length(u):
    """Smallest n with u < 2**n."""
    n = 0
    while u >= 1 << n:
        n += 1
    return n


def exact_step_toward(x, target, s):
    """x plus (target - x) / 2**s rounded half up, and at least one LSB toward target."""
    d = math.floor(Fraction(target - x, 1 << s) + Fraction(1, 2))
    if d == 0 and target != x:
        d = 1 if target > x else -1
    return x + d
