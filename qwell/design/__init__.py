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

from ..formula import format_formula
from ..stack_edit import KINDS, Parameter, apply_parameters, get_parameter, parameters
from .crossings import Anticrossing, find_anticrossings
from .evaluate import DesignPoint, bands_for_transitions, design_point, evaluate_many
from .sizing import MonolayerOption, SizeResult, size
from .sweeps import SweepResult, sweep
from .growth import CorrelatedGroup, parse_growth_rate
from .histogram import plot_monte_carlo
from .tolerances import (Contribution, GroupContribution, MonteCarloSummary, Sensitivity, SensitivityResult,
                        ToleranceResult, parse_parameter_value, sensitivities, tolerance)

__all__ = [
    "Parameter",
    "DesignPoint",
    "SizeResult",
    "MonolayerOption",
    "SweepResult",
    "Anticrossing",
    "find_anticrossings",
    "Contribution",
    "GroupContribution",
    "CorrelatedGroup",
    "MonteCarloSummary",
    "ToleranceResult",
    "Sensitivity",
    "SensitivityResult",
    "parameters",
    "get_parameter",
    "apply_parameters",
    "format_formula",
    "design_point",
    "evaluate_many",
    "bands_for_transitions",
    "size",
    "sweep",
    "tolerance",
    "sensitivities",
    "parse_parameter_value",
    "parse_growth_rate",
    "plot_monte_carlo",
    "KINDS",
]
