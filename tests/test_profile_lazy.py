"""Sampled band edges of a profile are computed on first access, and equal the eager ones.

The solvers work on the per-layer description (:class:`qwell.bands.Band`),
so a design evaluation never samples; the arrays are made when a plot, a
table or the Schrödinger-Poisson loop asks.  Checks: nothing sampled by a
solve; the arrays, whenever made, are bit-identical; on uniform layers the
sampled conduction edge is the tilted-step closed form
Ec(z) = Ec(layer) + e F z (a uniform field, common practice, no source),
evaluated here from the material table and the field alone.
"""

from pathlib import Path

import numpy as np
import pytest

from qwell.levels import prepare_profile, solve_profile
from qwell.materials import get_material
from qwell.profile import FIELD_EV_PER_NM_PER_KV_CM, band_profile
from qwell.stack import load_stack, stack_from_text

ROOT = Path(__file__).resolve().parents[1]
ARRAYS = ("z_nm", "conduction_edge_eV", "heavy_hole_edge_eV", "light_hole_edge_eV",
          "electron_mass", "heavy_hole_mass", "light_hole_mass", "gap_eV", "sample_layer")
EXAMPLES = sorted(p.name for p in (ROOT / "layers").glob("*.yaml"))


@pytest.mark.parametrize("name", EXAMPLES)
def test_solving_does_not_sample_and_late_samples_equal_early_ones(name):
    st = load_stack(ROOT / "layers" / name)
    early, _ = prepare_profile(st)
    eager = {k: np.array(getattr(early, k)) for k in ARRAYS}     # sampled at once
    late, _ = prepare_profile(st)
    solve_profile(late)
    late.band_offsets()
    assert not late.samples_computed          # solving and the offsets need no samples
    for k in ARRAYS:
        np.testing.assert_array_equal(getattr(late, k), eager[k], err_msg=k)
    assert late.samples_computed


@pytest.mark.parametrize("name", EXAMPLES)
def test_interface_offsets_are_the_layers_first_and_last_samples(name):
    prof, _ = prepare_profile(load_stack(ROOT / "layers" / name))
    top = np.fmax(prof.heavy_hole_edge_eV, prof.light_hole_edge_eV)
    order = prof.sample_layer
    by_pair = {(o["left"], o["right"]): o for o in prof.band_offsets()}
    for a, b in zip(prof.layers[:-1], prof.layers[1:]):
        last_a = int(np.searchsorted(order, a.index, side="right")) - 1
        first_b = int(np.searchsorted(order, b.index, side="left"))
        dec = float(prof.conduction_edge_eV[first_b] - prof.conduction_edge_eV[last_a])
        o = by_pair.get((a.label, b.label))
        if o is None:
            assert abs(dec) < 1e-9
            continue
        assert o["delta_conduction_eV"] == dec
        if np.isfinite(top[last_a]) and np.isfinite(top[first_b]):
            assert o["delta_valence_eV"] == float(top[first_b] - top[last_a])


def test_sampled_edge_is_the_tilted_step():
    st = stack_from_text("""
temperature: 77 K
field: 20 kV/cm
layers:
  - {material: Al0.30Ga0.70As, thickness: 10 nm}
  - {material: GaAs, thickness: 6 nm}
  - {material: Al0.30Ga0.70As, thickness: 10 nm}
""", file="tilt.yaml")
    prof = band_profile(st)
    assert not prof.samples_computed
    z, ec = prof.z_nm, prof.conduction_edge_eV
    edges = [get_material(m, 77.0).conduction_edge_eV
             for m in ("Al0.30Ga0.70As", "GaAs", "Al0.30Ga0.70As")]
    own = prof.sample_layer
    want = np.array([edges[i] for i in own]) + 20.0 * FIELD_EV_PER_NM_PER_KV_CM * z
    np.testing.assert_allclose(ec, want, rtol=0, atol=1e-12)
    # both sides of each interface are sampled (vertical steps), 0.05 nm apart inside
    assert np.count_nonzero(z == 10.0) == 2 and np.count_nonzero(z == 16.0) == 2
    assert np.max(np.diff(z)) <= 0.05 + 1e-12
