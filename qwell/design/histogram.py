"""Histogram of a Monte Carlo tolerance run: the wavelength of every kept design.

The nominal line and the 5/50/95 % percentiles (over all designs) are marked;
the designs in which the line was lost are stated in the legend, never left
out silently.
"""

from __future__ import annotations

import math

import numpy as np

from ..errors import ParameterError
from ..constants import HC_EV_UM
from ..fileio import atomic_savefig
from ..spectral import auto_unit, axis_label, from_eV, parse_unit, unit_label

__all__ = ["plot_monte_carlo"]


def plot_monte_carlo(res, path, *, protect=(), title: str | None = None,
                     unit: str | None = None):
    """Write the Monte Carlo histogram of a :class:`~qwell.design.ToleranceResult` atomically.

    Parameters
    ----------
    res : ToleranceResult
        With a Monte Carlo summary.
    path : str or Path
        Output file (PNG, or any matplotlib format by its suffix).
    protect : sequence of paths
        Files never to overwrite (the input stack).
    title : str, optional
    unit : str, optional
        Photon unit of the axis (``nm``, ``um``, ``cm-1``, ``THz``, ``meV``); default the
        nominal line's spectral region, as in the tables.

    Raises
    ------
    ParameterError
        The result has no Monte Carlo run.
    """
    mc = res.monte_carlo
    if mc is None:
        raise ParameterError("the histogram needs a Monte Carlo run (--monte-carlo N)")
    # matplotlib is heavy and only needed for plots
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    u = parse_unit(unit) if unit else auto_unit(res.nominal_energy_eV)
    label = unit_label(u)

    def conv(lam_um):
        """Wavelengths [µm] in the plot's unit."""
        return from_eV(HC_EV_UM / np.asarray(lam_um, dtype=float), u)

    lam = np.asarray(conv(mc.wavelengths_um), dtype=float)
    fig, ax = plt.subplots(figsize=(7.5, 5.6))
    if lam.size:
        bins = max(10, min(60, int(math.sqrt(lam.size) * 2)))
        ax.hist(lam, bins=bins, color="#9ecae1", edgecolor="#3182bd", linewidth=0.6,
                label=f"{mc.valid} designs with {res.transition}")
    nominal = float(conv(res.nominal_wavelength_um))
    ax.axvline(nominal, color="#111111", lw=2.0, zorder=4, label=f"nominal {nominal:.5g} {label}")
    styles = {5: ":", 50: "--", 95: ":"}
    pct = dict(mc.percentile_range_um)
    if u not in ("nm", "um"):  # a decreasing measure: its k-th percentile is λ's (100-k)-th
        pct = {k: pct.get(100 - k, (math.nan, math.nan)) for k in pct}
    for q, (lo_um, hi_um) in pct.items():
        lo, hi = sorted((float(conv(lo_um)), float(conv(hi_um))), key=lambda v: (math.isnan(v), v))
        if math.isfinite(lo) and lo == hi:
            ax.axvline(lo, color="#d94801", ls=styles.get(q, "-."), lw=1.6, zorder=3,
                       label=f"{q} %: {lo:.5g} {label}")
            continue
        shown = [v for v in (lo, hi) if math.isfinite(v)]
        if not shown:
            ax.plot([], [], " ", label=f"{q} %: among the lost designs")
            continue
        if len(shown) == 2:
            ax.axvspan(lo, hi, color="#d94801", alpha=0.45, zorder=3, lw=0,
                       label=f"{q} %: {lo:.5g}..{hi:.5g} {label} (lost ranked at either end)")
        else:
            ax.axvline(shown[0], color="#d94801", ls=styles.get(q, "-."), lw=1.5,
                       label=f"{q} %: {shown[0]:.5g} {label} or among the lost")
    if mc.lost:
        why = "; ".join(f"{w} ({n})" for w, n in mc.lost_reasons)
        ax.plot([], [], " ", label=f"lost: {mc.lost} of {mc.samples} designs "
                                   f"({100.0 * mc.lost / mc.samples:.3g} %): {why}")
    sigma = ("tolerance = 1 σ" if mc.distribution == "normal" else "uniform on ±tolerance")
    ax.set_xlabel(axis_label(u))
    ax.set_ylabel("designs per bin")
    head = title + ": " if title else ""
    ax.set_title(f"{head}{res.transition} Monte Carlo, {mc.samples} designs\n"
                 f"correlated growth errors, {sigma}", fontsize=10)
    ax.legend(loc="upper center", bbox_to_anchor=(0.5, -0.14), fontsize=8, ncol=2,
              frameon=False)
    ax.grid(alpha=0.25)
    fig.tight_layout()
    try:
        return atomic_savefig(fig, path, protect=protect, dpi=130)
    finally:
        plt.close(fig)
