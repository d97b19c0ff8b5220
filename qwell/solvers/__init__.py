"""Subband solvers, dispatched by name through :data:`METHODS`.

``solve(band, method="exact")`` runs the transfer-matrix solver
(:mod:`qwell.solvers.exact`); ``method="semiclassical"`` runs the WKB
estimator (:mod:`qwell.solvers.semiclassical`).  An unknown method raises
:class:`~qwell.errors.ParameterError` naming the known ones.
"""

from __future__ import annotations

from importlib import import_module

from ..errors import ParameterError
from .results import Levels, Miniband, State

__all__ = ["METHODS", "solve", "Levels", "State", "Miniband", "solve_exact",
           "count_states_below", "minibands", "wavefunction"]

#: names re-exported lazily from qwell.solvers.exact (imported on first use)
_EXACT_EXPORTS = ("solve_exact", "count_states_below", "minibands", "wavefunction")


def __getattr__(name):
    if name in _EXACT_EXPORTS:
        return getattr(import_module("qwell.solvers.exact"), name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")

#: method name -> (module, function)
METHODS = {
    "exact": ("qwell.solvers.exact", "solve_exact"),
    "semiclassical": ("qwell.solvers.semiclassical", "solve_semiclassical"),
}


def solver_function(method: str):
    """The solve function of ``method``; ParameterError for an unknown name."""
    try:
        module, name = METHODS[method]
    except KeyError:
        raise ParameterError(f"unknown method {method!r}; expected one of: "
                             + ", ".join(METHODS)) from None
    return getattr(import_module(module), name)


def solve(band, method: str = "exact", **options) -> Levels:
    """Solve one :class:`~qwell.bands.Band` with the named method.

    Parameters
    ----------
    band : qwell.bands.Band
    method : {'exact', 'semiclassical'}
    **options
        Passed to the method's solve function (e.g. ``tolerance_eV``).
    """
    return solver_function(method)(band, **options)
