"""Random valid stacks: the exact solver against an independent finite-difference solution.

The reference is written here, independent of qwell's solvers: the BenDaniel-Duke
equation -d/dz (hbar^2 / 2 m0 m(z)) dpsi/dz + V(z) psi = E psi discretised by the
box (finite-volume) method on a uniform grid with every interface on a node, the
semi-infinite claddings replaced by 60 nm of cladding and a hard wall (the
neglected tail changes a state more than 5 meV deep by far less than 1e-9 eV),
solved by scipy.linalg.eigh_tridiagonal on three grids and extrapolated to h -> 0
twice (Richardson: the error of the scheme is a series in h^2).

* Count: every bound state of the reference more than 5 meV below the confinement
  limit has a partner in the exact solver and vice versa (no missed or spurious
  state); the count of a Sturm-Liouville problem is fixed by the oscillation
  theorem (Courant & Hilbert, Methods of Mathematical Physics, vol. 1, ch. VI, 1953),
  which both methods use in their own way (node count / matrix eigenvalue order).
* Energies: agreement within 1 ueV for those states.

BenDaniel & Duke, Phys. Rev. 152, 683 (1966) for the boundary conditions;
Richardson, Phil. Trans. R. Soc. A 210, 307 (1911) for the extrapolation.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.linalg import eigh_tridiagonal

from qwell.constants import HBAR2_2M0_EV_NM2
from qwell.profile import band_profile
from qwell.solvers import solve
from qwell.stack import stack_from_mapping

N_STACKS = 100
UNIT_NM = 0.25          # every thickness is a multiple: interfaces fall on every grid
CLADDING_EXTRA_NM = 60.0
DEPTH_MARGIN_EV = 5e-3  # states closer than this to the confinement limit are not compared
TOL_EV = 1e-6


def random_stack(rng) -> dict:
    """A GaAs/AlGaAs multi-well stack with thicknesses on a 0.25 nm raster."""
    n_wells = int(rng.integers(1, 4))
    x_barrier = round(float(rng.uniform(0.15, 0.40)), 3)
    layers = [{"material": f"Al{x_barrier}Ga{1 - x_barrier:.3f}As", "thickness": "10 nm"}]
    for k in range(n_wells):
        x_well = round(float(rng.choice([0.0, 0.0, 0.05, 0.08])), 3)
        well = "GaAs" if x_well == 0 else f"Al{x_well}Ga{1 - x_well:.3f}As"
        layers.append({"material": well,
                       "thickness": f"{UNIT_NM * int(rng.integers(8, 41)):g} nm"})
        if k < n_wells - 1:
            layers.append({"material": f"Al{x_barrier}Ga{1 - x_barrier:.3f}As",
                           "thickness": f"{UNIT_NM * int(rng.integers(4, 25)):g} nm"})
    layers.append({"material": f"Al{x_barrier}Ga{1 - x_barrier:.3f}As", "thickness": "10 nm"})
    return {"name": "random", "temperature": f"{int(rng.integers(4, 301))} K",
            "substrate": "GaAs", "nonparabolicity": False, "layers": layers}


def fd_energies(band, h_nm: float, e_max_eV: float) -> np.ndarray:
    """Box-method BenDaniel-Duke eigenvalues below ``e_max_eV`` on a grid of step ``h_nm``."""
    edges = [band.z_start_nm - CLADDING_EXTRA_NM] + [p.z_end_nm for p in band.pieces]
    edges[-1] += CLADDING_EXTRA_NM
    vs, ms = [], []
    for p in band.pieces:
        zc = np.array([0.5 * (p.z_start_nm + p.z_end_nm)])
        vs.append(float(p.potential(zc)[0]))
        ms.append(float(p.mass(zc)[0]))
    # cell values: one per grid interval (constant inside each layer)
    cell_v, cell_m = [], []
    for i in range(len(band.pieces)):
        n = int(round((edges[i + 1] - edges[i]) / h_nm))
        cell_v.append(np.full(n, vs[i]))
        cell_m.append(np.full(n, ms[i]))
    cv, cm = np.concatenate(cell_v), np.concatenate(cell_m)
    t = HBAR2_2M0_EV_NM2 / (cm * h_nm * h_nm)          # coupling across each interval
    # interior nodes 1..N-1 (hard walls at both ends); a node's potential is the mean of
    # its two half cells (box integration)
    diag = t[:-1] + t[1:] + 0.5 * (cv[:-1] + cv[1:])
    off = -t[1:-1]
    w = eigh_tridiagonal(diag, off, eigvals_only=True, select="v",
                         select_range=(float(np.min(cv)) - 1.0, e_max_eV))
    return np.sort(w)


def fd_reference(band, e_max_eV: float) -> np.ndarray:
    """Eigenvalues extrapolated twice (h^2 and h^4 terms removed) from h, h/2, h/4."""
    hs = [UNIT_NM / 4, UNIT_NM / 8, UNIT_NM / 16]
    sets = [fd_energies(band, h, e_max_eV + 0.01) for h in hs]
    n = min(len(s) for s in sets)
    e1, e2, e3 = (s[:n] for s in sets)
    r1 = (4 * e2 - e1) / 3
    r2 = (4 * e3 - e2) / 3
    return (16 * r2 - r1) / 15


@pytest.mark.slow
def test_random_stacks_against_finite_difference():
    rng = np.random.default_rng(20261204)
    compared = 0
    for case in range(N_STACKS):
        data = random_stack(rng)
        stack = stack_from_mapping(data, file=f"random-{case}.yaml")
        prof = band_profile(stack)
        for name in ("conduction", "heavy_hole"):
            band = prof.bands[name]
            limit = band.confinement_limit_eV
            cut = limit - DEPTH_MARGIN_EV
            lev = solve(band, "exact", wavefunctions=False, quasi_bound=False,
                        tolerance_eV=1e-9)
            exact = np.array(sorted(s.carrier_energy_eV for s in lev.states if s.bound))
            ref = fd_reference(band, limit)
            ref_deep = ref[ref < cut]
            exact_deep = exact[exact < cut]
            # count: no missed or spurious state (a state within 1 ueV of the cut could
            # fall on either side in the two methods; none does for this seed)
            assert len(exact_deep) == len(ref_deep), (case, name, exact_deep, ref_deep)
            assert len(exact[exact < limit]) >= len(ref_deep)
            diff = np.abs(exact_deep - ref_deep)
            assert np.all(diff < TOL_EV), (case, name, data, diff.max())
            compared += len(ref_deep)
    assert compared >= N_STACKS  # every stack contributes at least one deep state
