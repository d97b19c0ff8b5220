"""Private implementation of the materials database (see :mod:`qwell.materials`).

Data live in ``data/binaries.yaml``, ``data/alloys.yaml`` and
``data/sources.yaml``; every value there carries a ``source`` key.

Interpolation scheme
--------------------
Every material of the database is a set of element fractions on the two
sublattices (group III: Al, Ga, In; group V: P, As, Sb).  A parameter P of a
composition with cation fractions ``c_i`` and anion fractions ``a_j`` is

.. math::

    P = \\sum_{i,j} c_i a_j P_{ij}
        - \\sum_{i<i'} c_i c_{i'} \\sum_j a_j C_{ii'j}
        - \\sum_{j<j'} a_j a_{j'} \\sum_i c_i C_{ijj'}

where ``P_ij`` are the binaries (at the requested temperature) and ``C`` the
bowing of the ternary formed by the two mixed elements and the shared one.
For a ternary this is the usual ``x P_B + (1-x) P_A - x(1-x) C``; for the
quaternaries it is the Vegard sum plus the ternary bowings weighted by the
products of the mixing fractions (source key ``quaternary_scheme``; no extra
quaternary bowing).  A composition-dependent bowing ``C = c0 + c1 xs`` uses the
fraction ``xs`` of its ``bowing_variable`` element relative to the pair, so
it reduces exactly to the ternary.

Luttinger parameters of alloys: the hole masses along [001]
(``1/(g1-2g2)``, ``1/(g1+2g2)``) and the heavy-hole mass along [111]
(``1/(g1-2g3)``) are interpolated linearly and the gammas rebuilt from them.
The recommendation of Vurgaftman et al. on this point could not be re-checked
in the session that wrote this module; the choice is recorded with the
source key ``common_practice``.

Known limitations (found when the tables were entered)
------------------------------------------------------
* The VBO bowing of InGaAs (-0.38 eV) puts only ~37 % of the strained
  In0.2Ga0.8As/GaAs offset in the conduction band (65 % unstrained), while
  measurements give ~70 %; override band edges per layer where it matters.
* In0.53Ga0.47As at 300 K comes out 0.737 eV against ~0.752 eV measured.
* With the table's L gaps (no L bowing for AlGaAs) the Gamma-L crossing of
  AlGaAs lies at x = 0.41 at 300 K, slightly before Gamma-X (x = 0.435).
* The Kane relation rebuilds the binary electron masses to 0.13 % or better.
* a(T) is linear in T: a near-room-temperature approximation.

References
----------
.. [1] I. Vurgaftman, J. R. Meyer and L. R. Ram-Mohan, "Band parameters for
   III-V compound semiconductors and their alloys", J. Appl. Phys. 89, 5815
   (2001), doi:10.1063/1.1368156 (values entered from memory).
"""

from __future__ import annotations

import dataclasses
import difflib
import functools
import math
import re
import warnings
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable, Mapping

import yaml

from ..errors import MaterialError, ParameterError, ValidityWarning

_DATA = Path(__file__).resolve().parent / "data"

#: Group-III (IUPAC group 13) elements that form III-V compounds, lightest first: the order
#: in which formulas list the cation sublattice.  The database has data only for some of
#: them (Al, Ga, In); a formula with another one parses and is then reported as a
#: compound that is not in the database.
GROUP_III = ("B", "Al", "Ga", "In", "Tl")
#: Group-V (IUPAC group 15) elements that form III-V compounds, lightest first (anion order).
GROUP_V = ("N", "P", "As", "Sb", "Bi")

#: Material fields that hold a parameter value (float or None), in report order.
PARAM_FIELDS = (
    "lattice_constant_nm",
    "band_gap_eV",
    "valence_edge_eV",
    "conduction_edge_eV",
    "electron_mass",
    "heavy_hole_mass",
    "light_hole_mass",
    "gamma1",
    "gamma2",
    "gamma3",
    "spin_orbit_eV",
    "kane_energy_eV",
    "kane_F",
    "ac_eV",
    "av_eV",
    "b_eV",
    "c11_GPa",
    "c12_GPa",
    "dielectric_constant",
    "band_gap_X_eV",
    "band_gap_L_eV",
    "lo_phonon_energy_eV",
    "high_frequency_dielectric_constant",
)

#: YAML key (stack files, user materials, per-layer overrides) -> (Material field, unit or None).
USER_KEYS: dict[str, tuple[str, str | None]] = {
    "conduction_edge": ("conduction_edge_eV", "eV"),
    "valence_edge": ("valence_edge_eV", "eV"),
    "band_gap": ("band_gap_eV", "eV"),
    "band_gap_X": ("band_gap_X_eV", "eV"),
    "band_gap_L": ("band_gap_L_eV", "eV"),
    "electron_mass": ("electron_mass", None),
    "heavy_hole_mass": ("heavy_hole_mass", None),
    "light_hole_mass": ("light_hole_mass", None),
    "gamma1": ("gamma1", None),
    "gamma2": ("gamma2", None),
    "gamma3": ("gamma3", None),
    "lattice_constant": ("lattice_constant_nm", "nm"),
    "spin_orbit": ("spin_orbit_eV", "eV"),
    "kane_energy": ("kane_energy_eV", "eV"),
    "kane_F": ("kane_F", None),
    "dielectric_constant": ("dielectric_constant", None),
    "lo_phonon_energy": ("lo_phonon_energy_eV", "eV"),
    "high_frequency_dielectric_constant": ("high_frequency_dielectric_constant", None),
    "ac": ("ac_eV", "eV"),
    "av": ("av_eV", "eV"),
    "b": ("b_eV", "eV"),
    "c11": ("c11_GPa", "GPa"),
    "c12": ("c12_GPa", "GPa"),
}

_POSITIVE_FIELDS = ("lattice_constant_nm", "band_gap_eV", "electron_mass", "heavy_hole_mass",
                    "light_hole_mass", "dielectric_constant", "c11_GPa", "c12_GPa",
                    "lo_phonon_energy_eV", "high_frequency_dielectric_constant")

# Relative tolerance for "consistent" user-given values.
_CONSISTENCY_TOL = 1e-6


# --------------------------------------------------------------------------- data
def _load(name: str):
    # the C loader when libyaml is there (same constructors, ~5x faster start-up)
    loader = getattr(yaml, "CSafeLoader", yaml.SafeLoader)
    with open(_DATA / name, encoding="utf-8") as fh:
        return yaml.load(fh, Loader=loader)


SOURCES: Mapping[str, dict] = _load("sources.yaml")
_BINARIES: dict = _load("binaries.yaml")
_ALLOYS: dict = _load("alloys.yaml")
_TERNARIES: dict = _ALLOYS["ternaries"]
_QUATERNARIES: dict = _ALLOYS["quaternaries"]


def _check_sources() -> None:
    """Every `source` key of the data files must resolve (fails at import otherwise)."""
    def walk(node, where):
        if isinstance(node, dict):
            if "source" in node and node["source"] not in SOURCES:
                raise MaterialError(f"data file: unknown source key {node['source']!r} at {where}")
            for k, v in node.items():
                walk(v, f"{where}.{k}")
    walk(_BINARIES, "binaries")
    walk(_ALLOYS, "alloys")


_check_sources()


def _binary_name(cation: str, anion: str) -> str:
    return cation + anion


class _Tables:
    """One set of parameter tables: binaries, ternary and quaternary families.

    The built-in set is :data:`_BUILTIN`; material libraries
    (:mod:`qwell.materials.library`) build merged copies with the same
    record structure.  Instances hash by identity, so the look-up caches
    below keep one entry per table set.
    """

    def __init__(self, binaries: dict, ternaries: dict, quaternaries: dict):
        self.binaries = binaries
        self.ternaries = ternaries
        self.quaternaries = quaternaries
        # (frozenset of cations, frozenset of anions) -> family name
        fam: dict[tuple[frozenset, frozenset], str] = {}
        for name, d in ternaries.items():
            if d["sublattice"] == "III":
                key = (frozenset(d["elements"]), frozenset([d["common"]]))
            else:
                key = (frozenset([d["common"]]), frozenset(d["elements"]))
            fam[key] = name
        for name, d in quaternaries.items():
            fam[(frozenset(d["III"]), frozenset(d["V"]))] = name
        for b in binaries:
            m = re.fullmatch(f"({'|'.join(GROUP_III)})({'|'.join(GROUP_V)})", b)
            fam[(frozenset([m.group(1)]), frozenset([m.group(2)]))] = b
        self.family_by_elements = fam
        # bowing look-up for a mixed pair on a sublattice with a given shared
        # element: (frozenset(pair), shared element) -> ternary family record
        self.ternary_by_pair: dict[tuple[frozenset, str], dict] = {
            (frozenset(d["elements"]), d["common"]): d for d in ternaries.values()
        }


_BUILTIN = _Tables(_BINARIES, _TERNARIES, _QUATERNARIES)

# Source entries registered by material libraries (keys never collide with
# data/sources.yaml: they start with "library:" and carry the file's hash).
_LIBRARY_SOURCES: dict[str, dict] = {}


def _register_sources(entries: Mapping[str, dict]) -> None:
    """Make library source keys resolvable by :func:`citation` (content-addressed keys)."""
    for k, e in entries.items():
        if k in SOURCES:
            raise MaterialError(f"internal: library source key {k!r} shadows a built-in key")
        _LIBRARY_SOURCES.setdefault(k, dict(e))


def source_entry(key: str) -> dict:
    """The source record of one key (built-in or registered by a library).

    Raises
    ------
    MaterialError
        If the key is unknown.
    """
    if key in SOURCES:
        return SOURCES[key]
    if key in _LIBRARY_SOURCES:
        return _LIBRARY_SOURCES[key]
    close = difflib.get_close_matches(key, list(SOURCES), n=3)
    hint = f"; did you mean {_or_list(close)}?" if close else ""
    raise MaterialError(f"unknown source key {key!r}{hint}")


# --------------------------------------------------------------------------- citations
def citation(key: str) -> str:
    """Full citation text of a source key (``'a+b'`` joins several with '; ').

    Raises
    ------
    MaterialError
        If a key is not in ``data/sources.yaml``.
    """
    parts = []
    for k in str(key).split("+"):
        e = source_entry(k)
        text = []
        if e.get("author"):
            text.append(str(e["author"]))
        if e.get("title"):
            text.append(f"\"{e['title']}\"")
        where = " ".join(str(e[f]) for f in ("journal", "volume") if e.get(f) is not None)
        if e.get("page") is not None:
            where += f", {e['page']}"
        if e.get("year") is not None:
            where += f" ({e['year']})"
        if where.strip():
            text.append(where.strip())
        if e.get("doi"):
            text.append(f"doi:{e['doi']}")
        s = ", ".join(text)
        if e.get("note"):
            s += f" [{e['note']}]"
        parts.append(s)
    return "; ".join(parts)


def _or_list(items) -> str:
    items = list(items)
    if len(items) <= 1:
        return "".join(items)
    return ", ".join(items[:-1]) + " or " + items[-1]


# --------------------------------------------------------------------------- Material
@dataclass(frozen=True)
class Material:
    """Parameters of one material at one temperature (internal units).

    Attributes
    ----------
    name : str
        Name as given, e.g. ``'Al0.3Ga0.7As'`` or a user material's name.
    family : str
        Binary (``'GaAs'``), alloy family (``'AlGaAs'``, ``'InGaAsP'``) or
        ``'user'``.
    composition : dict
        ``{'x': ...}`` for ternaries (x = fraction of the first element of
        the mixed sublattice, see :func:`known_materials`), ``{'x', 'y'}`` for
        quaternaries, ``{}`` for binaries and user materials.
    temperature_K : float
        Temperature [K] the temperature-dependent values refer to.
    lattice_constant_nm : float or None
        Cubic lattice constant [nm] at ``temperature_K`` (linear a(T), a
        near-room-temperature approximation).
    band_gap_eV : float or None
        Gamma-valley gap [eV] at ``temperature_K``.
    valence_edge_eV, conduction_edge_eV : float or None
        Band edges [eV] on the absolute scale of Vurgaftman et al. (InSb
        valence-band maximum = 0); ``conduction_edge = valence_edge + gap``
        unless the user set them otherwise.
    electron_mass : float or None
        Gamma-valley electron mass [m0] (low-temperature table value).
    heavy_hole_mass, light_hole_mass : float or None
        Hole masses along [001] [m0]: ``1/(gamma1 - 2 gamma2)`` and
        ``1/(gamma1 + 2 gamma2)``.
    gamma1, gamma2, gamma3 : float or None
        Luttinger parameters (dimensionless).
    spin_orbit_eV : float or None
        Spin-orbit splitting [eV].
    kane_energy_eV : float or None
        Kane energy Ep [eV].
    kane_F : float or None
        Remote-band parameter F (dimensionless).
    ac_eV : float or None
        Conduction-band hydrostatic deformation potential [eV]:
        ``dEc = ac (eps_xx + eps_yy + eps_zz)``.
    av_eV : float or None
        Valence-band hydrostatic deformation potential [eV] in the
        convention **a_v > 0**: ``dEv = +av (eps_xx + eps_yy + eps_zz)``, i.e.
        ``P = -av tr(eps)`` of Chuang (1995); the gap deformation is
        ``ac - av`` (about -8.3 eV for GaAs).  Vurgaftman et al. tabulate the
        opposite sign; the data file stores the converted value.
    b_eV : float or None
        Shear deformation potential b [eV] (negative).
    c11_GPa, c12_GPa : float or None
        Elastic constants [GPa].
    dielectric_constant : float or None
        Static relative permittivity.
    band_gap_X_eV, band_gap_L_eV : float or None
        X- and L-valley gaps [eV] at ``temperature_K``.
    lo_phonon_energy_eV : float or None
        Zone-centre LO-phonon energy [eV].  Alloys: the mode of the dominant
        end member (largest weight in the Vegard sum); two-mode alloys such as
        AlGaAs and InGaAs have a second, weaker branch that is ignored
        (source key ``two_mode_alloy``).
    high_frequency_dielectric_constant : float or None
        Relative permittivity above the reststrahlen band, eps_inf
        (``dielectric_constant`` is the static eps_s).
    sources : Mapping[str, str]
        Field name -> source key of ``data/sources.yaml`` (``'user'`` for
        user-given values; ``'a+b'`` when several sources combine).
    """

    name: str
    family: str
    composition: dict
    temperature_K: float
    lattice_constant_nm: float | None = None
    band_gap_eV: float | None = None
    valence_edge_eV: float | None = None
    conduction_edge_eV: float | None = None
    electron_mass: float | None = None
    heavy_hole_mass: float | None = None
    light_hole_mass: float | None = None
    gamma1: float | None = None
    gamma2: float | None = None
    gamma3: float | None = None
    spin_orbit_eV: float | None = None
    kane_energy_eV: float | None = None
    kane_F: float | None = None
    ac_eV: float | None = None
    av_eV: float | None = None
    b_eV: float | None = None
    c11_GPa: float | None = None
    c12_GPa: float | None = None
    dielectric_constant: float | None = None
    band_gap_X_eV: float | None = None
    band_gap_L_eV: float | None = None
    lo_phonon_energy_eV: float | None = None
    high_frequency_dielectric_constant: float | None = None
    sources: Mapping[str, str] = field(default_factory=dict)

    def __hash__(self):
        return hash((self.name, self.family, tuple(sorted(self.composition.items())),
                     self.temperature_K, tuple(getattr(self, f) for f in PARAM_FIELDS)))

    @property
    def monolayer_nm(self) -> float | None:
        """Monolayer thickness on (001), a/2 [nm], or None without a lattice constant."""
        if self.lattice_constant_nm is None:
            return None
        return self.lattice_constant_nm / 2.0

    def parameters(self) -> dict:
        """All parameter values keyed by field name (JSON-ready floats or None)."""
        return {f: getattr(self, f) for f in PARAM_FIELDS}

    def parameter_sources(self) -> dict:
        """Field name -> full citation string (None where the value is None)."""
        out = {}
        for f in PARAM_FIELDS:
            key = self.sources.get(f)
            out[f] = citation(key) if key and getattr(self, f) is not None else None
        return out

    def with_overrides(self, **fields) -> "Material":
        """A copy with some parameters replaced; derived values stay consistent.

        Parameters
        ----------
        **fields : float
            Parameter fields by their dataclass names (``conduction_edge_eV``,
            ``electron_mass``, ...), plus optionally ``name``.

        Notes
        -----
        Band-edge trio: overriding ``conduction_edge_eV`` alone keeps the gap
        and moves ``valence_edge_eV`` with it (the whole alignment shifts);
        overriding ``valence_edge_eV`` alone keeps the gap and moves the
        conduction edge; overriding ``band_gap_eV`` alone keeps the valence
        edge.  Two of the trio fix the third; all three must agree.  Hole
        masses and ``gamma1``/``gamma2`` are kept consistent the same way.
        Every changed value gets the source ``'user'``.

        Raises
        ------
        MaterialError
            Unknown field name, non-numeric or non-physical value, or a
            conflicting set of values.
        """
        name = fields.pop("name", self.name)
        values = _check_user_values(fields, self.name)
        current = self.parameters()
        new_values, changed = _complete(current, values, self.name)
        sources = dict(self.sources)
        for f in changed:
            sources[f] = "user"
        return dataclasses.replace(self, name=str(name), sources=sources, **new_values)


def _suggest_field(key: str) -> str:
    close = difflib.get_close_matches(key, list(PARAM_FIELDS), n=3)
    return f"; did you mean {_or_list(close)}?" if close else f"; known fields: {', '.join(PARAM_FIELDS)}"


def _check_user_values(params: Mapping[str, float], who: str) -> dict:
    out = {}
    for key, value in params.items():
        if key not in PARAM_FIELDS:
            raise MaterialError(f"{who}: unknown material parameter {key!r}{_suggest_field(key)}")
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            raise MaterialError(f"{who}: parameter {key!r} must be a number in internal units, "
                                f"got {value!r}")
        v = float(value)
        if not math.isfinite(v):
            raise MaterialError(f"{who}: parameter {key!r} is not finite ({value!r})")
        if key in _POSITIVE_FIELDS and v <= 0:
            raise MaterialError(f"{who}: parameter {key!r} must be positive, got {v}")
        out[key] = v
    return out


def _close(a: float, b: float) -> bool:
    return abs(a - b) <= _CONSISTENCY_TOL * max(1.0, abs(a), abs(b))


def _complete(current: Mapping[str, float | None], given: Mapping[str, float],
              who: str) -> tuple[dict, set]:
    """Merge ``given`` into ``current`` keeping Ec = Ev + Eg and masses <-> gammas.

    Returns the merged values and the set of fields that changed.
    """
    v = dict(current)
    v.update(given)
    changed = set(given)
    trio = ("valence_edge_eV", "band_gap_eV", "conduction_edge_eV")
    g = [k for k in trio if k in given]
    ev, eg, ec = v["valence_edge_eV"], v["band_gap_eV"], v["conduction_edge_eV"]
    if len(g) == 3:
        if not _close(ec - ev, eg):
            raise MaterialError(
                f"{who}: conflicting band edges: conduction_edge_eV - valence_edge_eV = "
                f"{ec - ev:.6g} eV but band_gap_eV = {eg:.6g} eV")
    elif len(g) == 2:
        if "conduction_edge_eV" not in g:
            v["conduction_edge_eV"] = ev + eg
            changed.add("conduction_edge_eV")
        elif "valence_edge_eV" not in g:
            v["valence_edge_eV"] = ec - eg
            changed.add("valence_edge_eV")
        else:
            v["band_gap_eV"] = ec - ev
            changed.add("band_gap_eV")
    elif len(g) == 1:
        k = g[0]
        if k == "conduction_edge_eV":
            if eg is not None:
                v["valence_edge_eV"] = ec - eg
                changed.add("valence_edge_eV")
            elif ev is not None:
                v["band_gap_eV"] = ec - ev
                changed.add("band_gap_eV")
        elif k == "valence_edge_eV":
            if eg is not None:
                v["conduction_edge_eV"] = ev + eg
                changed.add("conduction_edge_eV")
            elif ec is not None:
                v["band_gap_eV"] = ec - ev
                changed.add("band_gap_eV")
        else:
            if ev is not None:
                v["conduction_edge_eV"] = ev + eg
                changed.add("conduction_edge_eV")
            elif ec is not None:
                v["valence_edge_eV"] = ec - eg
                changed.add("valence_edge_eV")
    if v["band_gap_eV"] is not None and v["band_gap_eV"] <= 0:
        raise MaterialError(f"{who}: band edges give a non-positive gap "
                            f"({v['band_gap_eV']:.6g} eV)")

    mass_given = [k for k in ("heavy_hole_mass", "light_hole_mass") if k in given]
    gam_given = [k for k in ("gamma1", "gamma2") if k in given]
    mhh, mlh, g1, g2 = v["heavy_hole_mass"], v["light_hole_mass"], v["gamma1"], v["gamma2"]
    if mass_given and mhh is not None and mlh is not None:
        new_g1 = 0.5 * (1.0 / mhh + 1.0 / mlh)
        new_g2 = 0.25 * (1.0 / mlh - 1.0 / mhh)
        if len(gam_given) == 2:
            if not (_close(g1, new_g1) and _close(g2, new_g2)):
                raise MaterialError(
                    f"{who}: conflicting hole parameters: masses {mhh:.6g}, {mlh:.6g} m0 need "
                    f"gamma1 = {new_g1:.6g}, gamma2 = {new_g2:.6g}, got {g1:.6g}, {g2:.6g}")
        else:
            if gam_given:
                raise MaterialError(f"{who}: give both gamma1 and gamma2 with hole masses, "
                                    "or only the masses")
            v["gamma1"], v["gamma2"] = new_g1, new_g2
            changed.update(("gamma1", "gamma2"))
    elif gam_given and g1 is not None and g2 is not None:
        if g1 - 2 * g2 <= 0:
            raise MaterialError(f"{who}: gamma1 - 2 gamma2 = {g1 - 2 * g2:.6g} gives no positive "
                                "heavy-hole mass")
        v["heavy_hole_mass"] = 1.0 / (g1 - 2 * g2)
        v["light_hole_mass"] = 1.0 / (g1 + 2 * g2)
        changed.update(("heavy_hole_mass", "light_hole_mass"))
    return {k: v[k] for k in PARAM_FIELDS}, changed


def user_material(name: str, params: Mapping[str, float], temperature_K: float = 300.0) -> Material:
    """A material defined entirely by the user (family ``'user'``).

    Parameters
    ----------
    name : str
        Name used in stacks and reports.
    params : Mapping[str, float]
        Values keyed by :class:`Material` field names, in internal units
        (eV, nm, m0, GPa).  Derived values are filled in: two of
        valence edge / gap / conduction edge give the third; both hole masses
        give gamma1, gamma2 (and vice versa).
    temperature_K : float
        Temperature the values refer to [K].

    Raises
    ------
    MaterialError
        Unknown key, non-numeric or non-physical value, or an inconsistent
        trio Ec, Ev, Eg (or masses vs. gammas).
    """
    name = str(name)
    values = _check_user_values(params, name)
    empty = {f: None for f in PARAM_FIELDS}
    merged, changed = _complete(empty, values, name)
    sources = {f: "user" for f in changed if merged[f] is not None}
    return Material(name=name, family="user", composition={}, temperature_K=float(temperature_K),
                    sources=sources, **merged)


# --------------------------------------------------------------------------- binaries
def _gap(rec: dict, T: float) -> float:
    model = rec["model"]
    eg0 = float(rec["Eg0_eV"])
    if model == "varshni":
        a = float(rec["alpha_meV_per_K"]) * 1e-3
        return eg0 - a * T * T / (T + float(rec["beta_K"])) if T > 0 else eg0
    if model == "linear":
        return eg0 + float(rec["slope_meV_per_K"]) * 1e-3 * T
    if model == "bose":
        if T <= 0:
            return eg0
        return eg0 + float(rec["S_eV"]) * (1.0 - 1.0 / math.tanh(float(rec["theta_K"]) / T))
    raise MaterialError(f"data file: unknown gap model {model!r}")


_SIMPLE = ("valence_edge_eV", "spin_orbit_eV", "electron_mass", "gamma1", "gamma2", "gamma3",
           "kane_energy_eV", "kane_F", "ac_eV", "av_eV", "b_eV", "c11_GPa", "c12_GPa",
           "dielectric_constant", "lo_phonon_energy_eV", "high_frequency_dielectric_constant")


@functools.lru_cache(maxsize=1024)
def _binary_values(name: str, T: float, tables: _Tables = _BUILTIN) -> tuple[dict, dict]:
    """(values, sources) of a binary at temperature T, before derived fields."""
    rec = tables.binaries[name]
    vals, srcs = {}, {}
    a = rec["lattice_constant_A_300K"]
    da = rec["lattice_expansion_A_per_K"]
    vals["lattice_constant_nm"] = (float(a["value"]) + float(da["value"]) * (T - 300.0)) / 10.0
    srcs["lattice_constant_nm"] = a["source"]
    for f, k in (("band_gap_eV", "band_gap_gamma"), ("band_gap_X_eV", "band_gap_X"),
                 ("band_gap_L_eV", "band_gap_L")):
        vals[f] = _gap(rec[k], T)
        srcs[f] = rec[k]["source"]
    for f in _SIMPLE:
        vals[f] = float(rec[f]["value"])
        srcs[f] = rec[f]["source"]
    return vals, srcs


# Quantities interpolated for the valence band of alloys (see module docstring).
def _hole_masses(v: dict) -> tuple[float, float, float]:
    g1, g2, g3 = v["gamma1"], v["gamma2"], v["gamma3"]
    return 1.0 / (g1 - 2 * g2), 1.0 / (g1 + 2 * g2), 1.0 / (g1 - 2 * g3)


_INTERP = ("lattice_constant_nm", "band_gap_eV", "band_gap_X_eV", "band_gap_L_eV",
           "valence_edge_eV", "spin_orbit_eV", "electron_mass", "kane_energy_eV", "kane_F",
           "ac_eV", "av_eV", "b_eV", "c11_GPa", "c12_GPa", "dielectric_constant",
           "high_frequency_dielectric_constant")


def _bowing(rec: dict, fld: str, pair_fraction: float) -> tuple[float, str | None]:
    b = rec["bowing"].get(fld)
    if b is None:
        return 0.0, None
    return float(b["c0"]) + float(b["c1"]) * pair_fraction, b["source"]


@functools.lru_cache(maxsize=8192)
def _alloy_values(cations: tuple, anions: tuple, T: float,
                  tables: _Tables = _BUILTIN) -> tuple[dict, dict]:
    """(values, sources) for element fractions ((el, frac), ...) on each sublattice."""
    cat = dict(cations)
    an = dict(anions)
    if len(cat) == 1 and len(an) == 1:
        name = _binary_name(next(iter(cat)), next(iter(an)))
        v, s = _binary_values(name, T, tables)
        return dict(v), dict(s)
    vals = {f: 0.0 for f in _INTERP}
    srcs: dict[str, set] = {f: set() for f in _INTERP}
    mh = [0.0, 0.0, 0.0]
    dominant = (-1.0, None, None)   # (weight, LO energy, source) of the dominant end member
    for ci, xc in cat.items():
        for aj, xa in an.items():
            w = xc * xa
            bv, bs = _binary_values(_binary_name(ci, aj), T, tables)
            if w > dominant[0]:
                dominant = (w, bv["lo_phonon_energy_eV"], bs["lo_phonon_energy_eV"])
            for f in _INTERP:
                vals[f] += w * bv[f]
                srcs[f].add(bs[f])
            for k, m in enumerate(_hole_masses(bv)):
                mh[k] += w * m
    # bowings of mixed cation pairs, weighted by the shared anion fraction
    for mixed, shared in ((cat, an), (an, cat)):
        els = list(mixed)
        for i in range(len(els)):
            for j in range(i + 1, len(els)):
                e1, e2 = els[i], els[j]
                x1, x2 = mixed[e1], mixed[e2]
                for s_el, xs in shared.items():
                    rec = tables.ternary_by_pair.get((frozenset((e1, e2)), s_el))
                    if rec is None:
                        raise MaterialError(
                            f"no bowing data for the {e1}-{e2} pair with {s_el}: the ternary "
                            "is not in the database")
                    var = rec["bowing_variable"]
                    frac = (mixed[var]) / (x1 + x2)
                    for f in _INTERP:
                        c, src = _bowing(rec, f, frac)
                        if src is not None:
                            vals[f] -= x1 * x2 * xs * c
                            srcs[f].add(src)
    g1 = 0.5 * (1.0 / mh[0] + 1.0 / mh[1])
    g2 = 0.25 * (1.0 / mh[1] - 1.0 / mh[0])
    g3 = 0.5 * (g1 - 1.0 / mh[2])
    vals.update(gamma1=g1, gamma2=g2, gamma3=g3)
    vals["lo_phonon_energy_eV"] = dominant[1]
    out_src = {f: "+".join(sorted(s)) for f, s in srcs.items()}
    out_src["lo_phonon_energy_eV"] = dominant[2] + "+two_mode_alloy"
    lut = "vurgaftman2001+common_practice"
    out_src.update(gamma1=lut, gamma2=lut, gamma3=lut)
    for f in ("dielectric_constant", "high_frequency_dielectric_constant"):
        out_src[f] = out_src[f] + "+common_practice"
    if (len(cat) > 1 and len(an) > 1) or len(cat) > 2 or len(an) > 2:
        for f in out_src:
            out_src[f] = out_src[f] + "+quaternary_scheme"
    return vals, out_src


# --------------------------------------------------------------------------- formulas
_TOKEN = re.compile(r"([A-Z][a-z]?)(-?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][-+]?\d+)?)?")


def _family_patterns(tables: _Tables = _BUILTIN) -> dict[str, str]:
    out = {}
    for fam, d in tables.ternaries.items():
        out[fam] = d["pattern"]
    for fam, d in tables.quaternaries.items():
        out[fam] = d["pattern"]
    return out


def known_materials() -> list[str]:
    """Binaries, then alloy families with their formula pattern, e.g.
    ``'AlGaAs: Al(x)Ga(1-x)As'``, ``'InGaAsP: In(1-x)Ga(x)As(y)P(1-y)'``.

    In every ternary pattern ``x`` is the fraction of the first element of the
    mixed sublattice; the order of elements in a formula does not matter
    (``Ga0.47In0.53As`` is ``In0.53Ga0.47As``).
    """
    return _known_materials(_BUILTIN)


def _known_materials(tables: _Tables) -> list[str]:
    return list(tables.binaries) + [f"{fam}: {pat}"
                                    for fam, pat in _family_patterns(tables).items()]


def _candidates(extra=(), tables: _Tables = _BUILTIN) -> list[str]:
    return (list(tables.binaries) + list(tables.ternaries) + list(tables.quaternaries)
            + list(extra))


def _unknown(name: str, extra=(), why: str = "", tables: _Tables = _BUILTIN) -> MaterialError:
    bare = re.sub(r"[\d.]+", "", name)
    cands = _candidates(extra, tables)
    close = difflib.get_close_matches(name, cands, n=3, cutoff=0.6)
    if not close and bare != name:
        close = difflib.get_close_matches(bare, cands, n=3, cutoff=0.6)
    msg = f"unknown material {name!r}"
    if why:
        msg += f" ({why})"
    if close:
        msg += f"; did you mean {_or_list(close)}?"
    else:
        msg += "; known: " + ", ".join(_candidates(extra, tables))
    exc = MaterialError(msg)
    exc.unknown_name = True
    exc.why = why
    return exc


@functools.lru_cache(maxsize=8192)
def _parse_elements(name: str, tables: _Tables = _BUILTIN) -> tuple[tuple, tuple]:
    """Element fractions ((el, frac), ...) per sublattice, zero fractions dropped.

    Raises MaterialError for anything that is not a valid III-V formula.
    """
    text = name.strip()
    pos = 0
    tokens = []
    while pos < len(text):
        m = _TOKEN.match(text, pos)
        if not m:
            raise _unknown(name, tables=tables)
        tokens.append((m.group(1), m.group(2)))
        pos = m.end()
    if not tokens:
        raise _unknown(name, tables=tables)
    seen = set()
    sub = {"III": [], "V": []}
    for el, num in tokens:
        if el in GROUP_III:
            lat = "III"
        elif el in GROUP_V:
            lat = "V"
        else:
            raise _unknown(name, why=f"element {el!r} is not a group-III or group-V element "
                                     f"({', '.join(GROUP_III + GROUP_V)})", tables=tables)
        with_data = _elements_with_data(tables)
        if el not in with_data:
            raise _unknown(name, why=f"element {el!r} has no data in the database, which "
                                     f"covers {', '.join(with_data)}", tables=tables)
        if el in seen:
            raise MaterialError(f"{name!r}: element {el} appears twice")
        seen.add(el)
        sub[lat].append((el, num))
    for lat, label in (("III", "group-III"), ("V", "group-V")):
        if not sub[lat]:
            raise _unknown(name, why=f"no {label} element", tables=tables)
    out = []
    for lat, label in (("III", "group-III"), ("V", "group-V")):
        items = sub[lat]
        fr = {}
        if len(items) == 1 and items[0][1] is None:
            fr[items[0][0]] = 1.0
        else:
            missing = [el for el, num in items if num is None]
            if missing:
                fam = tables.family_by_elements.get((frozenset(e for e, _ in sub["III"]),
                                                     frozenset(e for e, _ in sub["V"])))
                pats = _family_patterns(tables)
                hint = f" (pattern {pats[fam]})" if fam in pats else ""
                raise MaterialError(
                    f"{name!r}: give the fraction of every element on the {label} sublattice; "
                    f"missing for {', '.join(missing)}{hint}")
            for el, num in items:
                f = float(num)
                if not (0.0 <= f <= 1.0):
                    raise MaterialError(f"{name!r}: fraction {num} of {el} on the {label} "
                                        "sublattice is outside [0, 1]")
                fr[el] = f
        total = sum(fr.values())
        if abs(total - 1.0) > 1e-6:
            terms = " + ".join(f"{el} {f:g}" for el, f in fr.items())
            raise MaterialError(f"{name!r}: {label} sublattice fractions sum to {total:.6g}, "
                                f"not 1 ({terms})")
        fr = {el: f / total for el, f in fr.items() if f > 0.0}
        order = GROUP_III if lat == "III" else GROUP_V
        out.append(tuple((el, fr[el]) for el in order if el in fr))
    cations, anions = out
    key = (frozenset(e for e, _ in cations), frozenset(e for e, _ in anions))
    if key not in tables.family_by_elements:
        els = "".join(e for e, _ in cations) + "".join(e for e, _ in anions)
        if len(cations) == 1 and len(anions) == 1:
            why = f"the binary {els} is not in the database"
        else:
            why = f"the alloy family {els} is not in the database"
        raise _unknown(name, why=why, tables=tables)
    return cations, anions


def _family_and_composition(cations: tuple, anions: tuple,
                            tables: _Tables = _BUILTIN) -> tuple[str, dict]:
    cat, an = dict(cations), dict(anions)
    fam = tables.family_by_elements[(frozenset(cat), frozenset(an))]
    if fam in tables.binaries:
        return fam, {}
    if fam in tables.ternaries:
        d = tables.ternaries[fam]
        frac = cat if d["sublattice"] == "III" else an
        return fam, {"x": frac[d["elements"][0]]}
    if fam == "InGaAsP":
        return fam, {"x": cat["Ga"], "y": an["As"]}
    if fam == "InGaAlAs":
        return fam, {"x": cat["Ga"], "y": cat["Al"]}
    raise MaterialError(f"internal: no composition rule for {fam}")  # pragma: no cover


def _elements_with_data(tables: _Tables = _BUILTIN) -> tuple:
    """Elements of the database's families, in the order of GROUP_III + GROUP_V."""
    found = set()
    for cations, anions in tables.family_by_elements:
        found |= cations | anions
    return tuple(el for el in GROUP_III + GROUP_V if el in found)


def parse_formula(name: str) -> tuple[str, dict]:
    """Family and composition of a material name.

    Examples: ``'GaAs'`` -> ``('GaAs', {})``; ``'Al0.3Ga0.7As'`` ->
    ``('AlGaAs', {'x': 0.3})``; ``'In0.73Ga0.27As0.59P0.41'`` ->
    ``('InGaAsP', {'x': 0.27, 'y': 0.59})``.  Composition end points reduce
    to the binary (``'Al0Ga1As'`` -> ``('GaAs', {})``).

    Raises
    ------
    MaterialError
        Unknown element or family (with close suggestions), missing or
        out-of-range fraction, or sublattice fractions not summing to 1
        (tolerance 1e-6).
    """
    if not isinstance(name, str):
        raise MaterialError(f"a material name must be a string, got {name!r}")
    cations, anions = _parse_elements(name.strip())
    return _family_and_composition(cations, anions)


def _check_temperature(temperature_K) -> float:
    try:
        T = float(temperature_K)
    except (TypeError, ValueError):
        raise MaterialError(f"temperature must be a number in K, got {temperature_K!r}") from None
    if not math.isfinite(T) or T < 0:
        raise MaterialError(f"temperature must be >= 0 K, got {temperature_K!r}")
    return T


def _make(name: str, cations: tuple, anions: tuple, T: float,
          tables: _Tables = _BUILTIN) -> tuple[Material, tuple]:
    fam, comp = _family_and_composition(cations, anions, tables)
    vals, srcs = _alloy_values(cations, anions, T, tables)
    v = dict(vals)
    s = dict(srcs)
    v["conduction_edge_eV"] = v["valence_edge_eV"] + v["band_gap_eV"]
    s["conduction_edge_eV"] = "+".join(sorted(set(s["valence_edge_eV"].split("+"))
                                             | set(s["band_gap_eV"].split("+"))))
    g1, g2 = v["gamma1"], v["gamma2"]
    v["heavy_hole_mass"] = 1.0 / (g1 - 2 * g2)
    v["light_hole_mass"] = 1.0 / (g1 + 2 * g2)
    s["heavy_hole_mass"] = s["light_hole_mass"] = s["gamma1"]
    mat = Material(name=name, family=fam, composition=comp, temperature_K=T,
                   sources=s, **{f: v[f] for f in PARAM_FIELDS})
    msgs = []
    lowest = min(v["band_gap_X_eV"], v["band_gap_L_eV"])
    if lowest < v["band_gap_eV"]:
        valley = "X" if v["band_gap_X_eV"] <= v["band_gap_L_eV"] else "L"
        msgs.append(
            f"{name}: indirect gap at {T:g} K (the {valley} valley, {lowest:.3f} eV, lies below "
            f"the Gamma gap {v['band_gap_eV']:.3f} eV); a single-Gamma-valley conduction band "
            "is unreliable here (for AlGaAs above x ~ 0.41-0.44 at 300 K with these tables)")
    return mat, tuple(msgs)


@functools.lru_cache(maxsize=8192)
def _cached_material(name: str, T: float, tables: _Tables = _BUILTIN) -> tuple[Material, tuple]:
    cations, anions = _parse_elements(name, tables)
    return _make(name, cations, anions, T, tables)


def _emit(msgs, stacklevel: int = 3) -> None:
    for m in msgs:
        warnings.warn(m, ValidityWarning, stacklevel=stacklevel)


def get_material(name: str, temperature_K: float = 300.0,
                 user_materials: Mapping[str, Material] | None = None) -> Material:
    """Look up a material by name (binary, alloy formula or user material).

    Parameters
    ----------
    name : str
        ``'GaAs'``, ``'Al0.30Ga0.70As'``, ``'Ga0.47In0.53As'``,
        ``'In0.73Ga0.27As0.59P0.41'``, ``'In0.53Ga0.27Al0.20As'``,
        ``'GaAs0.51Sb0.49'``..., or a key of ``user_materials`` (user
        materials take precedence over database names).
    temperature_K : float
        Temperature [K] (>= 0).  Ignored for user materials, which keep
        their own.
    user_materials : Mapping[str, Material], optional
        Materials defined in the stack file.

    Warns
    -----
    ValidityWarning
        When the X or L valley lies below the Gamma valley (indirect gap),
        e.g. AlGaAs above x ~ 0.43.

    Raises
    ------
    MaterialError
        Unknown name (with suggestions), bad composition, bad temperature.

    Notes
    -----
    Results are cached by (name, temperature); repeated calls are cheap.
    Material libraries look materials up through
    :meth:`qwell.materials.library.MaterialSet.get_material`.
    """
    return _get_material(name, temperature_K, user_materials, _BUILTIN)


def _get_material(name, temperature_K, user_materials, tables: _Tables) -> Material:
    """:func:`get_material` on one table set."""
    if user_materials and name in user_materials:
        return user_materials[name]
    if not isinstance(name, str):
        raise MaterialError(f"a material name must be a string, got {name!r}")
    T = _check_temperature(temperature_K)
    key = name.strip()
    try:
        mat, msgs = _cached_material(key, T, tables)
    except MaterialError as exc:
        if user_materials and getattr(exc, "unknown_name", False):
            raise _unknown(key, extra=list(user_materials), why=exc.why, tables=tables) from None
        raise exc from None
    _emit(msgs)
    return mat


def is_known_material(name: str, user_materials: Mapping[str, Material] | None = None) -> bool:
    """True when ``name`` resolves to a material (cached; cheap to call often)."""
    return _is_known(name, user_materials, _BUILTIN)


def _is_known(name, user_materials, tables: _Tables) -> bool:
    if user_materials and name in user_materials:
        return True
    if not isinstance(name, str):
        return False
    try:
        _parse_elements(name.strip(), tables)
    except MaterialError:
        return False
    return True


# --------------------------------------------------------------------------- grading
def _formula(cations: Mapping[str, float], anions: Mapping[str, float]) -> str:
    def part(fr):
        if len(fr) == 1:
            return next(iter(fr))
        return "".join(f"{el}{f:.4f}" for el, f in fr.items())
    return part(cations) + part(anions)


def grade_function(start: str, end: str, temperature_K: float = 300.0,
                   user_materials: Mapping[str, Material] | None = None
                   ) -> Callable[[float], Material]:
    """Material along a grade from ``start`` (f = 0) to ``end`` (f = 1).

    If both ends belong to one alloy family of the database (a binary counts
    as an end member, e.g. ``Al0.30Ga0.70As -> GaAs`` runs along AlGaAs with
    x from 0.30 to 0), the element fractions are interpolated linearly and
    every parameter is recomputed with its bowing.  Otherwise every
    parameter that both ends define is interpolated linearly (hole masses
    follow the interpolated gamma1, gamma2 when both ends have them); the
    result has family ``'user'`` and the source ``linear_blend``.

    Raises
    ------
    MaterialError
        Unknown end material, or no parameter in common
        (``"grade from A to B: no common parameters"``).
    ParameterError
        (from the returned function) when f is outside [0, 1].
    """
    return _grade_function(start, end, temperature_K, user_materials, _BUILTIN)


def _grade_function(start, end, temperature_K, user_materials, tables: _Tables):
    """:func:`grade_function` on one table set."""
    T = _check_temperature(temperature_K)
    users = user_materials or {}

    def resolve(n):
        if n in users:
            return None
        if not isinstance(n, str):
            raise MaterialError(f"a material name must be a string, got {n!r}")
        try:
            return _parse_elements(n.strip(), tables)
        except MaterialError as exc:
            if users and getattr(exc, "unknown_name", False):
                raise _unknown(n.strip(), extra=list(users), why=exc.why, tables=tables) from None
            raise

    e0, e1 = resolve(start), resolve(end)
    if e0 is not None and e1 is not None:
        c0, a0 = dict(e0[0]), dict(e0[1])
        c1, a1 = dict(e1[0]), dict(e1[1])
        cat_els = [el for el in GROUP_III if el in c0 or el in c1]
        an_els = [el for el in GROUP_V if el in a0 or el in a1]
        if (frozenset(cat_els), frozenset(an_els)) in tables.family_by_elements:
            def along(f: float) -> Material:
                f = _check_fraction(f)
                cat = {el: (1 - f) * c0.get(el, 0.0) + f * c1.get(el, 0.0) for el in cat_els}
                an = {el: (1 - f) * a0.get(el, 0.0) + f * a1.get(el, 0.0) for el in an_els}
                cat = {el: x for el, x in cat.items() if x > 0.0}
                an = {el: x for el, x in an.items() if x > 0.0}
                if f == 0.0:
                    name = start.strip()
                elif f == 1.0:
                    name = end.strip()
                else:
                    name = _formula(cat, an)
                mat, msgs = _cached_grade(name, tuple(cat.items()), tuple(an.items()), T, tables)
                _emit(msgs, stacklevel=3)
                return mat
            return along

    m0 = _get_material(start, T, users, tables)
    m1 = _get_material(end, T, users, tables)
    common = [f for f in PARAM_FIELDS
              if getattr(m0, f) is not None and getattr(m1, f) is not None]
    if not common:
        raise MaterialError(f"grade from {start} to {end}: no common parameters")
    derive_masses = all(f in common for f in ("gamma1", "gamma2"))

    def blend(f: float) -> Material:
        f = _check_fraction(f)
        vals = {fld: None for fld in PARAM_FIELDS}
        for fld in common:
            vals[fld] = (1 - f) * getattr(m0, fld) + f * getattr(m1, fld)
        if derive_masses:
            g1, g2 = vals["gamma1"], vals["gamma2"]
            vals["heavy_hole_mass"] = 1.0 / (g1 - 2 * g2)
            vals["light_hole_mass"] = 1.0 / (g1 + 2 * g2)
        srcs = {fld: "linear_blend" for fld in PARAM_FIELDS if vals[fld] is not None}
        return Material(name=f"{m0.name}->{m1.name}@{f:.4f}", family="user", composition={},
                        temperature_K=T, sources=srcs, **vals)
    return blend


@functools.lru_cache(maxsize=8192)
def _cached_grade(name, cations, anions, T, tables=_BUILTIN):
    return _make(name, cations, anions, T, tables)


def _check_fraction(f) -> float:
    try:
        x = float(f)
    except (TypeError, ValueError):
        raise ParameterError(f"grade position must be a number in [0, 1], got {f!r}") from None
    if not (0.0 <= x <= 1.0):
        raise ParameterError(f"grade position {f!r} is outside [0, 1]")
    return x
