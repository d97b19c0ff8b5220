"""Plots of profiles (band edges along z).

Look: a colour-blind-safe palette (M. Okabe and K. Ito, "Color Universal
Design", 2008) that also reads in greyscale because every band has its own
line style; layers alternate between white and a pale grey so boundaries show
in print; no decoration.
"""

from __future__ import annotations

import numpy as np

from .fileio import atomic_savefig

__all__ = ["plot_profile", "BAND_STYLE", "new_figure"]

#: band -> (colour, line style, legend label)
BAND_STYLE = {
    "conduction": ("#0072B2", "-", "conduction edge"),
    "heavy_hole": ("#D55E00", "--", "heavy-hole edge"),
    "light_hole": ("#009E73", ":", "light-hole edge"),
}


def new_figure(width_in=8.0, height_in=5.0):
    """A matplotlib figure on the Agg backend (no screen needed)."""
    # matplotlib is heavy: imported when a figure is made, not with qwell.plots
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    fig, ax = plt.subplots(figsize=(width_in, height_in), dpi=120)
    return fig, ax


def shade_layers(ax, profile, *, label=True, y_text=None):
    """Alternate pale shading per layer and (optionally) label the layers."""
    for i, lp in enumerate(profile.layers):
        if i % 2:
            ax.axvspan(lp.start_nm, lp.end_nm, color="0.92", lw=0, zorder=0)
        ax.axvline(lp.start_nm, color="0.75", lw=0.5, zorder=1)
    ax.axvline(profile.layers[-1].end_nm, color="0.75", lw=0.5, zorder=1)
    if label and len(profile.layers) <= 24:
        ymin, ymax = ax.get_ylim()
        yt = ymax - 0.02 * (ymax - ymin) if y_text is None else y_text
        for lp in profile.layers:
            width = lp.end_nm - lp.start_nm
            span = profile.total_thickness_nm
            if width / span < 0.02:
                continue
            ax.text(0.5 * (lp.start_nm + lp.end_nm), yt, lp.label, ha="center", va="top",
                    fontsize=7, rotation=90 if width / span < 0.09 else 0, color="0.25")


def plot_profile(profile, path, *, protect=(), title=None, charge=None):
    """Band-edge plot (conduction, heavy- and light-hole edges) with layer boundaries.

    Parameters
    ----------
    profile : qwell.profile.Profile
    path : str or Path
        Output PNG (or PDF by suffix), written atomically.
    protect : sequence of paths
        Input files that must never be overwritten.
    charge : qwell.selfconsistent.SelfConsistentResult, optional
        Draw its electron (and hole) density on a second axis and mark the
        Fermi level.
    """
    import matplotlib.pyplot as plt  # heavy: imported on first use

    fig, ax = new_figure()
    z = profile.z_nm
    for key, arr in (("conduction", profile.conduction_edge_eV),
                     ("heavy_hole", profile.heavy_hole_edge_eV),
                     ("light_hole", profile.light_hole_edge_eV)):
        if np.any(np.isfinite(arr)):
            c, ls, lab = BAND_STYLE[key]
            ax.plot(z, arr, color=c, ls=ls, lw=1.6, label=lab, zorder=3)
    ax.set_xlim(z[0], z[-1])
    ax.set_xlabel("position z (nm)")
    ax.set_ylabel("energy (eV)")
    ax.set_title(title or profile.stack.name, fontsize=11)
    ax.legend(loc="center right", fontsize=8, frameon=False)
    shade_layers(ax, profile)
    if charge is not None:
        ef = charge.fermi_level_eV
        if ef is not None and np.isfinite(ef):
            ax.axhline(ef, color="0.2", ls="-.", lw=1.0, zorder=2)
            ax.text(z[0] + 0.01 * (z[-1] - z[0]), ef, "Fermi level", va="bottom", ha="left",
                    fontsize=8, color="0.2")
        ax2 = ax.twinx()
        ax2.fill_between(charge.z_nm, charge.electron_density_cm3, color="#56B4E9", alpha=0.35,
                         lw=0, label="electron density")
        if np.any(charge.hole_density_cm3 > 0):
            ax2.fill_between(charge.z_nm, charge.hole_density_cm3, color="#E69F00", alpha=0.35,
                             lw=0, hatch="//", label="hole density")
        ax2.set_ylabel("carrier density (cm$^{-3}$)")
        ax2.set_ylim(bottom=0)
        h1, l1 = ax.get_legend_handles_labels()
        h2, l2 = ax2.get_legend_handles_labels()
        ax.legend(h1 + h2, l1 + l2, loc="center right", fontsize=8, frameon=False)
    fig.tight_layout()
    out = atomic_savefig(fig, path, protect=protect)
    plt.close(fig)
    return out
