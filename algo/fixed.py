"""Fixed-point primitives, mirrored one for one by c_ref/fixed.h.

Every function works on Python ints of unbounded size; the caller's range
analysis (algo/ranges.py) guarantees the C mirror never overflows its
declared type, so both give the same bits. Right shifts of negative values
floor, as C's ``>>`` does on every target linedrop supports (two's complement,
arithmetic shift).
"""


def sat(x, lo, hi):
    """Clamp ``x`` to ``[lo, hi]``."""
    if x < lo:
        return lo
    if x > hi:
        return hi
    return x


def sat_s32(x):
    """Saturate to the int32 range."""
    return sat(x, -0x80000000, 0x7FFFFFFF)


def rshift_round(x, s):
    """Shift right by ``s >= 0`` bits, rounding half up (toward +inf on ties)."""
    if s <= 0:
        return x
    return (x + (1 << (s - 1))) >> s


def div_trunc(a, b):
    """Integer division truncating toward zero, as C's ``/`` (``b != 0``)."""
    q = abs(a) // abs(b)
    return q if (a >= 0) == (b >= 0) else -q


def bit_length(u):
    """Number of significant bits of ``u >= 0`` (0 for 0)."""
    return u.bit_length()


def step_toward(x, target, s):
    """Move ``x`` a fraction ``2**-s`` of the way to ``target``, at least 1 LSB.

    The one-LSB floor removes the dead band a plain rounding shift leaves
    (``rshift_round(-1, 2) == 0``), so the value always reaches ``target``.
    """
    d = rshift_round(target - x, s)
    if d == 0 and target != x:
        d = 1 if target > x else -1
    return x + d
