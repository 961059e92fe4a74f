"""A bracketing scalar root finder (Brent's method), so start-up does not import scipy.optimize.

Importing scipy.optimize takes longer than a whole one-second simulation of a small plant;
the operating points at start-up need only one bracketing root finder. This is Brent's
method (R. P. Brent, "Algorithms for Minimization without Derivatives", Prentice-Hall 1973,
ch. 4) in the form scipy.optimize.brentq uses: inverse quadratic extrapolation or secant
steps while they shrink the bracket fast enough, bisection otherwise.
tests/test_plant_roots.py holds it to scipy.optimize.brentq.
"""
import math

#: scipy.optimize.brentq's defaults: iterations, and the smallest relative tolerance (4 eps).
MAX_ITER = 100
_RTOL_MIN = 4.0 * 2.220446049250313e-16


def brentq(f, a, b, xtol=2e-12, rtol=_RTOL_MIN, maxiter=MAX_ITER):
    """A root of ``f`` in [a, b], where ``f(a)`` and ``f(b)`` differ in sign.

    Parameters
    ----------
    f : callable
        Scalar function of one float.
    a, b : float
        The bracket's ends (either order).
    xtol, rtol : float
        The root is found to within ``xtol + rtol * |x|`` (same units as ``a``); ``rtol`` at
        least 4 machine epsilons.
    maxiter : int
        Iterations before it gives up (RuntimeError).

    Returns
    -------
    float
    """
    if xtol <= 0.0:
        raise ValueError(f"xtol {xtol!r}: must be > 0")
    if rtol < _RTOL_MIN:
        raise ValueError(f"rtol {rtol!r}: must be >= {_RTOL_MIN}")
    x_pre, x_cur = float(a), float(b)
    f_pre, f_cur = f(x_pre), f(x_cur)
    if f_pre * f_cur > 0.0:
        raise ValueError("f(a) and f(b) must have different signs")
    if f_pre == 0.0:
        return x_pre
    if f_cur == 0.0:
        return x_cur
    x_blk = f_blk = s_pre = s_cur = 0.0
    for _ in range(maxiter):
        if f_pre * f_cur < 0.0:
            # The root lies between the last two estimates: the older one becomes the far end.
            x_blk, f_blk = x_pre, f_pre
            s_pre = s_cur = x_cur - x_pre
        if abs(f_blk) < abs(f_cur):
            x_pre, x_cur, x_blk = x_cur, x_blk, x_cur
            f_pre, f_cur, f_blk = f_cur, f_blk, f_cur
        delta = (xtol + rtol * abs(x_cur)) / 2.0
        s_bis = (x_blk - x_cur) / 2.0
        if f_cur == 0.0 or abs(s_bis) < delta:
            return x_cur
        if abs(s_pre) > delta and abs(f_cur) < abs(f_pre):
            if x_pre == x_blk:
                s_try = -f_cur * (x_cur - x_pre) / (f_cur - f_pre)    # secant
            else:
                d_pre = (f_pre - f_cur) / (x_pre - x_cur)
                d_blk = (f_blk - f_cur) / (x_blk - x_cur)
                s_try = -f_cur * (f_blk * d_blk - f_pre * d_pre) / (d_blk * d_pre * (f_blk - f_pre))
            if 2.0 * abs(s_try) < min(abs(s_pre), 3.0 * abs(s_bis) - delta):
                s_pre, s_cur = s_cur, s_try    # a short enough step: take it, remember the last
            else:
                s_pre = s_cur = s_bis
        else:
            s_pre = s_cur = s_bis
        x_pre, f_pre = x_cur, f_cur
        x_cur += s_cur if abs(s_cur) > delta else math.copysign(delta, s_bis)
        f_cur = f(x_cur)
    raise RuntimeError(f"no root to within {xtol} + {rtol} |x| after {maxiter} iterations")
