"""The solver bands of a flat-band stack, without the rest of a profile.

:func:`qwell.profile.band_profile` builds, besides one :class:`~qwell.bands.Band`
per carrier, the sampled edge arrays of plots and JSON, a record of every layer
(strain means, Matthews–Blakeslee critical thicknesses) and the stack's model
cautions.  A design evaluation needs only the bands: :func:`stack_bands` builds
them with the same per-layer code (the profile module's layer functions), so
``stack_bands(stack) == band_profile(stack).bands`` (``tests/test_stack_bands.py``
checks it on every example stack), at a fraction of the cost.

Units: eV, nm, m0 (carrier convention of :mod:`qwell.bands`).
"""

from __future__ import annotations

import numpy as np

from .bands import BAND_NAMES, Band, Piece, RepeatInfo
from .errors import MaterialError, StackError
from .profile import FIELD_EV_PER_NM_PER_KV_CM, _BAND_ATTRS, _edges_of, _LayerFunctions, \
    _layer_material_fn, _material_set

__all__ = ["stack_bands"]


def stack_bands(stack, names=BAND_NAMES) -> dict:
    """Band name -> :class:`~qwell.bands.Band` of the flat-band stack (no electrostatics).

    Parameters
    ----------
    stack : qwell.stack.Stack
    names : sequence of str
        The bands wanted (a band is left out, as in a profile, when some layer
        does not define its edge and mass).

    Raises
    ------
    StackError
        A layer's material cannot be resolved (as :func:`~qwell.profile.band_profile`).
    """
    T = stack.temperature_K
    substrate_mat = None
    if stack.substrate:
        substrate_mat = _material_set(stack).get_material(stack.substrate, T,
                                                          stack.user_materials)
    slope = stack.field_kV_per_cm * FIELD_EV_PER_NM_PER_KV_CM
    funcs = []
    starts = []
    z = 0.0
    for layer in stack.layers:
        z0, z1 = z, z + layer.thickness_nm
        try:
            at, _, uniform = _layer_material_fn(stack, layer)
            funcs.append(_LayerFunctions(lambda t, _at=at: _edges_of(_at(t), substrate_mat),
                                         z0, z1, uniform))
        except MaterialError as exc:
            raise StackError(str(exc), file=stack.path, line=layer.line,
                             key=f"layers[{layer.index}]") from None
        starts.append(z0)
        z = z1
    labels = tuple(layer.label for layer in stack.layers)
    repeats = tuple(
        RepeatInfo(z_start_nm=starts[r.first_layer],
                   period_nm=sum(stack.layers[r.first_layer + k].thickness_nm
                                 for k in range(r.layers_per_period)),
                   count=r.count, first_layer=r.first_layer, layers_per_period=r.layers_per_period)
        for r in stack.repeats)
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
            if f.uniform:
                c = f.const
                pieces.append(Piece(z_start_nm=f.z0, z_end_nm=f.z1, layer_index=i,
                                    kind="flat" if slope == 0 else "linear",
                                    edge_start_eV=sign * (getattr(c, e_attr) + slope * f.z0),
                                    edge_slope_eV_per_nm=sign * slope,
                                    mass_m0=getattr(c, m_attr),
                                    gap_eV=c.gap if has_gap else None))
            else:
                pieces.append(Piece(z_start_nm=f.z0, z_end_nm=f.z1, layer_index=i, kind="smooth",
                                    potential_fn=_Potential(f, e_attr, sign, slope),
                                    mass_fn=_Value(f, m_attr),
                                    gap_fn=_Value(f, "gap") if has_gap else None))
        bands[bname] = Band(name=bname, pieces=tuple(pieces), carrier_sign=sign,
                            nonparabolic=nonpar, repeats=repeats, layer_names=labels)
    return bands


class _Value:
    """One attribute of a graded layer's edge functions, as a function of z [nm]."""

    def __init__(self, f, attr):
        self.f, self.attr = f, attr

    def __call__(self, z):
        return self.f.value(self.attr, z)


class _Potential:
    """Carrier potential of a graded layer: ``sign * (edge(z) + slope z)`` [eV]."""

    def __init__(self, f, attr, sign, slope):
        self.f, self.attr, self.sign, self.slope = f, attr, sign, slope

    def __call__(self, z):
        return self.sign * (self.f.value(self.attr, z) + self.slope * np.asarray(z, dtype=float))
