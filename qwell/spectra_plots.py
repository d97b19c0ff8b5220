"""Plots of the absolute spectra: intersubband alpha and per-pass absorption, gain.

The ``draw_*`` functions draw on a given matplotlib axes (for report pages);
``plot_absorption`` and ``plot_gain`` write a PNG (or PDF by suffix)
atomically.  Colours from the colour-blind-safe palette of Okabe and Ito
(common practice, no source), each curve with its own line style so the plots
read in greyscale.
"""

from __future__ import annotations

import math

import numpy as np

from .fileio import atomic_savefig

__all__ = ["draw_absorption", "draw_gain_spectra", "draw_peak_gain", "plot_absorption",
           "plot_gain", "pick_densities"]

_COLOURS = ("#0072B2", "#D55E00", "#009E73", "#CC79A7", "#E69F00")
_STYLES = ("-", "--", "-.", ":", (0, (5, 1, 1, 1)))


def _figure(width_in, height_in, ncols=1):
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    fig, axes = plt.subplots(1, ncols, figsize=(width_in, height_in), dpi=120)
    return plt, fig, axes


def draw_absorption(ax, res, *, passes=None, label_lines: int = 4):
    """alpha [cm^-1] vs wavelength [um]; with ``passes`` (a PassAbsorption) a second
    axis shows the absorbed fraction after its passes [%]."""
    lam = res.wavelength_um
    ax.plot(lam, res.absorption_cm1, color="black", lw=1.8, label="α (z-polarised)", zorder=3)
    ax.set_xlim(float(lam.min()), float(lam.max()))
    top = float(res.absorption_cm1.max())
    # head room above the peak for the line labels
    ax.set_ylim(min(0.0, float(res.absorption_cm1.min()) * 1.05), 1.25 * top if top > 0 else 1.0)
    ax.set_xlabel("wavelength (µm)")
    ax.set_ylabel("absorption coefficient α (cm$^{-1}$)")
    ax.grid(True, color="0.88", lw=0.6, zorder=0)
    for k, ln in enumerate(res.lines[:label_lines]):
        if lam.min() <= ln.peak_wavelength_um <= lam.max():
            ax.axvline(ln.peak_wavelength_um, color=_COLOURS[k % 5], ls=_STYLES[(k + 1) % 5],
                       lw=1.0, zorder=2)
            ax.text(ln.peak_wavelength_um, 0.97, ln.name + " ", rotation=90, ha="right",
                    va="top", fontsize=8, color=_COLOURS[k % 5],
                    transform=ax.get_xaxis_transform())
    if passes is not None:
        ax2 = ax.twinx()
        ax2.plot(lam, 100.0 * passes.total, color="#D55E00", ls="--", lw=1.3,
                 label=f"absorbed, {passes.passes} pass(es), {passes.geometry}")
        ax2.set_ylabel("absorbed fraction, p-polarised (%)", color="#D55E00")
        ax2.set_ylim(0.0, 125.0 * float(passes.total.max()) or 1.0)
        ax2.tick_params(axis="y", colors="#D55E00")
        h1, l1 = ax.get_legend_handles_labels()
        h2, l2 = ax2.get_legend_handles_labels()
        ax.legend(h1 + h2, l1 + l2, loc="upper right", fontsize=8, frameon=False)
    else:
        ax.legend(loc="upper right", fontsize=8, frameon=False)


def pick_densities(table, count: int = 3):
    """Indices of ``count`` densities spread over the table (log-spaced, ends included)."""
    n = table.densities_cm2.size
    if n <= count:
        return list(range(n))
    return sorted({int(round(x)) for x in np.linspace(0, n - 1, count)})


def draw_gain_spectra(ax, table, indices=None):
    """Gain [cm^-1] vs wavelength (nm below 2 µm, else µm) at some densities of a GainTable."""
    idx = pick_densities(table) if indices is None else list(indices)
    # the unit of the region: nm below 2 µm (a laser well), µm beyond
    scale, unit = (1e3, "nm") if float(np.nanmax(table.wavelength_um)) < 2.0 else (1.0, "µm")
    lam = table.wavelength_um * scale
    pol = table.polarisation.upper()
    g_all = table.gain_te_cm1 if table.polarisation == "te" else table.gain_tm_cm1
    for k, i in enumerate(idx):
        ax.plot(lam, g_all[i], color=_COLOURS[k % 5], ls=_STYLES[k % 5], lw=1.6,
                label=f"{table.densities_cm2[i]:.2g} cm$^{{-2}}$")
        if table.peak_gain_cm1[i] > 0:
            ax.plot([table.peak_wavelength_um[i] * scale], [table.peak_gain_cm1[i]], marker="o", ms=4,
                    color=_COLOURS[k % 5])
    ax.axhline(0.0, color="0.3", lw=0.8)
    ax.set_xlim(float(lam.min()), float(lam.max()))
    ax.set_xlabel(f"wavelength ({unit})")
    ax.set_ylabel(f"material gain, {pol} (cm$^{{-1}}$)")
    ax.grid(True, color="0.88", lw=0.6, zorder=0)
    ax.legend(loc="lower right", fontsize=8, frameon=False, title="injected n = p",
              title_fontsize=8)


def draw_peak_gain(ax, table):
    """Peak gain [cm^-1] vs density (log axis), transparency marked."""
    ax.semilogx(table.densities_cm2, table.peak_gain_cm1, color="black", lw=1.6,
                marker=".", ms=3)
    ax.axhline(0.0, color="0.3", lw=0.8)
    tr = table.transparency_density_cm2
    if math.isfinite(tr):
        ax.axvline(tr, color="#0072B2", ls="--", lw=1.1)
        ax.text(tr, 0.02, f" transparency\n {tr:.3g} cm$^{{-2}}$", color="#0072B2", fontsize=8,
                va="bottom", ha="left", transform=ax.get_xaxis_transform())
    ax.set_xlabel("injected sheet density n = p (cm$^{-2}$)")
    ax.set_ylabel("peak material gain (cm$^{-1}$)")
    ax.grid(True, color="0.88", lw=0.6, which="both", zorder=0)


def plot_absorption(res, path, *, passes=None, title=None, protect=()):
    """Write the intersubband absorption plot (see :func:`draw_absorption`)."""
    plt, fig, ax = _figure(8.0, 4.6)
    try:
        draw_absorption(ax, res, passes=passes)
        sub = (f"populations: {res.populations}, n = {res.total_density_cm2:.3g} cm$^{{-2}}$, "
               f"T = {res.temperature_K:g} K, n_r = {res.refractive_index:g}\n"
               f"α over {res.active_length_rule}")
        ax.set_title((title + "\n" if title else "") + sub, fontsize=9)
        fig.tight_layout()
        return atomic_savefig(fig, path, protect=protect)
    finally:
        plt.close(fig)


def plot_gain(table, path, *, indices=None, title=None, protect=(), excitons=()):
    """Write gain spectra at some densities and the peak gain vs density side by side."""
    plt, fig, (a1, a2) = _figure(11.0, 4.6, ncols=2)
    try:
        draw_gain_spectra(a1, table, indices)
        draw_peak_gain(a2, table)
        lw = ("unbroadened" if table.linewidth_meV is None
              else f"Lorentzian FWHM {table.linewidth_meV:.3g} meV")
        m = table.model
        sub = (f"T = {m.temperature_K:g} K, {lw}, n_r = {m.refractive_index:g}, well "
               f"{m.active_length_nm:.3g} nm; parabolic subbands, no valence-band mixing")
        if excitons:
            sub += "\nexciton binding (not applied to gain): " + ", ".join(
                f"{x.name} {x.binding_meV:.1f} meV" for x in excitons)
        fig.suptitle((title + "\n" if title else "") + sub, fontsize=9)
        fig.tight_layout()
        return atomic_savefig(fig, path, protect=protect)
    finally:
        plt.close(fig)
