"""Gauss-Legendre rules of the semiclassical estimator (qwell.solvers.semiclassical.gauss_legendre).

References: numpy.polynomial.legendre.leggauss (the dense companion-matrix rule, outside
qwell); exactness of an n-point Gauss rule for polynomials of degree <= 2n - 1 and
int_-1^1 x^2k dx = 2/(2k+1) (common practice, no source); G. H. Golub and J. H. Welsch,
Math. Comp. 23, 221 (1969) for the tridiagonal eigenvalue form.
"""

from __future__ import annotations

import numpy as np
import pytest

from qwell.solvers.semiclassical import _GL_DENSE_MAX, gauss_legendre


@pytest.mark.parametrize("n", [16, _GL_DENSE_MAX])
def test_small_orders_are_numpys_rule(n):
    x, w = gauss_legendre(n)
    xr, wr = np.polynomial.legendre.leggauss(n)
    assert np.array_equal(x, xr) and np.array_equal(w, wr)


@pytest.mark.parametrize("n", [_GL_DENSE_MAX + 1, 512])
def test_large_orders_match_numpys_rule(n):
    x, w = gauss_legendre(n)
    xr, wr = np.polynomial.legendre.leggauss(n)
    assert np.max(np.abs(x - xr)) <= 2.3e-16          # nodes: one rounding unit at |x| <= 1
    assert np.max(np.abs(w - wr) / wr) < 1e-10


@pytest.mark.parametrize("n", [1024, 4096])
def test_large_orders_integrate_even_powers(n):
    x, w = gauss_legendre(n)
    assert np.all(np.diff(x) > 0) and np.all(w > 0)
    for k in (0, 1, 2, 5):
        assert np.sum(w * x ** (2 * k)) == pytest.approx(2.0 / (2 * k + 1), abs=2e-12)
    assert abs(np.sum(w * x ** 3)) < 1e-14
