"""Anticrossings of neighbouring subbands found in a 1-D sweep, with their minimum gap.

When a field (or a thickness) tunes two coupled states through resonance, the
two levels do not cross: they approach to a minimum gap and repel.  Near
resonance two coupled levels follow the two-level result

    E± = (E_a + E_b)/2 ± sqrt(((E_a - E_b)/2)² + |V|²),

so the squared gap g² = (E_a - E_b)² + 4|V|² is quadratic in a detuning that is
linear in the swept parameter.  The minimum gap 2|V| (the coupling energy an
emitter designer reads) is therefore found from the grid by a parabola through
g² at the three points around the smallest gap: exact for the two-level model,
whatever the grid step.

References
----------
.. [1] G. Bastard, *Wave Mechanics Applied to Semiconductor Heterostructures*
   (Les Éditions de Physique, Les Ulis, 1988), chapter on coupled quantum wells
   (two-level tunnel splitting; chapter from memory).
.. [2] C. Cohen-Tannoudji, B. Diu, F. Laloë, *Quantum Mechanics*, vol. 1 (Wiley, 1977),
   chapter IV (two-level system, anticrossing of the perturbed levels).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .evaluate import LABEL_RE

__all__ = ["Anticrossing", "find_anticrossings"]


@dataclass(frozen=True)
class Anticrossing:
    """Two neighbouring states of one band at their closest approach in a sweep.

    Attributes
    ----------
    lower, upper : str
        State labels (e.g. 'e1', 'e2').
    parameter : str
        Swept parameter path.
    unit : str
        Unit of the parameter ('kV/cm', 'nm', 'fraction', 'K').
    value : float
        Parameter value of the minimum gap (from the parabola through g²) [unit].
    gap_eV : float
        Minimum gap E_upper - E_lower [eV] (twice the coupling energy).
    grid_gap_eV : float
        Smallest gap on the grid itself [eV].
    """

    lower: str
    upper: str
    parameter: str
    unit: str
    value: float
    gap_eV: float
    grid_gap_eV: float

    @property
    def gap_meV(self) -> float:
        """Minimum gap [meV]."""
        return 1e3 * self.gap_eV


def _refine(x, g, i):
    """Vertex of the parabola through g² at grid points i-1, i, i+1: (value, gap)."""
    xs = np.asarray(x[i - 1:i + 2], dtype=float)
    ys = np.asarray(g[i - 1:i + 2], dtype=float) ** 2
    a, b, c = np.polyfit(xs, ys, 2)
    if not a > 0:
        return float(x[i]), float(g[i])
    x0 = -b / (2 * a)
    g2 = c - b * b / (4 * a)
    if not (xs[0] <= x0 <= xs[-1]) or not g2 > 0:
        return float(x[i]), float(g[i])
    q = 1e-4 * (xs[-1] - xs[0])  # the vertex to 1e-4 of the fitted span (no 5e-07 kV/cm noise)
    return float(round(x0 / q) * q) + 0.0, float(math.sqrt(g2))


def find_anticrossings(parameter: str, unit: str, values, state_energy, *,
                       contrast: float = 1.25) -> tuple:
    """Anticrossings of neighbouring states of each band over a 1-D sweep.

    A pair (n, n+1) anticrosses at an interior grid point where their gap has
    a local minimum and the gap grows to at least ``contrast`` times that
    minimum on both sides within the sweep (an ordinary slow variation of the
    spacing is not reported).

    Parameters
    ----------
    parameter, unit : str
        Swept parameter path and its unit (for the result).
    values : array_like
        Grid values.
    state_energy : Mapping[str, array_like]
        Label -> energy [eV] over the grid (NaN where the state is absent).
    contrast : float
        Growth factor of the gap required on both sides of the minimum.

    Returns
    -------
    tuple of Anticrossing
        In the order of the bands and the lower state's index.
    """
    x = np.asarray(values, dtype=float)
    by_band: dict = {}
    for lab in state_energy:
        m = LABEL_RE.match(lab)
        if m:
            by_band.setdefault(m.group(1), []).append((int(m.group(2)), lab))
    out = []
    for prefix in ("e", "hh", "lh"):
        labs = [lab for _, lab in sorted(by_band.get(prefix, []))]
        for lo, hi in zip(labs, labs[1:]):
            g = (np.asarray(state_energy[hi], dtype=float)
                 - np.asarray(state_energy[lo], dtype=float))
            ok = np.isfinite(g)
            for i in range(1, len(g) - 1):
                if not (ok[i - 1] and ok[i] and ok[i + 1]):
                    continue
                if not (g[i] <= g[i - 1] and g[i] <= g[i + 1]) or not g[i] > 0:
                    continue
                left, right = g[:i][ok[:i]], g[i + 1:][ok[i + 1:]]
                if left.max() < contrast * g[i] or right.max() < contrast * g[i]:
                    continue
                v, gap = _refine(x, g, i)
                out.append(Anticrossing(lower=lo, upper=hi, parameter=parameter, unit=unit,
                                        value=v, gap_eV=gap, grid_gap_eV=float(g[i])))
    return tuple(out)
