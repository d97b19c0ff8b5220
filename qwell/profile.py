"""Band-edge profiles: a layer stack turned into band edges along z.

:func:`band_profile` resolves each layer's material at the stack temperature
(graded layers point by point), strains it pseudomorphically to the substrate,
adds the uniform field tilt, and returns a :class:`Profile` holding

* one exact :class:`~qwell.bands.Band` per carrier (conduction, heavy hole,
  light hole) with one piece per layer, for the solvers, and
* sampled arrays (conduction, heavy- and light-hole edges, masses, gap) for
  plots and JSON, with both sides of every interface so that steps are
  vertical.  They are computed on first access (a plot, a table, the
  Schrödinger–Poisson loop), not when the profile is built: a design
  evaluation that only solves never samples.

Conventions: z = 0 nm at the start of the first layer, z increasing in
growth order; a field ``F`` [kV/cm] adds ``+F * 1e-4 * z`` eV (z in nm) to
every band edge over the listed layers, and the first and last layers
continue flat beyond them as semi-infinite claddings.

References
----------
.. [1] C. G. Van de Walle, "Band lineups and deformation potentials in the
   model-solid theory", Phys. Rev. B 39, 1871 (1989).
.. [2] S. L. Chuang, Physics of Optoelectronic Devices, Wiley (1995), ch. 4.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace
from typing import Callable

import numpy as np

from .bands import BAND_NAMES, Band, Piece, RepeatInfo
from .errors import MaterialError, StackError
from .materials.library import BUILTIN as _BUILTIN_SET
from .strain import critical_thickness_nm, critical_thickness_of_misfit_nm, strain as _strain

__all__ = ["LayerProfile", "Profile", "band_profile", "FIELD_EV_PER_NM_PER_KV_CM"]

#: Potential energy slope of an electron per unit field: 1 kV/cm = 1e-4 V/nm.
FIELD_EV_PER_NM_PER_KV_CM = 1.0e-4

_GRADE_SAMPLES = 257  # samples of a graded layer before spline interpolation


@dataclass(frozen=True)
class LayerProfile:
    """What the profile knows of one layer.

    Attributes
    ----------
    index : int
        0-based position in the expanded stack.
    label : str
        Unique display label (name, ``name#2`` in repeats, or ``L7``).
    name : str or None
        Name as written in the stack.
    material : str
        Material name, or ``'A -> B (shape)'`` for a grade.
    start_nm, end_nm : float
        Boundaries [nm].
    strain_xx, strain_zz : float
        Pseudomorphic strain (0 without substrate); for a grade, the mean.
    strain_shift_conduction_eV : float
        Hydrostatic shift of the conduction edge a_c tr(eps) [eV].
    strain_shift_heavy_hole_eV, strain_shift_light_hole_eV : float
        Hydrostatic + shear shifts of the heavy- and light-hole edges from the
        unstrained valence edge (-P -/+ Q, light hole with spin–orbit
        coupling) [eV]; for a grade, the means.
    critical_thickness_nm : float
        Matthews–Blakeslee critical thickness [nm] (inf if unstrained).
    monolayer_nm : float or None
        a/2 of the layer material [nm].
    warnings : tuple of str
    """

    index: int
    label: str
    name: str | None
    material: str
    start_nm: float
    end_nm: float
    strain_xx: float = 0.0
    strain_zz: float = 0.0
    strain_shift_conduction_eV: float = 0.0
    strain_shift_heavy_hole_eV: float = 0.0
    strain_shift_light_hole_eV: float = 0.0
    critical_thickness_nm: float = math.inf
    monolayer_nm: float | None = None
    warnings: tuple = ()

    @property
    def thickness_nm(self) -> float:
        return self.end_nm - self.start_nm


@dataclass(frozen=True)
class Profile:
    """Band edges of a stack along z (see module docstring).

    Attributes
    ----------
    stack : qwell.stack.Stack
    layers : tuple of LayerProfile
    bands : dict
        Band name -> :class:`~qwell.bands.Band`; a band is missing when some
        layer does not define its edge and mass (user materials).
    warnings : tuple of str
        Stack-level warnings (also repeated per layer).
    sampler : _Sampler
        The layer description the sampled arrays below are computed from (on
        first access, then kept).

    Sampled arrays (properties)
    ---------------------------
    z_nm : ndarray
        Sample positions [nm], interfaces included twice (both sides).
    conduction_edge_eV, heavy_hole_edge_eV, light_hole_edge_eV : ndarray
        Band edges [eV] on the common absolute scale (NaN where undefined).
    electron_mass, heavy_hole_mass, light_hole_mass : ndarray
        Band-edge masses [m0] along [001].
    gap_eV : ndarray
        Local (strained) gap Ec - max(Ehh, Elh) [eV].
    sample_layer : ndarray
        Index of the layer each sample belongs to.
    """

    stack: object
    layers: tuple
    bands: dict
    warnings: tuple = ()
    sampler: object = field(default=None, repr=False, compare=False)
    _samples: dict = field(default_factory=dict, init=False, repr=False, compare=False)

    def _sampled(self, key: str) -> np.ndarray:
        """One sampled array, all of them computed on the first access."""
        if not self._samples:
            self._samples.update(self.sampler.sample())
        return self._samples[key]

    @property
    def z_nm(self) -> np.ndarray:
        return self._sampled("z_nm")

    @property
    def conduction_edge_eV(self) -> np.ndarray:
        return self._sampled("ec")

    @property
    def heavy_hole_edge_eV(self) -> np.ndarray:
        return self._sampled("ehh")

    @property
    def light_hole_edge_eV(self) -> np.ndarray:
        return self._sampled("elh")

    @property
    def electron_mass(self) -> np.ndarray:
        return self._sampled("me")

    @property
    def heavy_hole_mass(self) -> np.ndarray:
        return self._sampled("mhh")

    @property
    def light_hole_mass(self) -> np.ndarray:
        return self._sampled("mlh")

    @property
    def gap_eV(self) -> np.ndarray:
        return self._sampled("gap")

    @property
    def sample_layer(self) -> np.ndarray:
        return self._sampled("sample_layer")

    @property
    def samples_computed(self) -> bool:
        """Whether the sampled arrays have been computed (they are on first access)."""
        return bool(self._samples)

    def layer_samples(self, index: int) -> np.ndarray:
        """Boolean mask of the samples that belong to layer ``index``."""
        return self.sample_layer == index

    @property
    def total_thickness_nm(self) -> float:
        return self.layers[-1].end_nm - self.layers[0].start_nm

    def band(self, name: str) -> Band:
        """The :class:`Band` of ``name``; MaterialError if a layer lacks its parameters."""
        try:
            return self.bands[name]
        except KeyError:
            raise MaterialError(f"band {name!r} is not defined in every layer of this stack "
                                "(user materials need valence_edge and hole masses)") from None

    def band_offsets(self) -> list[dict]:
        """Band offsets at each interface between two uniform layers.

        Returns a list of dicts with ``left``, ``right`` (layer labels),
        ``z_nm``, ``delta_conduction_eV`` (Ec right - Ec left),
        ``delta_valence_eV`` (top valence edge right - left, None if
        undefined) and ``conduction_share`` Qc = dEc / (dEc - dEv) (None when
        the gap difference vanishes).  Field tilt cancels at an interface.
        """
        out = []
        # the edges at both ends of each layer: the first and last samples of the layer,
        # evaluated alone (the samples themselves are not needed)
        ec, top = self.sampler.layer_ends()
        for a, b in zip(self.layers[:-1], self.layers[1:]):
            ec_a, ec_b = ec[a.index, 1], ec[b.index, 0]
            ev_a, ev_b = top[a.index, 1], top[b.index, 0]
            dec = float(ec_b - ec_a)
            dev = float(ev_b - ev_a) if np.isfinite(ev_a) and np.isfinite(ev_b) else None
            share = None
            if dev is not None and abs(dec - dev) > 1e-6:
                share = dec / (dec - dev)
            if abs(dec) < 1e-9 and (dev is None or abs(dev) < 1e-9):
                continue
            out.append({"left": a.label, "right": b.label, "z_nm": a.end_nm,
                        "delta_conduction_eV": dec, "delta_valence_eV": dev,
                        "conduction_share": share})
        return out


# ---------------------------------------------------------------------------
# per-layer edge functions
# ---------------------------------------------------------------------------

@dataclass(frozen=True)
class _Edges:
    """Band data of one material point (strained), floats or NaN."""

    ec: float
    ehh: float
    elh: float
    me: float
    mhh: float
    mlh: float
    gap: float
    eps_xx: float
    eps_zz: float
    d_ec: float = 0.0
    d_hh: float = 0.0
    d_lh: float = 0.0


def _nan(v):
    return math.nan if v is None else float(v)


def _edges_of(mat, substrate_mat) -> _Edges:
    """Strained band edges of one material (unstrained without substrate)."""
    ec = _nan(mat.conduction_edge_eV)
    ev = _nan(mat.valence_edge_eV)
    eps_xx = eps_zz = 0.0
    d_ec = d_hh = d_lh = 0.0
    ehh = elh = ev
    if (substrate_mat is not None and mat.lattice_constant_nm is not None
            and substrate_mat.lattice_constant_nm is not None
            and abs(mat.lattice_constant_nm - substrate_mat.lattice_constant_nm) > 0):
        try:
            s = _strain(mat, substrate_mat)
        except (TypeError, ValueError, MaterialError):
            s = None
        if s is not None:
            eps_xx, eps_zz = s.eps_xx, s.eps_zz
            d_ec, d_hh, d_lh = s.delta_conduction_eV, s.delta_heavy_hole_eV, s.delta_light_hole_eV
            ec = ec + s.delta_conduction_eV
            ehh = ev + s.delta_heavy_hole_eV
            elh = ev + s.delta_light_hole_eV
    top = max((e for e in (ehh, elh) if not math.isnan(e)), default=math.nan)  # NaN-free max
    gap = ec - top if not (math.isnan(ec) or math.isnan(top)) else _nan(mat.band_gap_eV)
    return _Edges(ec, ehh, elh, _nan(mat.electron_mass), _nan(mat.heavy_hole_mass),
                  _nan(mat.light_hole_mass), gap, eps_xx, eps_zz, d_ec, d_hh, d_lh)


class _LayerFunctions:
    """Band data of one layer as functions of z (exact for uniform layers)."""

    def __init__(self, edges_at: Callable[[float], _Edges], z0: float, z1: float, uniform: bool):
        self.z0, self.z1, self.uniform = z0, z1, uniform
        if uniform:
            self.const = edges_at(0.0)
            self.splines = None
        else:
            self.const = None
            t = np.linspace(0.0, 1.0, _GRADE_SAMPLES)
            pts = [edges_at(float(ti)) for ti in t]
            z = z0 + t * (z1 - z0)
            self.splines = {}
            for attr in ("ec", "ehh", "elh", "me", "mhh", "mlh", "gap", "eps_xx", "eps_zz",
                         "d_ec", "d_hh", "d_lh"):
                vals = np.array([getattr(p, attr) for p in pts])
                if np.all(np.isfinite(vals)):
                    from scipy.interpolate import CubicSpline  # heavy import: only graded layers need it
                    self.splines[attr] = CubicSpline(z, vals)
                else:
                    self.splines[attr] = None
            self.ends = (pts[0], pts[-1])

    def value(self, attr: str, z):
        z = np.asarray(z, dtype=float)
        if self.uniform:
            return np.full_like(z, getattr(self.const, attr))
        sp = self.splines[attr]
        if sp is None:
            return np.full_like(z, math.nan)
        return sp(np.clip(z, self.z0, self.z1))

    def defined(self, attr: str) -> bool:
        if self.uniform:
            return not math.isnan(getattr(self.const, attr))
        return self.splines[attr] is not None

    def mean(self, attr: str) -> float:
        if self.uniform:
            return getattr(self.const, attr)
        z = np.linspace(self.z0, self.z1, 65)
        return float(np.mean(self.value(attr, z)))


# Carrier band -> (edge attribute, mass attribute, carrier sign)
_BAND_ATTRS = {
    "conduction": ("ec", "me", +1),
    "heavy_hole": ("ehh", "mhh", -1),
    "light_hole": ("elh", "mlh", -1),
}


def _material_set(stack):
    """The stack's material tables (built-in plus its libraries)."""
    return getattr(stack, "material_set", None) or _BUILTIN_SET


_SAMPLED_COLUMNS = ("ec", "ehh", "elh", "me", "mhh", "mlh", "gap")


class _Sampler:
    """The sampled arrays of a profile, from its per-layer band functions.

    Each layer is sampled at ``ceil(thickness / step) + 1`` (at least 2) evenly
    spaced points including both of its ends; edges get the field tilt and the
    electrostatic energy.
    """

    def __init__(self, funcs: tuple, slope_eV_per_nm: float, electrostatic_eV, step_nm: float):
        self.funcs = funcs
        self.slope_eV_per_nm = slope_eV_per_nm
        self.electrostatic_eV = electrostatic_eV
        self.step_nm = step_nm

    def _columns(self, f: _LayerFunctions, zz: np.ndarray, keys) -> dict:
        extra = self.electrostatic_eV(zz) if self.electrostatic_eV is not None else 0.0
        out = {}
        for k in keys:
            v = f.value(k, zz)
            if k in ("ec", "ehh", "elh"):
                v = v + self.slope_eV_per_nm * zz + extra
            out[k] = v
        return out

    def sample(self) -> dict:
        """``{'z_nm', 'sample_layer', 'ec', 'ehh', 'elh', 'me', 'mhh', 'mlh', 'gap'}`` arrays."""
        zs, owner = [], []
        cols = {k: [] for k in _SAMPLED_COLUMNS}
        for i, f in enumerate(self.funcs):
            n = max(2, int(math.ceil((f.z1 - f.z0) / self.step_nm)) + 1)
            zz = np.linspace(f.z0, f.z1, n)
            zs.append(zz)
            owner.append(np.full(n, i))
            for k, v in self._columns(f, zz, _SAMPLED_COLUMNS).items():
                cols[k].append(v)
        out = {k: np.concatenate(v) for k, v in cols.items()}
        out["z_nm"] = np.concatenate(zs)
        out["sample_layer"] = np.concatenate(owner)
        return out

    def layer_ends(self) -> tuple:
        """``(ec, top)``: conduction and top valence edge [eV] at the start (column 0) and end
        (column 1) of every layer, equal to the layer's first and last samples."""
        ec = np.empty((len(self.funcs), 2))
        top = np.empty((len(self.funcs), 2))
        for i, f in enumerate(self.funcs):
            zz = np.array([f.z0, f.z1])
            c = self._columns(f, zz, ("ec", "ehh", "elh"))
            ec[i] = c["ec"]
            top[i] = np.fmax(c["ehh"], c["elh"])
        return ec, top


def _layer_material_fn(stack, layer):
    """(f(t) -> Material, display name, uniform?) for one layer."""
    T = stack.temperature_K
    overrides = dict(layer.overrides or {})
    if layer.grade is None:
        mat = stack.material_of(layer)
        return (lambda t, _m=mat: _m), mat.name, True
    g = layer.grade
    fn = _material_set(stack).grade_function(g.start, g.end, T, stack.user_materials)
    if overrides:
        def at(t, _fn=fn, _o=overrides):
            return _fn(float(g.fraction(np.array([t]))[0])).with_overrides(**_o)
    else:
        def at(t, _fn=fn):
            return _fn(float(g.fraction(np.array([t]))[0]))
    name = f"{g.start} -> {g.end} ({g.shape}{', vertex ' + g.vertex if g.shape != 'linear' else ''})"
    return at, name, False


def solver_bands(stack, funcs, starts_nm, slope_eV_per_nm: float, electrostatic_eV=None,
                 names=BAND_NAMES) -> dict:
    """Band name -> :class:`~qwell.bands.Band` from the layers' edge functions.

    The one builder of solver bands: :func:`band_profile` and
    :func:`qwell.stack_bands.stack_bands` (bands only, for design evaluations) both
    call it.  A band is left out when some layer does not define its edge and mass.

    Parameters
    ----------
    stack : qwell.stack.Stack
    funcs : sequence of _LayerFunctions
        Each layer's edge functions, in growth order.
    starts_nm : sequence of float
        Each layer's start [nm].
    slope_eV_per_nm : float
        Potential slope of the applied field [eV/nm].
    electrostatic_eV : callable, optional
        Electrostatic potential energy of an electron [eV] at z [nm] (the
        Schrödinger–Poisson loop); every layer is then a smooth piece.
    names : sequence of str
        The bands wanted.
    """
    labels = tuple(layer.label for layer in stack.layers)
    repeats = tuple(
        RepeatInfo(z_start_nm=starts_nm[r.first_layer],
                   period_nm=sum(stack.layers[r.first_layer + k].thickness_nm
                                 for k in range(r.layers_per_period)),
                   count=r.count, first_layer=r.first_layer, layers_per_period=r.layers_per_period)
        for r in stack.repeats)
    slope = slope_eV_per_nm
    bands = {}
    for bname in BAND_NAMES:
        if bname not in names:
            continue
        e_attr, m_attr, sign = _BAND_ATTRS[bname]
        if not all(f.defined(e_attr) and f.defined(m_attr) for f in funcs):
            continue
        nonpar = bool(stack.nonparabolicity) and bname == "conduction"
        pieces = []
        for i, f in enumerate(funcs):
            has_gap = nonpar and f.defined("gap")
            if f.uniform and electrostatic_eV is None:
                c = f.const
                pieces.append(Piece(z_start_nm=f.z0, z_end_nm=f.z1, layer_index=i,
                                    kind="flat" if slope == 0 else "linear",
                                    edge_start_eV=sign * (getattr(c, e_attr) + slope * f.z0),
                                    edge_slope_eV_per_nm=sign * slope,
                                    mass_m0=getattr(c, m_attr),
                                    gap_eV=c.gap if has_gap else None))
            else:
                pieces.append(Piece(z_start_nm=f.z0, z_end_nm=f.z1, layer_index=i, kind="smooth",
                                    potential_fn=_Potential(f, e_attr, sign, slope,
                                                            electrostatic_eV),
                                    mass_fn=_Value(f, m_attr),
                                    gap_fn=_Value(f, "gap") if has_gap else None))
        bands[bname] = Band(name=bname, pieces=tuple(pieces), carrier_sign=sign,
                            nonparabolic=nonpar, repeats=repeats, layer_names=labels)
    return bands


class _Value:
    """One attribute of a layer's edge functions, as a function of z [nm]."""

    def __init__(self, f, attr):
        self.f, self.attr = f, attr

    def __call__(self, z):
        return self.f.value(self.attr, z)


class _Potential:
    """Carrier potential of a smooth piece: ``sign * (edge(z) + slope z [+ electrostatic(z)])``
    [eV]."""

    def __init__(self, f, attr, sign, slope, electrostatic_eV=None):
        self.f, self.attr, self.sign, self.slope = f, attr, sign, slope
        self.electrostatic_eV = electrostatic_eV

    def __call__(self, z):
        zz = np.asarray(z, dtype=float)
        v = self.f.value(self.attr, z) + self.slope * zz
        if self.electrostatic_eV is not None:
            v = v + self.electrostatic_eV(zz)
        return self.sign * v


def band_profile(stack, *, electrostatic_eV: Callable[[np.ndarray], np.ndarray] | None = None,
                 sample_step_nm: float = 0.05) -> Profile:
    """Turn a :class:`~qwell.stack.Stack` into band-edge profiles.

    Parameters
    ----------
    stack : qwell.stack.Stack
        A validated stack.
    electrostatic_eV : callable, optional
        Extra electron potential energy -e*phi(z) [eV] as a function of z [nm]
        (from a Schrödinger–Poisson loop), added to every band edge.  Every
        piece then becomes 'smooth'.
    sample_step_nm : float
        Step of the sampled arrays [nm].

    Returns
    -------
    Profile

    Notes
    -----
    Strain (with a substrate): eps_xx = (a_sub - a)/a, eps_zz = -2 C12/C11
    eps_xx; the conduction edge moves by a_c tr(eps), the heavy- and
    light-hole edges by -P -/+ Q (light hole with the spin–orbit coupled
    form); see :mod:`qwell.strain` and [1]_, [2]_ of the module docstring.
    """
    T = stack.temperature_K
    substrate_mat = None
    if stack.substrate:
        substrate_mat = _material_set(stack).get_material(stack.substrate, T,
                                                          stack.user_materials)
    slope = stack.field_kV_per_cm * FIELD_EV_PER_NM_PER_KV_CM

    funcs: list[_LayerFunctions] = []
    families: list = []
    layer_profiles: list[LayerProfile] = []
    warnings: list[str] = []
    z = 0.0
    for layer in stack.layers:
        z0, z1 = z, z + layer.thickness_nm
        try:
            at, display, uniform = _layer_material_fn(stack, layer)
            lf = _LayerFunctions(lambda t, _at=at: _edges_of(_at(t), substrate_mat), z0, z1, uniform)
        except MaterialError as exc:
            raise StackError(str(exc), file=stack.path, line=layer.line,
                             key=f"layers[{layer.index}]") from None
        funcs.append(lf)
        lw: list[str] = []
        mats = [at(0.0), at(1.0)] if not uniform else [at(0.0)]
        families.append(mats[0].family if uniform else None)
        ml = mats[0].monolayer_nm
        hc = math.inf
        if substrate_mat is not None:
            if any(m.lattice_constant_nm is None for m in mats):
                lw.append("no lattice constant: treated as unstrained")
            else:
                # A layer with more growth on top is buried (capped: the double-kink
                # balance of Matthews and Blakeslee); the last layer is at the surface.
                capped = layer.index < len(stack.layers) - 1
                try:
                    hc = min(critical_thickness_nm(m, substrate_mat, capped=capped) for m in mats)
                except (TypeError, ValueError, MaterialError):
                    hc = math.inf
                # the first and last layers are the semi-infinite claddings (substrate side
                # and cap), not strained layers of finite thickness: no relaxation warning
                cladding = layer.index in (0, len(stack.layers) - 1) and len(stack.layers) > 1
                if layer.thickness_nm > hc and not cladding:
                    lw.append(f"thicker ({layer.thickness_nm:.3g} nm) than its Matthews–Blakeslee "
                              f"critical thickness ({hc:.3g} nm): it may relax by misfit dislocations")
        for m in mats:
            gx = getattr(m, "band_gap_X_eV", None)
            if gx is not None and m.band_gap_eV is not None and gx < m.band_gap_eV:
                lw.append(f"{m.name} is indirect (X gap {gx:.3f} eV below the Γ gap "
                          f"{m.band_gap_eV:.3f} eV): a single-Γ-valley model of this layer is unreliable")
                break
        if ml is not None and layer.thickness_nm < ml * (1 - 1e-9):
            lw.append(f"thinner ({layer.thickness_nm:.3g} nm) than one monolayer ({ml:.4g} nm): "
                      "an envelope-function model of it is not meaningful")
        for w in lw:
            warnings.append(f"layer {layer.label}: {w}")
        layer_profiles.append(LayerProfile(
            index=layer.index, label=layer.label, name=layer.name, material=display,
            start_nm=z0, end_nm=z1, strain_xx=float(lf.mean("eps_xx")),
            strain_zz=float(lf.mean("eps_zz")),
            strain_shift_conduction_eV=float(lf.mean("d_ec")),
            strain_shift_heavy_hole_eV=float(lf.mean("d_hh")),
            strain_shift_light_hole_eV=float(lf.mean("d_lh")), critical_thickness_nm=hc,
            monolayer_nm=ml, warnings=tuple(lw)))
        z = z1

    # -- bands ----------------------------------------------------------------
    bands = solver_bands(stack, funcs, [lp.start_nm for lp in layer_profiles], slope,
                         electrostatic_eV)

    # -- samples: computed on first access ----------------------------------------
    prof = Profile(stack=stack, layers=tuple(layer_profiles), bands=bands,
                   warnings=tuple(warnings),
                   sampler=_Sampler(tuple(funcs), slope, electrostatic_eV, sample_step_nm))
    grouped: dict = {}
    for w in warnings:
        label, _, msg = w.partition(": ")
        grouped.setdefault(msg, []).append(label.removeprefix("layer "))
    merged = tuple((f"layer {labels[0]}: {msg}" if len(labels) == 1 else
                    f"layers {', '.join(labels[:6])}{' …' if len(labels) > 6 else ''}: {msg}")
                   for msg, labels in grouped.items())
    prof = replace(prof, warnings=merged)
    extra = _offset_warnings(prof, families) + _net_strain_warnings(stack, prof, substrate_mat)
    if extra:
        prof = replace(prof, warnings=prof.warnings + tuple(extra))
    return prof


#: Families of pairs whose interpolated offset split is known to disagree with measurements.
_OFFSET_CAUTION_PAIRS = {
    frozenset({"InGaAs", "GaAs"}): "measurements on InGaAs/GaAs give about 60-70 %",
    frozenset({"InGaAs", "InGaAsP"}): "measured splits of InGaAs/InGaAsP differ from the "
                                     "interpolated ones",
    frozenset({"InGaAsP", "InP"}): "measured splits of InGaAsP/InP differ from the "
                                  "interpolated ones",
    frozenset({"InGaAs", "InP"}): "measured splits of InGaAs/InP differ from the "
                                 "interpolated ones",
}


def _offset_warnings(prof: Profile, families: list) -> list[str]:
    """Offset cautions at interfaces: type-II or broken-gap alignment, and the pairs whose
    interpolated offset split is known to disagree with measurements.

    The valence-offset bowing of InGaAs in interpolated tables puts only about
    a third of the In(x)Ga(1-x)As/GaAs offset in the conduction band, while
    measurements give roughly 60-70 % (physics notes of this project; e.g.
    Huang et al., Appl. Phys. Lett. (1989), from memory); the phosphide pairs
    (InGaAs/InGaAsP, InGaAsP/InP) are the other common case (common practice,
    no source).  Users can override ``conduction_edge`` per layer.  A
    conduction share outside 0-100 % is a type-II (staggered) alignment; a
    conduction edge on one side below the valence edge on the other is a
    broken gap (type III): a single-band envelope model does not hold there.
    """
    out = []
    named = {}
    seen_pairs = set()
    index_of = {lp.label: lp.index for lp in prof.layers}
    ec, top = prof.sampler.layer_ends()
    for o in prof.band_offsets():
        i = index_of[o["left"]]
        pair = frozenset({families[i], families[i + 1]})
        share = o["conduction_share"]
        where = f"interface {o['left']} | {o['right']}"
        ec_a, ec_b = ec[i, 1], ec[i + 1, 0]
        ev_a, ev_b = top[i, 1], top[i + 1, 0]
        if np.isfinite(ev_a) and np.isfinite(ev_b) and (ec_a < ev_b or ec_b < ev_a):
            out.append(f"{where}: broken-gap (type-III) alignment — the conduction edge on one "
                       "side lies below the valence edge on the other; a single-band envelope "
                       "model does not hold there")
            continue
        if share is not None and not 0.0 <= share <= 1.0:
            named.setdefault(f"{where}: type-II (staggered) alignment, conduction share "
                             f"{100 * share:.0f} % (outside 0-100 %): electrons and holes are "
                             "confined on opposite sides, so interband lines are spatially "
                             "indirect and weak", None)
            continue
        note = _OFFSET_CAUTION_PAIRS.get(pair)
        if note and share is not None and 0 < share < 1 and pair not in seen_pairs:
            if pair == frozenset({"InGaAs", "GaAs"}) and not share < 0.5:
                continue
            seen_pairs.add(pair)
            a, b = sorted(pair, key=len, reverse=True)
            out.append(f"{where}: the tables put {100 * share:.0f} % of the {a}/{b} offset in "
                       f"the conduction band; {note} — check it, and override conduction_edge "
                       "on the layer if your design depends on it")
    return list(named) + out


def _net_strain_warnings(stack, prof: Profile, substrate_mat) -> list[str]:
    """Period-averaged strain of each strain-compensated repeat block, and whether it relaxes.

    A block whose layers are strained both ways is stable when its net
    (thickness-weighted) in-plane strain stays below the Matthews-Blakeslee
    balance for the block's whole thickness taken as one layer (common practice,
    no source); the warning gives the average and the two thicknesses.
    """
    out = []
    if substrate_mat is None or substrate_mat.lattice_constant_nm is None:
        return out
    for r in stack.repeats:
        lps = prof.layers[r.first_layer:r.first_layer + r.layers_per_period]
        eps = np.array([lp.strain_xx for lp in lps])
        t = np.array([lp.end_nm - lp.start_nm for lp in lps])
        if not (np.any(eps > 1e-6) and np.any(eps < -1e-6)) or not t.sum() > 0:
            continue
        avg = float(np.sum(eps * t) / np.sum(t))
        total = float(t.sum()) * r.count
        try:
            nus = [stack.material_of(stack.layers[lp.index]) for lp in lps]
            nu = float(np.sum(t * np.array([m.c12_GPa / (m.c11_GPa + m.c12_GPa) for m in nus]))
                       / t.sum())
            capped = r.first_layer + r.layers_per_period * r.count < len(stack.layers)
            hc = critical_thickness_of_misfit_nm(avg, substrate_mat.lattice_constant_nm, nu,
                                                 capped=capped)
        except (TypeError, ValueError, MaterialError, StackError):
            continue
        if total > hc:
            names = ", ".join(lp.label for lp in lps)
            out.append(f"strain-compensated repeat ({names}) x {r.count}: period-averaged "
                       f"in-plane strain {100 * avg:+.3f} %; the block ({total:.4g} nm) is "
                       f"thicker than the Matthews–Blakeslee critical thickness of that net strain "
                       f"({hc:.4g} nm): it may relax")
    return out
