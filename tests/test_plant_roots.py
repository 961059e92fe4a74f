"""harness.plant.roots.brentq against scipy.optimize.brentq (the published implementation of Brent's method)."""
import math

import pytest
from hypothesis import given
from hypothesis import strategies as st
from scipy.optimize import brentq as scipy_brentq

from harness.plant.loads import LAMP_R_EXPONENT, LAMP_U_AMBIENT, _lamp_loss
from harness.plant.roots import brentq

# Functions with one root in the bracket, of the shapes start-up solves: smooth, steep, flat
# near the root, a root at an end, and the lamp filament's power balance.
CASES = {
    "linear": (lambda x: 2.0 * x - 3.0, 0.0, 5.0),
    "cubic": (lambda x: x**3 - 2.0 * x - 5.0, 2.0, 3.0),
    "flat_near_root": (lambda x: (x - 1.3) ** 3 + 1e-3 * (x - 1.3), 0.0, 4.0),
    "steep": (lambda x: math.exp(30.0 * x) - 7.0, -1.0, 1.0),
    "root_at_end": (lambda x: x - 2.0, 2.0, 9.0),
    "supply_drop": (lambda v: 24.0 - v - 1.5 * (40.0 / v + v / 500.0), 12.0, 24.0),
    "lamp_balance": (lambda u: 0.9**2 * u ** (-LAMP_R_EXPONENT) - _lamp_loss(u), LAMP_U_AMBIENT, 2.8),
    "reversed_bracket": (lambda x: math.cos(x) - x, 1.0, 0.0),
}


@pytest.mark.parametrize("name", sorted(CASES))
@pytest.mark.parametrize("xtol, rtol", [(2e-12, 8.881784197001252e-16), (1e-13, 1e-13), (1e-14, 1e-14), (1e-3, 1e-6)])
def test_brentq_returns_scipys_root_to_the_bit(name, xtol, rtol):
    f, a, b = CASES[name]
    assert brentq(f, a, b, xtol=xtol, rtol=rtol) == scipy_brentq(f, a, b, xtol=xtol, rtol=rtol)


@given(st.lists(st.floats(-10.0, 10.0), min_size=3, max_size=3), st.floats(0.01, 10.0), st.floats(0.01, 10.0))
def test_brentq_agrees_with_scipy_on_random_cubics_through_a_bracketed_root(coeffs, left, right):
    c1, c2, c3 = coeffs
    root = c1

    def f(x):
        return (x - root) * (1.0 + c2 * c2 * (x - root) ** 2) + 1e-3 * c3 * (x - root) ** 3

    a, b = root - left, root + right
    assert brentq(f, a, b, xtol=1e-13, rtol=1e-13) == scipy_brentq(f, a, b, xtol=1e-13, rtol=1e-13)


def test_brentq_counts_scipys_iterations_before_giving_up():
    f, a, b = lambda x: (x - 1.3) ** 5, 0.0, 4.0
    _, info = scipy_brentq(f, a, b, xtol=1e-300, rtol=1e-15, maxiter=5, full_output=True, disp=False)
    assert not info.converged
    with pytest.raises(RuntimeError, match="after 5 iterations"):
        brentq(f, a, b, xtol=1e-300, rtol=1e-15, maxiter=5)


def test_brentq_refuses_a_bracket_without_a_sign_change_as_scipy_does():
    with pytest.raises(ValueError):
        scipy_brentq(lambda x: x * x + 1.0, -1.0, 1.0)
    with pytest.raises(ValueError, match="different signs"):
        brentq(lambda x: x * x + 1.0, -1.0, 1.0)
