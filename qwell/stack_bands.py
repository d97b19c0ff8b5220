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

from .bands import BAND_NAMES
from .errors import MaterialError, StackError
from .profile import FIELD_EV_PER_NM_PER_KV_CM, _edges_of, _LayerFunctions, \
    _layer_material_fn, _material_set, solver_bands

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
    return solver_bands(stack, funcs, starts, slope, names=names)
