"""Intersubband lifetimes on the command line: ``qwell levels STACK --lifetimes``.

The options and the text tables of :mod:`qwell.lifetimes` (LO-phonon rate table, radiative
lines, emitter figure of merit); ``qwell levels`` and the design commands call in here.
"""

from __future__ import annotations

import math

from ..errors import QwellError
from ..lifetimes import solution_lifetimes
from .common import fmt, table

__all__ = ["add_lifetime_options", "lifetimes_of", "print_lifetimes", "check_band"]


def add_lifetime_options(parser) -> None:
    """``--lifetimes``, ``--emitter``, ``--thermal``, ``--period`` of ``qwell levels``."""
    parser.add_argument("--lifetimes", action="store_true",
                        help="LO-phonon scattering times of the conduction subbands (ps), "
                             "spontaneous emission and the emitter figure of merit")
    parser.add_argument("--emitter", metavar="e2-e3",
                        help="with --lifetimes: the emitter line (default: the line that can "
                             "invert with the largest figure of merit)")
    parser.add_argument("--thermal", action="store_true",
                        help="with --lifetimes: average the rates over a thermal distribution "
                             "in each subband (default: electron at the subband bottom)")
    parser.add_argument("--period", type=float, metavar="NM",
                        help="with --lifetimes: stage length for the gain per current density "
                             "(default: the stack's total thickness)")


def check_band(solve_conduction, band: str) -> None:
    """Refuse ``--lifetimes`` with a valence band only (exit 2), naming the conduction states.

    ``solve_conduction`` is called to list them (it returns the conduction labels).
    """
    if band in ("heavy_hole", "light_hole"):
        labels = solve_conduction()
        raise QwellError(f"--lifetimes with --band {band}: LO-phonon lifetimes are computed for "
                         "conduction subbands only (conduction states of this stack: "
                         + (", ".join(labels) or "none") + "); use --band conduction or all")


def lifetimes_of(solution, *, emitter=None, thermal=False, linewidth_meV=10.0, period_nm=None):
    """:func:`qwell.lifetimes.solution_lifetimes` with the command's options."""
    if period_nm is not None and not (math.isfinite(period_nm) and period_nm > 0):
        raise QwellError(f"--period {period_nm!r}: expected a positive length in nm")
    return solution_lifetimes(solution, line=emitter, thermal=thermal,
                              linewidth_meV=linewidth_meV, period_nm=period_nm)


def _ps(t) -> str:
    """A time: three digits, '∞' when nothing leaves (zero rate)."""
    if t is not None and math.isinf(t) and t > 0:
        return "∞"
    return fmt(t, ".3g")


def print_lifetimes(lt) -> None:
    """Rate table, radiative lines, the emitter line and all lines' figures of merit."""
    r = lt.rates
    how = ("thermal average over each subband" if r.thermal
           else "electron at the bottom of the initial subband")
    print(f"\nLO-phonon scattering times in ps (emission + absorption, T = "
          f"{r.temperature_K:g} K, {how})")
    n = len(r.labels)
    rows = []
    for i in range(n):
        cells = ["·" if i == f else _ps(1e12 / w if w > 0 else math.inf)
                 for f, w in enumerate(r.rate_per_s[i])]
        rows.append([r.labels[i]] + cells + [_ps(float(r.lifetime_ps[i])),
                                             f"{r.in_plane_mass_m0[i]:.4f}"])
    print(table(rows, ["from \\ to"] + list(r.labels) + ["lifetime ps", "m∥ m0"],
                ["<"] + [">"] * (n + 2)))
    if lt.radiative:
        print(f"\nSpontaneous emission (refractive index {lt.radiative[0].refractive_index:.3f})")
        rows = [[f"{x.upper}->{x.lower}", f"{x.wavelength_um:.4f}",
                 f"{x.oscillator_strength:.4f}", fmt(x.lifetime_ns, ".4g"),
                 _ps(x.phonon_time_ps)] for x in lt.radiative]
        print(table(rows, ["line", "λ µm", "f", "radiative ns", "LO-phonon ps"],
                    ["<", ">", ">", ">", ">"]))
    f = lt.figure
    if f is not None:
        print(f"\nEmitter line {f.line}: {f.wavelength_um:.4f} µm, |z| {f.dipole_nm:.4f} nm")
        print(f"  tau_u {_ps(f.tau_upper_ps)} ps, tau_l {_ps(f.tau_lower_ps)} ps, "
              f"tau_ul {_ps(f.tau_upper_lower_ps)} ps")
        print(f"  tau_u (1 - tau_l/tau_ul) = {fmt(f.inversion_factor_ps, '.4g')} ps, "
              f"z² tau_u (1 - tau_l/tau_ul) = {fmt(f.figure_of_merit_nm2_ps, '.4g')} nm² ps")
        print(f"  peak cross-section {f.cross_section_cm2:.3g} cm² (FWHM {f.linewidth_meV:g} "
              f"meV, n {f.refractive_index:.3f}); gain per current density "
              f"{fmt(f.gain_per_current_cm_per_kA, '.3g')} cm/kA (stage {f.period_nm:g} nm, "
              "unit injection)")
        if not f.inversion_possible:
            print("  NO INVERSION POSSIBLE on this line: tau_l >= tau_ul")
    if len(lt.figures) > 1 or (lt.figures and f is None):
        rows = [[x.line, f"{x.wavelength_um:.4f}", _ps(x.tau_upper_ps), _ps(x.tau_lower_ps),
                 _ps(x.tau_upper_lower_ps), fmt(x.figure_of_merit_nm2_ps, ".4g"),
                 "yes" if x.inversion_possible else "no"] for x in lt.figures]
        print("\nAll intersubband lines (largest figure of merit first)")
        print(table(rows, ["line", "λ µm", "tau_u ps", "tau_l ps", "tau_ul ps",
                           "z²τ nm² ps", "inversion"], ["<", ">", ">", ">", ">", ">", "<"]))
    for note in tuple(lt.notes) + (tuple(f.notes) if f is not None else ()):
        print(f"note: {note}")
