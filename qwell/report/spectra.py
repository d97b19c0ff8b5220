"""The absolute spectra of a design-review report: what to compute and how to draw it.

For a detector (a reviewed intersubband line): alpha [cm^-1] from the
populated subbands only — the self-consistent populations of a doped stack,
or, for an undoped stack, a stated reference sheet density
(:data:`REFERENCE_DENSITY_CM2`) — and the absorbed fraction per pass for the
45 degree facet and Brewster geometries.  For a laser well (a reviewed
interband line): gain versus wavelength at :data:`GAIN_DENSITIES_CM2`, peak
gain versus injected density and the transparency density.  Each part is
left out (with a note) when the model cannot be built for the stack.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from ..absorption import _is_doped, pass_absorption, stack_absorption
from ..errors import QwellError
from ..gain import gain_table, interband_model
from ..spectra_plots import draw_absorption, draw_gain_spectra, draw_peak_gain

__all__ = ["ReportSpectra", "report_spectra", "spectra_draw", "spectra_rows",
           "REFERENCE_DENSITY_CM2", "GAIN_DENSITIES_CM2"]

#: Electron sheet density used for an undoped detector's alpha [cm^-2] (stated on the page).
REFERENCE_DENSITY_CM2 = 5e11
#: Injected densities of the report's gain spectra [cm^-2].
GAIN_DENSITIES_CM2 = (1e12, 2e12, 4e12)
_TABLE_DENSITIES = np.geomspace(1e11, 1e13, 41)


@dataclass(frozen=True)
class ReportSpectra:
    """Spectra shown by the report.

    Attributes
    ----------
    absorption : IntersubbandAbsorption or None
    absorption_basis : str
        Where the populations came from, in words.
    passes : tuple of PassAbsorption
        45 degree facet (one pass) and Brewster incidence.
    gain : GainTable or None
        Over 1e11 .. 1e13 cm^-2 plus :data:`GAIN_DENSITIES_CM2`.
    gain_indices : tuple of int
        Rows of ``gain`` at :data:`GAIN_DENSITIES_CM2`.
    notes : tuple of str
    """

    absorption: object = None
    absorption_basis: str = ""
    passes: tuple = ()
    gain: object = None
    gain_indices: tuple = ()
    notes: tuple = ()

    @property
    def panels(self) -> int:
        return int(self.absorption is not None) + int(self.gain is not None)


def report_spectra(stack, solution, *, charge=None, detector: bool = True,
                   laser: bool = True) -> ReportSpectra:
    """Compute the report's spectra from an exact ``solution`` (all bands, wavefunctions).

    Parameters
    ----------
    stack : qwell.stack.Stack
    solution : qwell.levels.Solution
    charge : SelfConsistentResult, optional
        The Schrödinger–Poisson result of a doped stack (its populations).
    detector, laser : bool
        Which parts to compute.
    """
    notes = []
    absorption = None
    basis = ""
    passes = ()
    if detector:
        try:
            if charge is not None and _is_doped(stack):
                absorption = stack_absorption(stack, populations="self-consistent",
                                              solution=replace(solution, self_consistent=charge))
                basis = "self-consistent populations of the doping"
            else:
                absorption = stack_absorption(stack, density_cm2=REFERENCE_DENSITY_CM2,
                                              solution=solution)
                basis = (f"reference electron density {REFERENCE_DENSITY_CM2:.0e} cm⁻² (the stack "
                         "holds no carriers of its own: an undoped well does not absorb)")
            if not absorption.lines:
                raise QwellError("no intersubband line between populated and higher subbands")
            passes = (pass_absorption(absorption, "facet45"),
                      pass_absorption(absorption, "brewster"))
        except QwellError as exc:
            notes.append(f"intersubband absorption not shown: {exc}")
            absorption = None
    gain = None
    idx = ()
    if laser:
        try:
            model = interband_model(stack, solution=solution)
            dens = np.unique(np.concatenate([_TABLE_DENSITIES, GAIN_DENSITIES_CM2]))
            gain = gain_table(model, dens)
            idx = tuple(int(np.argmin(np.abs(gain.densities_cm2 - d))) for d in GAIN_DENSITIES_CM2)
        except QwellError as exc:
            notes.append(f"gain not shown: {exc}")
    return ReportSpectra(absorption=absorption, absorption_basis=basis, passes=passes, gain=gain,
                         gain_indices=idx, notes=tuple(notes))


def spectra_rows(spec: ReportSpectra) -> list:
    """(quantity, value) rows of the headline numbers."""
    rows = []
    a = spec.absorption
    if a is not None:
        rows.append(["populations", spec.absorption_basis])
        rows.append(["peak α (z-polarised)", f"{a.peak_absorption_cm1:.4g} cm⁻¹ at "
                                             f"{a.peak_wavelength_um:.3f} µm"])
        rows.append(["active length", a.active_length_rule])
        for p in spec.passes:
            what = ("45° polished facet, 1 pass" if p.geometry == "facet45"
                    else f"Brewster incidence ({p.internal_angle_deg:.1f}° to z inside)")
            rows.append([f"absorbed per pass, {what}",
                         f"{100 * p.peak_per_pass:.3g} % (p-polarised)"])
    g = spec.gain
    if g is not None:
        tr = g.transparency_density_cm2
        rows.append(["transparency density", f"{tr:.3g} cm⁻²" if math.isfinite(tr)
                     else "not reached below 1e13 cm⁻²"])
        for i in spec.gain_indices:
            rows.append([f"peak gain at n = p = {g.densities_cm2[i]:.0e} cm⁻²",
                         f"{g.peak_gain_cm1[i]:.4g} cm⁻¹ at {1e3 * g.peak_wavelength_um[i]:.1f} nm"
                         if g.peak_gain_cm1[i] > 0 else f"{g.peak_gain_cm1[i]:.4g} cm⁻¹ (absorbing)"])
    return rows


def absorbing_range_um(spec: ReportSpectra, fraction: float = 0.01):
    """Wavelength range [µm] where alpha reaches ``fraction`` of its peak, 10 % wider on each
    side (None without an absorption spectrum): the window a long stack's plot is drawn
    over, whose millimetre lines inside one miniband would otherwise squeeze the rest."""
    a = spec.absorption
    if a is None or not a.absorption_cm1.size:
        return None
    alpha = np.abs(np.asarray(a.absorption_cm1, dtype=float))
    top = float(np.max(alpha))
    if not top > 0:
        return None
    lam = np.asarray(a.wavelength_um, dtype=float)[alpha >= fraction * top]
    lo, hi = float(np.min(lam)), float(np.max(lam))
    return max(0.9 * lo, float(np.min(a.wavelength_um))), min(1.1 * hi, float(np.max(a.wavelength_um)))


def spectra_draw(spec: ReportSpectra, *, absorption_xlim_um=None):
    """A ``draw(fig, rect)`` for the report's figure block; one row per part
    (``absorption_xlim_um``: the wavelength range [µm] of the absorption plot, default all)."""
    def draw(fig, rect):
        left, bottom, width, height = rect
        n = spec.panels
        gap = 0.08 * height
        ph = (height - gap * (n - 1)) / max(n, 1)
        row = 0
        if spec.absorption is not None:
            b = bottom + (n - 1 - row) * (ph + gap)
            ax = fig.add_axes((left + 0.1 * width, b + 0.2 * ph, 0.78 * width, 0.66 * ph))
            draw_absorption(ax, spec.absorption, passes=spec.passes[0])
            if absorption_xlim_um is not None:
                ax.set_xlim(*absorption_xlim_um)
            _small(ax, fig)
            ax.set_title("intersubband absorption, only populated subbands absorb", fontsize=8)
            row += 1
        if spec.gain is not None:
            b = bottom + (n - 1 - row) * (ph + gap)
            a1 = fig.add_axes((left + 0.1 * width, b + 0.2 * ph, 0.38 * width, 0.66 * ph))
            a2 = fig.add_axes((left + 0.6 * width, b + 0.2 * ph, 0.38 * width, 0.66 * ph))
            draw_gain_spectra(a1, spec.gain, spec.gain_indices)
            draw_peak_gain(a2, spec.gain)
            _small(a1, fig)
            _small(a2, fig)
            a1.set_title("interband gain (TE); no valence-band mixing", fontsize=8)
            a2.set_title("peak gain vs injected density", fontsize=8)
    return draw


def _small(ax, fig):
    """Report-size fonts (7-8 pt) on one axes and any twin axes sharing its x."""
    for a in fig.axes:
        if a is not ax and a.get_shared_x_axes().joined(a, ax):
            a.tick_params(labelsize=7)
            a.yaxis.label.set_size(8)
    ax.tick_params(labelsize=7)
    ax.xaxis.label.set_size(8)
    ax.yaxis.label.set_size(8)
    leg = ax.get_legend()
    if leg is not None:
        for t in leg.get_texts():
            t.set_fontsize(7)
