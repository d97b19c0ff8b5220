"""The plain-form fast path (qwell.unit_table) against pint's registry: the same floats.

The reference is pint itself (a fresh ``pint.UnitRegistry``), outside qwell's code path:
every table factor must be pint's conversion factor, and reading random plain values
through qwell.units must give pint's float bit for bit (``==`` on floats, and the sign
of zero).
"""

from __future__ import annotations

import math
import subprocess
import sys

import pint
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from qwell.constants import H_EV_S, HC_EV_UM
from qwell.unit_table import UNIT_FACTORS, plain_split, plain_value
from qwell.errors import UnitError
from qwell.units import out_of_range, spectral_to_eV, thickness_nm, to_float

UREG = pint.UnitRegistry()
UREG.define("monolayer = [monolayer] = ML")

_PINT_SPELLING = {"angstrom": "angstrom", "um": "um", "cm^-1": "cm^-1"}


def _same(a: float, b: float) -> bool:
    return a == b and math.copysign(1.0, a) == math.copysign(1.0, b) or (a != a and b != b)


@pytest.mark.parametrize("src, dst", sorted(UNIT_FACTORS))
def test_table_factor_is_pints(src, dst):
    # pint converts a magnitude with one multiplication by its conversion factor
    # (pint.facets.plain.registry.PlainRegistry._convert, pint 0.25).
    factor = UREG._get_conversion_factor(UREG.Quantity(1, src)._units, UREG.Quantity(1, dst)._units)
    assert float(factor) == UNIT_FACTORS[(src, dst)]


_NUMBERS = st.one_of(
    st.floats(min_value=0.0, max_value=1e6, allow_nan=False).map(repr),
    st.floats(min_value=1e-30, max_value=1e30, allow_nan=False).map(lambda x: f"{x:.6e}"),
    st.integers(min_value=0, max_value=10 ** 20).map(str),
    st.decimals(min_value=0, max_value=1000, places=4).map(str),
)
_SIGNS = st.sampled_from(["", "-", "+"])
_SPACES = st.sampled_from([" ", "", "  ", "\t"])


def _text(sign, number, space, unit):
    return f"{sign}{number}{space}{unit}"


@settings(max_examples=400, deadline=None)
@given(sign=_SIGNS, number=_NUMBERS, space=_SPACES,
       pair=st.sampled_from([("nm", "nm"), ("Å", "nm"), ("um", "nm"), ("µm", "nm"), ("eV", "eV"),
                             ("meV", "eV"), ("K", "K"), ("kV/cm", "kV/cm"), ("V/cm", "kV/cm"),
                             ("cm^-3", "cm^-3"), ("cm^-2", "cm^-2"), ("GPa", "GPa")]))
def test_to_float_equals_pint(sign, number, space, pair):
    unit, target = pair
    text = _text(sign, number, space, unit)
    if plain_split(text) is None:   # not a plain form: nothing to compare (registry path)
        return
    ref_text = text.replace("µ", "u").replace("Å", "angstrom")
    ref = float(UREG.Quantity(ref_text).to(target).magnitude)
    got = thickness_nm(text, None) if target == "nm" else to_float(text, target)
    assert _same(got, ref), (text, got, ref)


@settings(max_examples=200, deadline=None)
@given(number=_NUMBERS, space=_SPACES, mono=st.floats(0.1, 0.4))
def test_monolayers_equal_pint(number, space, mono):
    text = f"{number}{space}ML"
    ref = float(UREG.Quantity(text).to("ML").magnitude) * mono
    assert _same(thickness_nm(text, mono), ref)


@settings(max_examples=300, deadline=None)
@given(number=_NUMBERS, space=_SPACES, unit=st.sampled_from(["um", "µm", "nm", "eV", "meV",
                                                             "cm^-1", "THz"]))
def test_spectral_equals_pint(number, space, unit):
    text = f"{number}{space}{unit}"
    if plain_split(text) is None:
        return
    q = UREG.Quantity(text.replace("µ", "u"))
    if q.check("[length]"):
        lam = q.to("um").magnitude
        if lam <= 0:
            return      # refused by both paths (tests/test_units.py)
        ref = HC_EV_UM / lam
    elif q.check("[energy]"):
        ref = float(q.to("eV").magnitude)
    elif q.check("1/[length]"):
        ref = float(q.to("1/um").magnitude) * HC_EV_UM
    else:
        ref = float(q.to("Hz").magnitude) * H_EV_S
    if out_of_range("photon_energy", ref):
        with pytest.raises(UnitError):     # outside the photon range: refused, not converted
            spectral_to_eV(text)
        return
    assert _same(spectral_to_eV(text), ref)


@pytest.mark.parametrize("text", ["5 nanometer", "05 nm", "1 + 2 nm", "5 nm nm", "2*3 nm",
                                  "25 degC", "5", "nm", "1e18 m^-3", "5 mm", ""])
def test_other_forms_go_to_the_registry(text):
    assert plain_value(text, "nm") is None and plain_value(text, "K") is None


def test_levels_command_imports_no_registry_optimiser_or_plotting():
    # start-up: a plain `qwell levels` must not import pint, scipy.optimize, scipy.constants,
    # scipy.integrate, scipy.special, matplotlib or dask (common practice, no source)
    code = ("import sys; from qwell.cli import main; main(['levels', 'layers/lwir-detector.yaml']);"
            "bad = [m for m in ('pint', 'scipy.optimize', 'scipy.constants', 'scipy.integrate',"
            " 'scipy.special', 'matplotlib', 'dask') if m in sys.modules];"
            "print('LOADED', bad, file=sys.stderr)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         cwd=__file__.rsplit("/tests/", 1)[0], check=False)
    assert "LOADED []" in out.stderr, out.stderr[-2000:]


def test_levels_command_imports_only_its_own_layers():
    # start-up: `qwell levels` registers and imports only its own command module, not the
    # design workflows (sizing, sweeps, tolerances), the report or the spectra commands
    # (common practice, no source)
    code = ("import sys; from qwell.cli import main; main(['levels', 'layers/lwir-detector.yaml']);"
            "bad = [m for m in ('qwell.cli.design', 'qwell.cli.report', 'qwell.cli.spectra',"
            " 'qwell.design.evaluate', 'qwell.design.sizing', 'qwell.design.sweeps',"
            " 'qwell.design.tolerances', 'qwell.report') if m in sys.modules];"
            "print('LOADED', bad, file=sys.stderr)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         cwd=__file__.rsplit("/tests/", 1)[0], check=False)
    assert "LOADED []" in out.stderr, out.stderr[-2000:]
