"""The public Python API: every name in ``qwell.__all__`` resolves, and the docstring examples of
the entry points run (numpydoc Examples, checked with doctest; values from the exact solver, whose
accuracy is tested against closed forms in test_reference_wells.py)."""

import doctest
from pathlib import Path

import matplotlib
import pytest

import qwell
from qwell import design, diagram, levels, report, stack

ROOT = Path(__file__).resolve().parents[1]


def test_every_public_name_resolves():
    for name in qwell.__all__:
        assert getattr(qwell, name) is not None, name
    assert sorted(dir(qwell)) == sorted(qwell.__all__)
    with pytest.raises(AttributeError):
        qwell.no_such_name  # noqa: B018


def test_stack_from_a_dict_equals_the_file():
    # the same stack written as a mapping solves to the same energies (bit for bit)
    mapping = {"name": "long-wave detector well", "temperature": "77 K", "substrate": "GaAs",
               "layers": [{"material": "Al0.25Ga0.75As", "thickness": "40 nm",
                           "name": "top_barrier"},
                          {"material": "GaAs", "thickness": "19 ML", "name": "well"},
                          {"material": "Al0.25Ga0.75As", "thickness": "40 nm",
                           "name": "bottom_barrier"}]}
    a = qwell.solve_stack(qwell.stack_from_mapping(mapping), bands="conduction")
    b = qwell.solve_stack(qwell.load_stack(ROOT / "layers" / "lwir-detector.yaml"),
                          bands="conduction")
    assert [s.energy_eV for s in a.states] == [s.energy_eV for s in b.states]


ENTRY_POINTS = [qwell, diagram.plot_band_diagram, stack.load_stack, stack.stack_from_mapping,
                levels.solve_stack, design.size, design.sweep, design.tolerance,
                report.build_report]


@pytest.mark.parametrize("obj", ENTRY_POINTS, ids=lambda o: getattr(o, "__name__", str(o)))
def test_docstring_examples_run(obj, monkeypatch):
    matplotlib.use("Agg")
    monkeypatch.chdir(ROOT)
    finder = doctest.DocTestFinder(recurse=False)
    runner = doctest.DocTestRunner(optionflags=doctest.ELLIPSIS)
    tests = finder.find(obj, globs={})
    assert tests and any(t.examples for t in tests)
    for t in tests:
        runner.run(t)
    assert runner.failures == 0
