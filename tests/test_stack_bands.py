"""stack_bands: the solver bands of a stack, equal to those of the full profile."""

from __future__ import annotations

import warnings
from pathlib import Path

import numpy as np
import pytest

from qwell.profile import band_profile
from qwell.stack import load_stack
from qwell.stack_bands import stack_bands
from qwell.stack_edit import apply_parameters

LAYERS = Path(__file__).resolve().parents[1] / "layers"


def _same_bands(a: dict, b: dict):
    assert a.keys() == b.keys()
    for name in a:
        x, y = a[name], b[name]
        assert x == y      # pieces (kinds, ends, constants), sign, nonparabolicity, repeats
        z = np.linspace(x.z_start_nm, x.z_end_nm, 777)
        for f in ("potential", "edge_mass", "gap"):
            assert np.array_equal(getattr(x, f)(z), getattr(y, f)(z), equal_nan=True)


@pytest.mark.parametrize("path", sorted(LAYERS.glob("*.yaml")), ids=lambda p: p.name)
def test_example_stacks(path):
    # Source: the profile module itself (the same layer functions); an equivalence check.
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        stack = load_stack(path)
        _same_bands(stack_bands(stack), band_profile(stack).bands)


def test_edited_designs_and_band_subsets():
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        stack = load_stack(LAYERS / "lwir-detector.yaml")
        for values in ({"well.thickness": 4.3}, {"field": 35.0}, {"temperature": 300.0},
                       {"well.thickness": 7.1, "field": -20.0}):
            s = apply_parameters(stack, values)
            full = band_profile(s).bands
            _same_bands(stack_bands(s), full)
            part = stack_bands(s, ("conduction",))
            assert list(part) == ["conduction"] and part["conduction"] == full["conduction"]
