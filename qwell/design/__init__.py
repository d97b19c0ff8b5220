"""Design workflows: parameters by path, sizing, sweeps, growth tolerances and sensitivities.

One topic per module:

* :mod:`qwell.stack_edit` (re-exported here): design parameters by path
  (``well.thickness``, ``barrier.x``, ``field``, ``temperature``) and the one
  writer of them, :func:`apply_parameters`;
* :mod:`qwell.formula` (re-exported): :func:`format_formula`, writing alloy
  formulas from compositions;
* :mod:`.evaluate`: :class:`DesignPoint`, :func:`design_point` and
  :func:`evaluate_many`, the one evaluation engine (locally or on Dask);
* :mod:`.sizing`: :func:`size` (a parameter value for a target wavelength);
* :mod:`.sweeps`: :func:`sweep` (1-D and 2-D grids);
* :mod:`.crossings`: :func:`find_anticrossings` (minimum gaps of neighbouring states);
* :mod:`.tolerances`: :func:`tolerance` (worst case, corners, RSS, Monte
  Carlo) and :func:`sensitivities` (± shifts of several transitions);
* :mod:`.growth`: correlated growth errors (composition and growth-rate
  groups); :mod:`.histogram`: the Monte Carlo histogram.

Wavelength sensitivities are given in engineering units: nm of wavelength
per monolayer (thickness; per nm when the layer has no lattice constant), per
0.01 of composition, per kV/cm and per K.
"""

from __future__ import annotations

import importlib

#: public name -> module that defines it.  The modules are imported on first use
#: (PEP 562), so a command that needs one workflow (``qwell levels`` needs only
#: :mod:`.line`) does not pay for the others.
_API = {
    "Parameter": "qwell.stack_edit",
    "DesignPoint": "qwell.design.evaluate",
    "SizeResult": "qwell.design.sizing",
    "MonolayerOption": "qwell.design.sizing",
    "SweepResult": "qwell.design.sweeps",
    "Anticrossing": "qwell.design.crossings",
    "find_anticrossings": "qwell.design.crossings",
    "Contribution": "qwell.design.tolerances",
    "GroupContribution": "qwell.design.tolerances",
    "CorrelatedGroup": "qwell.design.growth",
    "MonteCarloSummary": "qwell.design.tolerances",
    "ToleranceResult": "qwell.design.tolerances",
    "Sensitivity": "qwell.design.tolerances",
    "SensitivityResult": "qwell.design.tolerances",
    "parameters": "qwell.stack_edit",
    "get_parameter": "qwell.stack_edit",
    "apply_parameters": "qwell.stack_edit",
    "format_formula": "qwell.formula",
    "design_point": "qwell.design.evaluate",
    "evaluate_many": "qwell.design.evaluate",
    "bands_for_transitions": "qwell.design.evaluate",
    "size": "qwell.design.sizing",
    "sweep": "qwell.design.sweeps",
    "tolerance": "qwell.design.tolerances",
    "sensitivities": "qwell.design.tolerances",
    "parse_parameter_value": "qwell.design.tolerances",
    "parse_growth_rate": "qwell.design.growth",
    "plot_monte_carlo": "qwell.design.histogram",
    "KINDS": "qwell.stack_edit",
}

__all__ = list(_API)


def __getattr__(name: str):
    try:
        module = _API[name]
    except KeyError:
        raise AttributeError(f"module 'qwell.design' has no attribute {name!r}") from None
    value = getattr(importlib.import_module(module), name)
    globals()[name] = value          # later look-ups skip this function
    return value


def __dir__():
    return sorted(__all__)
