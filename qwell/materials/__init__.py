"""Materials database of qwell: III-V binaries, ternaries and quaternaries.

Parameters come mainly from Vurgaftman, Meyer and Ram-Mohan, J. Appl. Phys.
89, 5815 (2001) (entered from memory of the tables, see
``data/sources.yaml``); static dielectric constants from the Levinshtein et
al. handbook (also from memory).  Every value keeps its source key
(:attr:`Material.sources`, :meth:`Material.parameter_sources`).

A group's own calibrated values come in through material libraries
(:mod:`qwell.materials.library`: YAML files with a unit and a source on
every value, checked by :func:`check_library`), and every value can say
where it came from (:mod:`qwell.materials.provenance`).

Conventions: energies in eV on the absolute valence-band scale of the main
source (InSb valence-band maximum = 0), lengths in nm, masses in m0, elastic
constants in GPa; ``av_eV`` uses the a_v > 0 convention (gap deformation
``ac - av``).  Interpolation schemes are described in
:mod:`qwell.materials._database`.

Examples
--------
>>> from qwell.materials import get_material
>>> m = get_material("Al0.3Ga0.7As", temperature_K=300)
>>> round(m.band_gap_eV, 3)
1.841
"""

from ._database import (
    GROUP_III,
    GROUP_V,
    PARAM_FIELDS,
    SOURCES,
    USER_KEYS,
    Material,
    citation,
    get_material,
    grade_function,
    is_known_material,
    known_materials,
    parse_formula,
    user_material,
)

from .library import (
    BUILTIN,
    LibraryCheck,
    LibraryIssue,
    MaterialLibrary,
    MaterialSet,
    check_library,
    format_check,
    kane_electron_mass,
    load_library,
    material_set,
)
from .provenance import (
    Origin,
    ParameterProvenance,
    from_memory_count,
    material_provenance,
    origin_label,
    provenance_json,
)

__all__ = [
    "Material",
    "get_material",
    "parse_formula",
    "known_materials",
    "user_material",
    "USER_KEYS",
    "PARAM_FIELDS",
    "grade_function",
    "citation",
    "SOURCES",
    "is_known_material",
    "GROUP_III",
    "GROUP_V",
    "BUILTIN",
    "MaterialLibrary",
    "MaterialSet",
    "LibraryCheck",
    "LibraryIssue",
    "load_library",
    "check_library",
    "material_set",
    "kane_electron_mass",
    "format_check",
    "origin_label",
    "Origin",
    "ParameterProvenance",
    "material_provenance",
    "provenance_json",
    "from_memory_count",
]
