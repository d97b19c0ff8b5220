"""Energies referenced to a point of the stack: the band edges at a layer's centre.

In a field sweep every level rises with the field (the edges move by e F z);
referenced to the edge at one layer's centre, the levels of that layer stay
nearly flat and the others cross or anticross them visibly.  Used by
``qwell levels --reference`` and ``qwell sweep --reference``.
"""

from __future__ import annotations

from .errors import ParameterError
from .profile import Profile

__all__ = ["reference_layer", "reference_edges_eV", "BAND_OF_PREFIX"]

#: Band of a state label prefix.
BAND_OF_PREFIX = {"e": "conduction", "hh": "heavy_hole", "lh": "light_hole"}


def reference_layer(profile: Profile, name: str):
    """The layer (a :class:`~qwell.profile.LayerProfile`) a reference names.

    ``name`` is a layer label (``well``, ``sl_well#3`` for the third of a repeat) or a
    layer name (its first occurrence).

    Raises
    ------
    ParameterError
        No such layer; the message lists the layer labels.
    """
    key = str(name).strip()
    for lay in profile.layers:
        if lay.label == key:
            return lay
    for lay in profile.layers:
        if lay.name == key:
            return lay
    labels = [lay.label for lay in profile.layers]
    shown = ", ".join(labels[:40]) + (f", ... ({len(labels)} layers)" if len(labels) > 40 else "")
    raise ParameterError(f"--reference {name!r}: no such layer; expected one of: {shown}")


def reference_edges_eV(profile: Profile, name: str) -> dict:
    """Band edges [eV, band-diagram scale] at the centre of the named layer, per band.

    Returns ``{band name: edge}`` for every band of the profile (conduction,
    heavy_hole, light_hole): a state of a band is referenced to that band's edge.
    """
    lay = reference_layer(profile, name)
    z = 0.5 * (lay.start_nm + lay.end_nm)
    out = {}
    for band_name, band in profile.bands.items():
        v = band.potential([z])[0]
        out[band_name] = float(band.profile_energy(float(v)))
    return out
