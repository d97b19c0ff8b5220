"""qwell.rootfind.brentq against scipy.optimize.brentq (the same algorithm): equal floats."""

from __future__ import annotations

import math

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.optimize import brentq as scipy_brentq

from qwell.errors import ConvergenceError
from qwell.rootfind import brentq


# Reference: scipy.optimize.brentq (R. P. Brent, Algorithms for Minimization without
# Derivatives, Prentice-Hall 1973, ch. 4); the port must return the very same float.
@settings(max_examples=200, deadline=None)
@given(k=st.floats(1.0001, 1e4), tol=st.sampled_from([1e-14, 1e-12, 1e-8]))
def test_matthews_blakeslee_balance_equals_scipy(k, tol):
    def g(u):
        return u - k * (math.log(u) + 1.0)

    hi = max(2.0 * k, 10.0)
    while g(hi) <= 0:
        hi *= 2.0
    assert brentq(g, k, hi, xtol=tol, rtol=1e-14, maxiter=200) == \
        scipy_brentq(g, k, hi, xtol=tol, rtol=1e-14, maxiter=200)


@pytest.mark.parametrize("f, a, b", [
    (lambda x: x ** 3 - 2.0 * x - 5.0, 2.0, 3.0),       # Wallis' cubic (common practice, no source)
    (lambda x: math.cos(x) - x, 0.0, 1.0),
    (lambda x: math.exp(x) - 10.0, -5.0, 10.0),
    (lambda x: (x - 0.3) ** 5, -1.0, 2.0),              # flat root: many bisections
])
def test_classic_roots_equal_scipy(f, a, b):
    assert brentq(f, a, b, xtol=1e-13, maxiter=500) == scipy_brentq(f, a, b, xtol=1e-13, maxiter=500)


def test_refuses_unbracketed_and_reports_non_convergence():
    with pytest.raises(ValueError):
        brentq(lambda x: x * x + 1.0, -1.0, 1.0)
    with pytest.raises(ConvergenceError):
        brentq(lambda x: (x - 0.3) ** 5, -1.0, 2.0, xtol=1e-15, maxiter=3)
