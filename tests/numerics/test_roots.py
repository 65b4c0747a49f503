"""Brent's root finder against scipy.optimize.brentq (reference library)."""

from __future__ import annotations

import math

import pytest
from scipy import optimize, special

from reporter.errors import FitError
from reporter.numerics.roots import find_root

CASES = [
    (lambda x: x**3 - 2 * x - 5, 2.0, 3.0),  # Wallis's example, root 2.0945514815...
    (lambda x: math.cos(x) - x, 0.0, 1.0),
    (lambda x: math.exp(x) - 1e6, 0.0, 20.0),
    (lambda x: special.ncfdtr(3, 40, x, 4.0) - 0.95, 0.0, 200.0),  # a noncentrality bound
    (lambda x: (x - 1e-9) * 1e12, 0.0, 1.0),
    (lambda x: math.atan(x - 7.25), -1e3, 1e3),
]


@pytest.mark.parametrize("f, a, b", CASES, ids=["cubic", "cos", "exp", "ncf", "tiny-root", "atan-wide"])
def test_matches_brentq(f, a, b):
    """find_root agrees with scipy.optimize.brentq to the requested tolerance."""
    ours = find_root(f, a, b, xtol=1e-14, rtol=1e-14)
    ref = optimize.brentq(f, a, b, xtol=1e-14, rtol=1e-14)
    assert math.isclose(ours, ref, rel_tol=1e-12, abs_tol=1e-13)
    assert abs(f(ours)) <= abs(f(ours + 1e-6 * max(1, abs(ours)))) + 1e-9


def test_endpoint_root_and_bad_bracket():
    """A root at an end point is returned; a bracket without a sign change is an error."""
    assert find_root(lambda x: x - 1.0, 1.0, 2.0) == 1.0
    with pytest.raises(FitError, match="does not change sign"):
        find_root(lambda x: x * x + 1, -1.0, 1.0)
