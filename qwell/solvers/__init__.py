"""Subband solvers, dispatched by name through :data:`METHODS`.

``solve(band, method="exact")`` runs the transfer-matrix solver
(:mod:`qwell.solvers.exact`); ``method="semiclassical"`` runs the WKB
estimator (:mod:`qwell.solvers.semiclassical`); ``method="finite_difference"``
the finite-difference BenDaniel–Duke eigen-solver
(:mod:`qwell.solvers.finite_difference`, parabolic, used inside the
Schrödinger–Poisson loop).  Every method takes a :class:`~qwell.bands.Band`
and keyword options (``tolerance_eV``, ``max_states``, ...) and returns
:class:`Levels`.  An unknown method raises
:class:`~qwell.errors.ParameterError` naming the known ones.
"""

from __future__ import annotations

from ..errors import ParameterError
from .exact import count_states_below, minibands, solve_exact, wavefunction
from .finite_difference import solve_finite_difference
from .results import Levels, Miniband, State
from .semiclassical import solve_semiclassical

__all__ = ["METHODS", "solve", "solver_function", "Levels", "State", "Miniband", "solve_exact",
           "solve_semiclassical", "solve_finite_difference", "count_states_below", "minibands",
           "wavefunction"]

#: method name -> solve function ``f(band, **options) -> Levels``
METHODS = {
    "exact": solve_exact,
    "semiclassical": solve_semiclassical,
    "finite_difference": solve_finite_difference,
}


def solver_function(method: str):
    """The solve function of ``method``; ParameterError for an unknown name."""
    try:
        return METHODS[method]
    except KeyError:
        raise ParameterError(f"unknown method {method!r}; expected one of: "
                             + ", ".join(METHODS)) from None


def solve(band, method: str = "exact", **options) -> Levels:
    """Solve one :class:`~qwell.bands.Band` with the named method.

    Parameters
    ----------
    band : qwell.bands.Band
    method : {'exact', 'semiclassical', 'finite_difference'}
    **options
        Passed to the method's solve function (e.g. ``tolerance_eV``).
    """
    return solver_function(method)(band, **options)
