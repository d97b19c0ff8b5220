"""The CLI's memory estimate of a band's states (qwell.cli.common.estimate_state_bytes).

The estimate counts bound states semiclassically (Bohr-Sommerfeld phase integral) and
multiplies by the bytes each stored state takes.  Checked against the finite-well
bound-state count of the textbook closed form and against the storage of an actual solve.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from qwell.cli.common import MAX_STATE_BYTES, estimate_bound_states, estimate_state_bytes
from qwell.constants import HBAR2_2M0_EV_NM2
from qwell.profile import band_profile
from qwell.solvers.exact import solve_exact
from qwell.stack import stack_from_text

DETECTOR = """name: detector
temperature: 77 K
substrate: GaAs
layers:
  - {{material: Al0.25Ga0.75As, thickness: 40 nm, name: cap}}
  - repeat: {n}
    layers:
      - {{material: GaAs, thickness: 5 nm, name: well}}
      - {{material: Al0.25Ga0.75As, thickness: 40 nm, name: barrier}}
"""


def _conduction(text):
    return band_profile(stack_from_text(text)).bands["conduction"]


def test_count_of_a_wide_square_well():
    # Finite square well, equal masses: N = ceil(L sqrt(2 m V0) / (pi hbar)) bound states
    # (Griffiths, Introduction to Quantum Mechanics, 1995, sec. 2.6), which the phase
    # integral gives to within one state for a wide well.
    band = _conduction("name: w\ntemperature: 77 K\nlayers:\n"
                       "  - {material: Al0.3Ga0.7As, thickness: 20 nm}\n"
                       "  - {material: GaAs, thickness: 300 nm}\n"
                       "  - {material: Al0.3Ga0.7As, thickness: 20 nm}\n")
    well = band.pieces[1]
    v0 = band.confinement_limit_eV - float(well.edge_start_eV)
    n_exact = math.ceil(300.0 * math.sqrt(well.mass_m0 * v0 / HBAR2_2M0_EV_NM2) / math.pi)
    assert abs(estimate_bound_states(band) - n_exact) <= 1.0


def test_bytes_match_the_storage_of_a_solve():
    # 20 periods: the estimate equals the states actually solved times what each holds
    # (grid points of psi plus psi and u at every slice boundary, float64), to 10 %
    band = _conduction(DETECTOR.format(n=20))
    nbytes, n_est = estimate_state_bytes(band)
    lev = solve_exact(band, quasi_bound=False)
    stored = sum(8 * s.psi.size + s.envelope.psi_b.nbytes + s.envelope.u_b.nbytes
                 for s in lev.states)
    assert len(lev.states) == pytest.approx(n_est, rel=0.1)
    assert nbytes == pytest.approx(stored, rel=0.1)
    assert np.all([s.psi.dtype == np.float64 for s in lev.states])
    assert nbytes < MAX_STATE_BYTES
