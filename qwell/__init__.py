"""qwell: quantum-well layer-stack design for device engineers.

The Python API in one place (each name lives in the module of its topic):

======================  ==========================================================
``load_stack``          read and validate a YAML stack file -> :class:`Stack`
``stack_from_mapping``  the same from a dict (e.g. built in a notebook)
``solve_stack``         states of every band and the transitions -> :class:`Solution`
``size``                the parameter value that puts a line at a target
``sweep``               a 1-D / 2-D grid of designs with sensitivities
``tolerance``           growth-tolerance spread, worst case, RSS, Monte Carlo
``sensitivities``       one-at-a-time shifts of several lines
``plot_band_diagram``   the band diagram drawn where a caller's matplotlib Axes is
``build_report``        the design-review PDF and band-diagram PNG
``get_material``        one material's parameters (with their sources)
``check_library``       check a material library file before use
``material_provenance`` where each parameter of a material came from
======================  ==========================================================

Energies are in eV, lengths in nm, masses in m0, temperatures in K (see
``DEVELOPERS.md``); values with units (``"9 um"``, ``"1 ML"``) are accepted
where a user would type them.

Examples
--------
>>> import qwell
>>> stack = qwell.load_stack("layers/lwir-detector.yaml")
>>> sol = qwell.solve_stack(stack)
>>> line = sol.transition("e1-e2")
>>> round(line.wavelength_um, 2)
8.33
"""

from __future__ import annotations

import importlib

__version__ = "0.1.0"

#: public name -> module that defines it.  The modules are imported on first use
#: (PEP 562), so ``import qwell`` and the command line do not pay for the design,
#: report and plotting layers they do not touch.
_API = {
    "load_stack": "qwell.stack",
    "stack_from_mapping": "qwell.stack",
    "Stack": "qwell.stack",
    "Layer": "qwell.stack",
    "solve_stack": "qwell.levels",
    "Solution": "qwell.levels",
    "State": "qwell.solvers.results",
    "Levels": "qwell.solvers.results",
    "Transition": "qwell.optics",
    "Profile": "qwell.profile",
    "band_profile": "qwell.profile",
    "size": "qwell.design",
    "sweep": "qwell.design",
    "tolerance": "qwell.design",
    "sensitivities": "qwell.design",
    "design_point": "qwell.design",
    "SizeResult": "qwell.design",
    "SweepResult": "qwell.design",
    "ToleranceResult": "qwell.design",
    "SensitivityResult": "qwell.design",
    "plot_band_diagram": "qwell.diagram",
    "build_report": "qwell.report",
    "ReportResult": "qwell.report",
    "get_material": "qwell.materials",
    "check_library": "qwell.materials",
    "load_library": "qwell.materials",
    "material_provenance": "qwell.materials",
    "QwellError": "qwell.errors",
    "StackError": "qwell.errors",
    "LibraryError": "qwell.errors",
    "ValidityWarning": "qwell.errors",
}

__all__ = ["__version__", *_API]


def __getattr__(name: str):
    try:
        module = _API[name]
    except KeyError:
        raise AttributeError(f"module 'qwell' has no attribute {name!r}") from None
    value = getattr(importlib.import_module(module), name)
    globals()[name] = value          # later look-ups skip this function
    return value


def __dir__():
    return sorted(__all__)
