"""Page content of the design-review report: what each page shows, as layout blocks.

One function per page turns :class:`~qwell.report.data.ReportData` into
blocks of :mod:`qwell.report.layout`: (1) :func:`diagram_blocks` band
diagram, (2) :func:`stack_blocks` stack table and settings, (3)
:func:`material_blocks` material parameters with numbered citations, (4)
:func:`state_blocks` states, exact and semiclassical side by side, (5)
:func:`transition_blocks` transitions with strengths and, for a reviewed
intersubband line, :func:`lifetime_blocks` LO-phonon lifetimes and the
emitter figure of merit, (6)
:func:`sensitivity_blocks` wavelength sensitivity to each layer's thickness
(±1 ML) and composition (±0.01) and the absorption spectrum, (7)
:func:`caution_blocks` cautions.  :func:`report_pages` flows them onto
pages, :func:`footer_lines` is the reproducibility footer of every page and
:func:`render_pdf` typesets the whole report in memory.
"""

from __future__ import annotations

import math
from pathlib import Path


from .. import __version__
from ..diagram import draw_band_diagram
from ..errors import QwellError
from ..materials import (from_memory_count, material_provenance,
                         origin_label, parse_formula)
from ..optics import EXCITON_NOTE
from ..solvers.results import UNCOUPLED_WIDTH_EV
from ..spectral import auto_unit, column, format_line, format_spread, spread_unit, unit_label
from ..units import format_exponent
from .condense import (LONG_LAYERS, full_list_hint, is_long, shown_states, shown_transitions,
                       state_groups, transition_groups)
from .data import ReportData
from .spectra import absorbing_range_um, spectra_draw, spectra_rows
from .layout import FigureBlock, Flow, Heading, Item, PageBreak, Paragraph, Table, typeset_pdf

__all__ = [
    "CAUTIONS",
    "caution_blocks",
    "design_cautions",
    "diagram_blocks",
    "footer_lines",
    "lifetime_blocks",
    "material_blocks",
    "render_pdf",
    "report_pages",
    "sensitivity_blocks",
    "stack_blocks",
    "state_blocks",
    "transition_blocks",
]

#: Cautions printed on the last page of every report (the README carries the same text).
CAUTIONS = [
    "Results are design estimates from an effective-mass (envelope-function) model; "
    "confirm every wavelength, energy and strength by measurement before relying on it.",
    "Material parameter tables have their own uncertainty (tens of meV in band offsets and "
    "gaps, several per cent in masses); the sources are listed on the parameters page.",
    "A device built from this design may emit invisible infrared laser radiation: follow "
    "IEC 60825-1 and your local laser-safety rules.",
    "III–V wafers and growth sources contain arsenic, phosphorus or antimony compounds: "
    "handle them per local regulations and your site's safety officer.",
    "Defer to local codes and licensed practice.",
]


_SIGMA = "·"


# ---------------------------------------------------------------------------
# formatting helpers
# ---------------------------------------------------------------------------
def _f(v, spec: str, none: str = "—") -> str:
    if v is None or (isinstance(v, float) and not math.isfinite(v)):
        return none
    return format(v, spec)


def _composition_text(material: str) -> str:
    try:
        _family, comp = parse_formula(material)
    except QwellError:
        return "—"
    if not comp:
        return "binary"
    return ", ".join(f"{k} = {v:g}" for k, v in comp.items())


def _doping_text(d) -> str:
    if d is None:
        return ""
    parts = []
    if d.donors_cm3:
        parts.append(f"n {d.donors_cm3:.3g} cm⁻³")
    if d.acceptors_cm3:
        parts.append(f"p {d.acceptors_cm3:.3g} cm⁻³")
    if d.sheet_cm2:
        parts.append(f"n sheet {format_exponent(d.sheet_cm2)} cm⁻²")
    if d.sheet_acceptors_cm2:
        parts.append(f"p sheet {format_exponent(d.sheet_acceptors_cm2)} cm⁻²")
    return ", ".join(parts)


def _solver_text(data: ReportData) -> str:
    np_on = "on (two-band)" if data.stack.nonparabolicity else "off"
    return (f"solver: exact transfer-matrix, tolerance {data.tolerance_eV:g} eV; "
            f"semiclassical WKB for comparison; nonparabolicity {np_on}")


def footer_lines(data: ReportData, page: int | None = None, pages: int | None = None) -> list[str]:
    """Reproducibility footer: version, UTC time, input SHA-256, temperature, solver settings."""
    st = data.stack
    sha = st.sha256 or "n/a (stack not read from a file)"
    src = Path(st.path).name if st.path else "(in memory)"
    when = data.created_utc.strftime("%Y-%m-%d %H:%M:%S UTC")
    line1 = f"qwell {__version__} {_SIGMA} {when} {_SIGMA} T = {st.temperature_K:g} K"
    if page is not None:
        line1 += f" {_SIGMA} page {page} of {pages}"
    line2 = f"input {src} {_SIGMA} SHA-256 {sha}"
    out = [line1, line2, _solver_text(data)]
    libs = st.libraries
    if libs:
        # one line: the full digest for one library, 16 digits each for several (page 3 lists
        # every full digest)
        digits = 64 if len(libs) == 1 else 16
        out.append("material libraries (later wins): " + f" {_SIGMA} ".join(
            f"{Path(lib.path).name} SHA-256 {lib.sha256[:digits]}" for lib in libs))
    return out


# ---------------------------------------------------------------------------
# pages
# ---------------------------------------------------------------------------
def _transition_energy_text(t) -> str:
    return f"{t.energy_eV:.6f}"


def diagram_blocks(data: ReportData) -> list:
    """Page 1: title, band diagram, the chosen transitions."""
    st = data.stack
    bits = [f"T = {st.temperature_K:g} K"]
    if st.substrate:
        bits.append(f"substrate {st.substrate}")
    if st.field_kV_per_cm:
        bits.append(f"field {st.field_kV_per_cm:g} kV/cm")
    blocks = [Heading(f"Design review: {st.name}", 15.0),
              Paragraph(("file " + str(st.path) + "  " if st.path else "") + ", ".join(bits),
                        color="0.25")]

    def draw(fig, rect):
        draw_band_diagram(fig, data.profile, data.exact.levels, transitions=data.chosen, rect=rect,
                          fermi_level_eV=data.fermi_level_eV)

    if data.line is not None:
        blocks.append(Paragraph("Reviewed " + data.line.headline() + "."))
    blocks.append(FigureBlock(470.0, draw))
    if data.chosen:
        rows = [[t.name, t.kind, _transition_energy_text(t), f"{t.wavelength_um:.5f}",
                 f"{t.wavenumber_cm1:.2f}",
                 format_line(t.energy_eV, data.photon_unit or auto_unit(t.energy_eV))]
                for t in data.chosen]
        blocks.append(Table(["transition", "kind", "energy (eV)", "λ (µm)", "wavenumber (cm⁻¹)",
                             "line"], rows, ["l", "l", "r", "r", "r", "r"],
                            title="Transitions reviewed"))
    else:
        blocks.append(Paragraph("No transition to review: the stack has fewer than two states "
                                "connected by an optical transition."))
    n_warn = len(design_cautions(data))
    if n_warn:
        blocks.append(Paragraph(f"{n_warn} design-specific caution(s) beyond the general ones: "
                                "see the cautions page ('For this design').", color="0.25"))
    return blocks


def _charge_summary(sc) -> str:
    """One line on a Schrödinger–Poisson result for the settings table."""
    ef = sc.fermi_level_eV
    occ = ", ".join(f"{k} {format_exponent(v)} cm⁻²" for k, v in sc.sheet_densities_cm2.items()
                    if v > 1e6)
    return (f"yes: {sc.iterations} iterations, residual {sc.residual_meV:.2g} meV, Fermi level "
            + ("undefined (no charge)" if ef is None or math.isnan(ef) else f"{ef:.6f} eV")
            + (f"; sheet densities {occ}" if occ else ""))


def stack_blocks(data: ReportData) -> list:
    """Page 2: layer table and stack settings."""
    st, prof = data.stack, data.profile
    any_doping = any(L.doping is not None for L in st.layers)
    headers = ["#", "layer", "material", "composition", "thickness\n(nm)", "ML",
               "strain\nε_xx (%)", "h_c\n(nm)", "warnings"]
    aligns = ["r", "l", "l", "l", "r", "r", "r", "r", "l"]
    if any_doping:
        headers.insert(8, "doping")
        aligns.insert(8, "l")
    rows = []
    hidden = _middle_periods(st) if len(st.layers) > LONG_LAYERS else {}
    for L, lp in zip(st.layers, prof.layers):
        if L.index in hidden:
            if hidden[L.index]:
                rows.append(["", "…", hidden[L.index]] + [""] * (len(headers) - 3))
            continue
        ml = "—" if not lp.monolayer_nm else f"{lp.thickness_nm / lp.monolayer_nm:.2f}"
        comp = "graded" if L.grade is not None else (
            "user-defined" if L.material in (st.user_materials or {}) else _composition_text(L.material))
        hc = lp.critical_thickness_nm
        warn = []
        if math.isfinite(hc) and lp.thickness_nm > hc:
            warn.append("exceeds critical thickness")
        warn += [w for w in lp.warnings if not w.startswith("thicker")]
        if L.overrides:
            warn.append("overrides: " + ", ".join(sorted(L.overrides)))
        row = [str(L.index + 1), lp.label, lp.material, comp, f"{lp.thickness_nm:.4f}", ml,
               f"{100 * lp.strain_xx:+.3f}", "—" if not math.isfinite(hc) else f"{hc:.4g}",
               "; ".join(warn)]
        if any_doping:
            row.insert(8, _doping_text(L.doping))
        rows.append(row)
    wrap = (2, len(headers) - 1) + ((8,) if any_doping else ())
    title = "Layers in growth order"
    if hidden:
        title += (f": {len(st.layers) - len(hidden)} of {len(st.layers)} shown (first and last "
                  "period of each long repeat block)")
    blocks = [Heading("Layer stack"),
              Table(headers, rows, aligns, wrap=wrap, title=title),
              Paragraph("ML: thickness in monolayers of the layer's material (a/2 on (001)). "
                        "Strain: pseudomorphic in-plane strain to the substrate (negative = "
                        "compressive). h_c: Matthews–Blakeslee critical thickness.",
                        size=8, color="0.25")]
    settings = [
        ["name", st.name],
        ["file", str(st.path) if st.path else "(in memory)"],
        ["SHA-256 of the file", st.sha256 or "n/a"],
    ]
    for i, lib in enumerate(st.libraries, 1):
        settings.append([f"material library {i}", f"{lib.path} (SHA-256 {lib.sha256})"])
    settings += [
        ["temperature", f"{st.temperature_K:g} K"],
        ["substrate", st.substrate or "none (layers unstrained)"],
        ["field", f"{st.field_kV_per_cm:g} kV/cm"],
        ["nonparabolicity", "on (two-band, conduction band)" if st.nonparabolicity else "off"],
        ["self-consistent", _charge_summary(data.charge) if data.charge is not None else "no"],
        ["total thickness", f"{st.total_thickness_nm:.4f} nm"],
        ["layers", f"{len(st.layers)} (after expanding {len(st.repeats)} repeat block(s))"
         if st.repeats else str(len(st.layers))],
    ]
    blocks.append(Table(["setting", "value"], settings, ["l", "l"], wrap=(1,),
                        title="Stack settings", zebra=False))
    return blocks


def _middle_periods(st) -> dict:
    """Layers of a long stack's table left out: index -> '' or, for the first left out of a
    run, the text of the row standing for the run (repeat blocks of four periods or more keep
    their first and last period)."""
    out = {}
    for rb in sorted(st.repeats, key=lambda b: -b.count * b.layers_per_period):
        if rb.count < 4:
            continue
        lo = rb.first_layer + rb.layers_per_period
        hi = rb.first_layer + (rb.count - 1) * rb.layers_per_period
        if any(i in out for i in range(lo, hi)):
            continue    # inside a run already left out (a nested block)
        for i in range(lo, hi):
            out[i] = ""
        out[lo] = (f"periods 2–{rb.count - 1} of {rb.count}: {hi - lo} layers, each period as "
                   "the first")
    return out


_PARAM_ROWS = [
    ("lattice_constant_nm", "lattice constant", "nm", ".6f"),
    ("band_gap_eV", "Γ gap", "eV", ".4f"),
    ("band_gap_X_eV", "X gap", "eV", ".4f"),
    ("band_gap_L_eV", "L gap", "eV", ".4f"),
    ("valence_edge_eV", "valence edge (VBO)", "eV", ".4f"),
    ("conduction_edge_eV", "conduction edge", "eV", ".4f"),
    ("spin_orbit_eV", "spin–orbit Δ", "eV", ".4f"),
    ("electron_mass", "electron mass", "m0", ".4f"),
    ("heavy_hole_mass", "heavy-hole mass [001]", "m0", ".4f"),
    ("light_hole_mass", "light-hole mass [001]", "m0", ".4f"),
    ("gamma1", "Luttinger γ1", "", ".3f"),
    ("gamma2", "Luttinger γ2", "", ".3f"),
    ("gamma3", "Luttinger γ3", "", ".3f"),
    ("kane_energy_eV", "Kane energy Ep", "eV", ".3f"),
    ("kane_F", "Kane F", "", ".3f"),
    ("ac_eV", "deformation a_c", "eV", ".3f"),
    ("av_eV", "deformation a_v", "eV", ".3f"),
    ("b_eV", "deformation b", "eV", ".3f"),
    ("c11_GPa", "C11", "GPa", ".1f"),
    ("c12_GPa", "C12", "GPa", ".1f"),
    ("dielectric_constant", "static dielectric constant", "", ".2f"),
    ("high_frequency_dielectric_constant", "high-frequency dielectric constant", "", ".2f"),
    ("lo_phonon_energy_eV", "LO-phonon energy", "eV", ".4f"),
]


def _distinct_materials(data: ReportData):
    """[(label, Material)] for every distinct material (grade ends included)."""
    st = data.stack
    out = {}
    for L in st.layers:
        try:
            if L.grade is None:
                m = st.material_of(L)
                key = L.material + ("" if not L.overrides else
                                    " (" + ", ".join(f"{k}={v:g}" for k, v in
                                                     sorted(L.overrides.items())) + ")")
                out.setdefault(key, m)
            else:
                for name in (L.grade.start, L.grade.end):
                    out.setdefault(name, st.material_set.get_material(name, st.temperature_K,
                                                                      st.user_materials))
        except QwellError:
            continue
    if st.substrate and st.substrate not in out:
        try:
            out[st.substrate + " (substrate)"] = st.material_set.get_material(
                st.substrate, st.temperature_K, st.user_materials)
        except QwellError:
            pass
    return list(out.items())


def _citations_of(mat, field_name, material_set=None):
    """Provenance lines of one parameter of one material (see qwell.materials.provenance).

    A built-in entry gives its citation and whether it was entered from memory, a library
    entry its file, line, SHA-256, the group's source text and what it overrides, a stack
    override says so.
    """
    p = material_provenance(mat, material_set).get(field_name)
    return [origin_label(o) for o in p.origins] if p is not None else []


def material_blocks(data: ReportData) -> list:
    """Page 3: parameters of each distinct material with numbered citations."""
    mats = _distinct_materials(data)
    blocks = [Heading(f"Material parameters at {data.stack.temperature_K:g} K")]
    if not mats:
        blocks.append(Paragraph("No material parameters could be listed."))
        return blocks
    cites: list[str] = []

    def num(c):
        if c not in cites:
            cites.append(c)
        return cites.index(c) + 1

    group = 3
    for g0 in range(0, len(mats), group):
        part = mats[g0:g0 + group]
        rows = []
        for key, label, unit, spec in _PARAM_ROWS:
            vals = []
            any_val = False
            for _, m in part:
                v = m.parameters().get(key)
                if v is None:
                    vals.append("—")
                    continue
                any_val = True
                refs = ",".join(str(num(c)) for c in _citations_of(m, key, data.stack.material_set))
                vals.append(f"{format(v, spec)} [{refs}]" if refs else format(v, spec))
            if any_val:
                rows.append([label, unit] + vals)
        blocks.append(Table(["parameter", "unit"] + [k for k, _ in part], rows,
                            ["l", "l"] + ["r"] * len(part), wrap=tuple(range(2, 2 + len(part))),
                            title="Parameters used" if g0 == 0 else ""))
    fields = [key for key, *_ in _PARAM_ROWS]
    n_mem, n_all = from_memory_count([m for _, m in mats], data.stack.material_set, fields)
    blocks.append(Paragraph("Numbers in brackets refer to the sources below. Alloy values are "
                            "interpolated from the binaries as the first source describes; band "
                            "edges are unstrained (strain shifts appear in the band diagram).",
                            size=8, color="0.25"))
    blocks.append(Paragraph(
        f"{n_mem} of the {n_all} values in these tables rest at least in part on entries "
        "marked 'from memory' (typed in from recollection of the publication and not "
        "re-checked against it); check those against the source, or bring calibrated values "
        "in a material library, before signing the design off.", size=8))
    libs = data.stack.libraries
    if libs:
        blocks.append(Table(["#", "material library (applied in this order; later wins)",
                             "SHA-256"],
                            [[str(i), f"{lib.path} ({lib.name}, {len(lib.entries)} values)",
                              lib.sha256] for i, lib in enumerate(libs, 1)],
                            ["l", "l", "l"], wrap=(1, 2), title="Material libraries",
                            zebra=False))
    blocks.append(Heading("Sources", 11.0))
    for i, c in enumerate(cites, 1):
        blocks.append(Paragraph(c, size=8, bullet=f"[{i}]"))
    return blocks


def state_blocks(data: ReportData) -> list:
    """Page 4: states, exact and semiclassical side by side."""
    blocks = [Heading("Subband states: exact and semiclassical")]
    semi_states = {}
    for lev in data.semiclassical.levels.values():
        for s in lev.states:
            semi_states[s.label] = s
    exact_states = {s.label: s for s in data.exact.states}
    long = is_long(data.exact)
    if long:
        blocks += _state_group_blocks(data)
    shown = set(shown_states(data.exact, data.chosen)) if long else None
    rows = []
    for r in data.comparison:
        if shown is not None and r["label"] not in shown:
            continue
        s = exact_states.get(r["label"])
        w = semi_states.get(r["label"])
        status = ""
        if s is not None:
            status = "bound" if s.bound else "quasi-bound"
            if s.lifetime_s is not None:
                status += f", τ = {1e12 * s.lifetime_s:.3g} ps"
            if not s.converged:
                status += f", NOT converged (±{s.tolerance_eV:.2g} eV)"
        wkb = ""
        if w is not None and w.message and "unreliable" in w.message:
            wkb = "unreliable: coupled"
        elif w is not None and w.validity is not None:
            wkb = f"validity {w.validity:.2g}"
        rows.append([r["band"].replace("_", " "), r["label"], _f(r["exact_eV"], ".6f"),
                     _f(r["semiclassical_eV"], ".6f"), _f(r["difference_meV"], "+.3f"),
                     _f(r["difference_percent"], "+.2f"), status, wkb])
    if rows:
        blocks.append(Table(["band", "state", "exact\n(eV)", "semiclassical\n(eV)", "diff\n(meV)",
                             "diff\n(%)", "status (exact)", "semiclassical note"], rows,
                            ["l", "l", "r", "r", "r", "r", "l", "l"], wrap=(6, 7),
                            title="Representative states in full" if long else ""))
        if long:
            blocks.append(Paragraph(
                f"{len(rows)} of {len(data.comparison)} states shown: the bottom, middle and "
                "top state of each group above, the states of the reviewed lines and their "
                "neighbours, and the lowest and highest single states. Every state: "
                f"{full_list_hint(data.stack)}.", size=8))
    else:
        blocks.append(Paragraph("No bound state in any band."))
    blocks.append(Paragraph(
        "Energies on the band-diagram scale (the profile's absolute scale). diff = semiclassical − "
        "exact on the carrier scale (positive: the estimate lies too high in its band); diff % "
        "relative to the exact confinement energy above the band's lowest edge. Exact: "
        "transfer-matrix solution of the BenDaniel–Duke effective-mass equation [BenDaniel & Duke, "
        "Phys. Rev. 152, 683 (1966)]; semiclassical: WKB quantisation with turning-point, hard-wall "
        "and step phases [Berry & Mount, Rep. Prog. Phys. 35, 315 (1972)]. 'validity' is the "
        "estimator's own figure of merit (largest |d(1/k)/dz| away from turning points, or step "
        "reflection; 0 where the phase rule is exact, above 0.25 it warns).", size=8, color="0.25"))
    mb = [m for lev in data.exact.levels.values() for m in lev.minibands]
    if mb:
        blocks.append(Table(["band", "miniband", "bottom (eV)", "top (eV)", "width (meV)",
                             "period (nm)"],
                            [[m.band.replace("_", " "), str(m.index), f"{m.bottom_eV:.6f}",
                              f"{m.top_eV:.6f}",
                              f"{1e3 * m.width_eV:.3f}" if m.coupled else
                              f"< {1e3 * UNCOUPLED_WIDTH_EV:g} (uncoupled)", f"{m.period_nm:.3f}"]
                             for m in mb], ["l", "r", "r", "r", "r", "r"],
                            title="Minibands (Bloch's theorem on one period)"))
    notes = []
    for method, sol in (("exact", data.exact), ("semiclassical", data.semiclassical)):
        for lev in sol.levels.values():
            if lev.message and (method == "exact" or "unreliable" in lev.message):
                notes.append(f"{method}, {lev.band.replace('_', ' ')}: {lev.message}")
            if method == "exact":
                notes += [f"exact, {lev.band.replace('_', ' ')}: {n}" for n in lev.notes]
        notes += [f"{method}: {n}" for n in sol.notes]
    semi_notes = [f"semiclassical, {lev.band.replace('_', ' ')}: {n}"
                  for lev in data.semiclassical.levels.values() for n in lev.notes]
    shown = 4
    if notes or semi_notes:
        blocks.append(Heading("Solver notes", 11.0))
        for n in notes:
            blocks.append(Paragraph(n, size=8, bullet="•"))
        for n in semi_notes[:shown]:
            blocks.append(Paragraph(n, size=8, bullet="•"))
        if len(semi_notes) > shown:
            blocks.append(Paragraph(f"… and {len(semi_notes) - shown} more semiclassical notes "
                                    "of the same kind (see the column 'semiclassical note'); "
                                    "the exact energies are the ones to use.",
                                    size=8, bullet="•"))
    return blocks


def _state_group_blocks(data: ReportData) -> list:
    """A long stack's states per miniband / cluster: count, energy range, representatives."""
    rows = []
    n_groups = 0
    for lev in data.exact.levels.values():
        for g in state_groups(lev):
            if g.kind == "single":
                continue
            n_groups += 1
            what = "miniband" if g.kind == "miniband" else "cluster"
            rows.append([lev.band.replace("_", " "), g.label, what, str(len(g.states)),
                         f"{g.bottom_eV:.6f}", f"{g.top_eV:.6f}", f"{1e3 * g.width_eV:.4f}",
                         ", ".join(s.label for s in g.representatives)])
    n_all = len(data.exact.states)
    n_in = sum(int(r[3]) for r in rows)
    blocks = []
    if rows:
        blocks.append(Table(["band", "states", "group", "count", "lowest\n(eV)", "highest\n(eV)",
                             "spread\n(meV)", "shown in full"], rows,
                            ["l", "l", "l", "r", "r", "r", "r", "l"], wrap=(7,),
                            title="States grouped per miniband or cluster"))
    blocks.append(Paragraph(
        f"Long stack: {n_all} states, {n_in} of them in {n_groups} group(s) (a miniband of a "
        "repeat block from Bloch's theorem on one period, or a cluster of at least four "
        "neighbours less than 1 meV apart); the rest are single states.", size=8))
    return blocks


def _table_unit(data: ReportData, lines) -> str:
    """Unit of a table's line column: the user's ``--unit``, else a wavelength in the unit of
    the lines' spectral region (nm below 2 µm, else µm)."""
    if data.photon_unit:
        return data.photon_unit
    energies = sorted(t.energy_eV for t in lines)
    return "nm" if auto_unit(energies[len(energies) // 2]) == "nm" else "um"


def _column_head(unit: str) -> str:
    """'λ\n(nm)', 'ν\n(THz)', ...: a table heading over two lines."""
    symbol, label = column(unit).split(" ", 1)
    return f"{symbol}\n({label})"


def transition_blocks(data: ReportData) -> list:
    """Page 5: transitions with energies, wavelengths and strengths."""
    blocks = [Heading("Optical transitions")]
    trans = data.exact.transitions
    chosen = {t.name for t in data.chosen}
    inter = [t for t in trans if t.kind == "intersubband"]
    band = [t for t in trans if t.kind == "interband"]
    long = is_long(data.exact)
    if long:
        blocks.append(Paragraph(
            f"Long stack: {len(trans)} transitions ({len(inter)} intersubband, {len(band)} "
            "interband), grouped below by the groups of states they join (see the states "
            "page); in full only the reviewed lines, their neighbours in energy and the "
            f"strongest few. Every transition: {full_list_hint(data.stack)}.", size=8))
    if inter and long:
        blocks += _transition_group_blocks(data, "intersubband", inter)
        inter = shown_transitions(inter, data.chosen, data.exact)
    if band and long:
        blocks += _transition_group_blocks(data, "interband", band)
        band = shown_transitions(band, data.chosen, data.exact)
    if inter:
        u = _table_unit(data, inter)
        rows = [[("» " if t.name in chosen else "") + t.name, f"{t.energy_eV:.6f}",
                 format_line(t.energy_eV, u, with_unit=False), f"{t.wavenumber_cm1:.2f}",
                 f"{t.frequency_THz:.3f}",
                 _f(t.dipole_nm, ".4f"), _f(t.oscillator_strength, ".4f")] for t in inter]
        blocks.append(Table(["transition", "energy\n(eV)", _column_head(u), "wavenumber\n(cm⁻¹)",
                             "frequency\n(THz)", "dipole\n|⟨i|z|j⟩| (nm)", "oscillator\nstrength f"],
                            rows, ["l"] + ["r"] * 6,
                            title=_shown_title("Intersubband", long, len(rows),
                                               data.exact.transitions, "intersubband")))
    if band:
        u = _table_unit(data, band)
        rows = [[("» " if t.name in chosen else "") + t.name, f"{t.energy_eV:.6f}",
                 format_line(t.energy_eV, u, with_unit=False), f"{t.wavenumber_cm1:.2f}",
                 _f(t.overlap, ".4f"),
                 _f(t.te, ".4f"), _f(t.tm, ".4f"), "yes" if t.strongest else ""] for t in band]
        blocks.append(Table(["transition", "energy\n(eV)", _column_head(u), "wavenumber\n(cm⁻¹)",
                             "overlap\n|⟨e|h⟩|²", "TE", "TM", "Δn = 0"], rows,
                            ["l"] + ["r"] * 6 + ["l"],
                            title=_shown_title("Interband", long, len(rows),
                                               data.exact.transitions, "interband")))
    if not trans:
        blocks.append(Paragraph("No transition: fewer than two states connected optically."))
    blocks.append(Paragraph(
        "» marks the transitions reviewed in this report. Oscillator strength from the velocity "
        "matrix element with the energy-dependent mass [Sirtori, Capasso, Faist, Scandolo, Phys. "
        "Rev. B 50, 8663 (1994)], normalised so that the Thomas–Reiche–Kuhn sum rule holds for a "
        "parabolic band. Interband TE/TM strengths: hole momentum-matrix factor × overlap, in "
        "units of the bulk |P|² [Chuang, Physics of Optoelectronic Devices, Wiley (1995), ch. 9].",
        size=8, color="0.25"))
    if band:
        blocks.append(Paragraph("Interband: " + EXCITON_NOTE + ".", size=8, color="0.25"))
    return blocks


def _shown_title(what: str, long: bool, n_shown: int, transitions, kind: str) -> str:
    """'Intersubband (strongest first)', or with a long stack 'Intersubband: 12 of 2450
    shown (strongest first)'."""
    if not long:
        return f"{what} (strongest first)"
    n_all = sum(1 for t in transitions if t.kind == kind)
    return f"{what}: {n_shown} of {n_all} shown (strongest first)"


def _transition_group_blocks(data: ReportData, kind: str, lines) -> list:
    """A long stack's transitions of one kind per pair of state groups."""
    groups = transition_groups(data.exact, kind)
    u = _table_unit(data, lines)
    head = column(u).split(" ", 1)[0]
    limit = 16
    rows = []
    for g in groups[:limit]:
        lo, hi = g.low_eV, g.high_eV
        f = (_f(g.strongest.oscillator_strength, ".4f") if kind == "intersubband"
             else _f(max(abs(g.strongest.te or 0.0), abs(g.strongest.tm or 0.0)), ".4f"))
        rows.append([f"{g.initial} → {g.final}", str(len(g.transitions)),
                     f"{lo:.6f} – {hi:.6f}" if hi - lo > 5e-7 else f"{lo:.6f}",
                     format_line(hi, u, with_unit=False) + " – " + format_line(lo, u, with_unit=False)
                     if hi - lo > 5e-7 else format_line(lo, u, with_unit=False),
                     g.strongest.name, f])
    strength = "strongest f" if kind == "intersubband" else "strongest\nTE/TM"
    title = f"{kind.capitalize()} transitions per pair of groups"
    if len(groups) > limit:
        title += f" ({limit} of {len(groups)} pairs, strongest first)"
    return [Table(["from → to", "lines", "energy (eV)", f"{head} ({unit_label(u)})",
                   "strongest line", strength], rows, ["l", "r", "r", "r", "l", "r"],
                  wrap=(2, 3), title=title)]


#: A long stack's rate table shows at most this many states (rows and columns), and its
#: line table this many lines.
_RATE_STATES, _FIGURE_ROWS = 7, 12


def _time(t) -> str:
    """A time in ps for the tables: three digits, '∞' for a zero rate."""
    if t is not None and math.isinf(t) and t > 0:
        return "∞"
    return _f(t, ".3g")


def lifetime_blocks(data: ReportData) -> list:
    """LO-phonon scattering times, lifetimes and the emitter figure of merit (when an
    intersubband line is reviewed)."""
    if data.lifetimes is None:
        return ([Heading("Intersubband lifetimes"), Paragraph(data.lifetimes_note)]
                if data.lifetimes_note else [])
    lt = data.lifetimes
    r = lt.rates
    blocks = [Heading("Intersubband lifetimes (LO-phonon scattering)")]
    n = len(r.labels)
    idx = list(range(n))
    title = "Scattering times from row to column (ps)"
    if is_long(data.exact) and n > _RATE_STATES:
        # a long stack: the rows and columns of the states shown in full on the states page
        # (the lifetime column still sums over every state)
        f0 = lt.figure
        want = set(shown_states(data.exact, data.chosen))
        if f0 is not None:
            want.update(f0.line.split("-"))
        idx = [i for i, lab in enumerate(r.labels) if lab in want][:_RATE_STATES]
        title += f": {len(idx)} of {n} states (representatives; lifetimes over all {n})"
    labels = [r.labels[i] for i in idx]
    rows = [[r.labels[i]] + [_SIGMA if i == f else _time(1e12 / w if w > 0 else math.inf)
                             for f, w in ((f, r.rate_per_s[i][f]) for f in idx)]
            + [_time(float(r.lifetime_ps[i]))] for i in idx]
    how = ("thermal average over each subband" if r.thermal
           else "electron at the bottom of the initial subband")
    blocks.append(Table(["from \\ to"] + labels + ["lifetime\n(ps)"], rows,
                        ["l"] + ["r"] * (len(idx) + 1), title=title))
    blocks.append(Paragraph(f"Emission + absorption of LO phonons of {r.phonon.material} "
                            f"({1e3 * r.phonon.energy_eV:.1f} meV) at T = {r.temperature_K:g} K, "
                            f"{how}; ∞: no scattering.", size=8, color="0.25"))
    f = lt.figure
    if f is not None:
        blocks.append(Paragraph(
            f"Emitter line {f.line} ({f.wavelength_um:.4f} µm, |z| {f.dipole_nm:.3f} nm): "
            f"τ_u {_time(f.tau_upper_ps)} ps, τ_l {_time(f.tau_lower_ps)} ps, τ_ul "
            f"{_time(f.tau_upper_lower_ps)} ps; τ_u(1 − τ_l/τ_ul) = "
            f"{_f(f.inversion_factor_ps, '.4g')} ps; z²τ_u(1 − τ_l/τ_ul) = "
            f"{_f(f.figure_of_merit_nm2_ps, '.4g')} nm² ps; peak cross-section "
            f"{f.cross_section_cm2:.3g} cm² (FWHM {f.linewidth_meV:g} meV); gain per current "
            f"density {_f(f.gain_per_current_cm_per_kA, '.3g')} cm/kA (stage {f.period_nm:g} nm, "
            "unit injection)." + ("" if f.inversion_possible
                                  else " No inversion possible on this line: τ_l ≥ τ_ul."),
            size=9))
    if lt.figures:
        figs = list(lt.figures)
        title = "All intersubband lines (largest figure of merit first)"
        if is_long(data.exact) and len(figs) > _FIGURE_ROWS:
            figs = figs[:_FIGURE_ROWS]
            title = (f"Intersubband lines: {len(figs)} of {len(lt.figures)} shown (largest "
                     "figure of merit first)")
        rows = [[x.line, f"{x.wavelength_um:.4f}", _time(x.tau_upper_ps), _time(x.tau_lower_ps),
                 _time(x.tau_upper_lower_ps), _f(x.figure_of_merit_nm2_ps, ".4g"),
                 _f(x.radiative_lifetime_ns, ".4g"), "yes" if x.inversion_possible else "no"]
                for x in figs]
        blocks.append(Table(["line", "λ\n(µm)", "τ_u\n(ps)", "τ_l\n(ps)", "τ_ul\n(ps)",
                             "z²τ_u(1−τ_l/τ_ul)\n(nm² ps)", "radiative\n(ns)", "inversion"],
                            rows, ["l"] + ["r"] * 6 + ["l"], title=title))
        if len(figs) < len(lt.figures):
            blocks.append(Paragraph("Every rate and line: "
                                    f"{full_list_hint(data.stack, lifetimes=True)}.", size=8))
    for note in tuple(lt.notes) + (tuple(f.notes) if f is not None else ()):
        blocks.append(Paragraph(note, size=8, bullet="•"))
    blocks.append(Paragraph(
        "Fröhlich scattering by bulk, dispersionless LO phonons of the host material with the "
        "form factor of the two envelopes and the Bose occupation at the stack temperature "
        "[R. Ferreira and G. Bastard, Phys. Rev. B 40, 1074 (1989)]; no interface phonons, "
        "screening, electron-electron or interface-roughness scattering. Gain per current "
        "density from the three-level rate equations with unit injection [J. Faist et al., "
        "Science 264, 553 (1994)]. Spontaneous emission from the oscillator strength (Einstein "
        "A coefficient in a medium of index n).", size=8, color="0.25"))
    return blocks


def sensitivity_blocks(data: ReportData) -> list:
    """Page 6: wavelength sensitivity table and the absorption spectrum."""
    blocks = [Heading("Sensitivity to growth errors")]
    if data.sensitivity:
        by_t = {}
        for r in data.sensitivity:
            by_t.setdefault(r.transition, []).append(r)
        e0 = {t.name: t.energy_eV for t in data.chosen}
        for name, rows in by_t.items():
            # shifts in the unit of the line's spectral region (qwell.spectral): nm, µm or GHz
            e = e0.get(name, float("nan"))
            u = data.photon_unit or auto_unit(e)
            su, sym = unit_label(spread_unit(u)), column(u).split()[0]

            def shift(v, _e=e, _u=u):
                return "—" if v is None else format_spread(v, _e, _u, sign="+", with_unit=False)
            trs = [[r.layer, r.parameter, r.step_text, shift(r.minus_nm), shift(r.plus_nm),
                    r.note] for r in rows]
            blocks.append(Table(["layer", "parameter", "step", f"Δ{sym} for\n−step ({su})",
                                 f"Δ{sym} for\n+step ({su})", "note"], trs,
                                ["l", "l", "l", "r", "r", "l"], wrap=(5,),
                                title=f"{name}: {sym} = {format_line(e, u)}"))
        blocks.append(Paragraph(
            "Each layer parameter is changed alone: the thickness by one monolayer (a/2 of the "
            "layer's material), the composition by ±0.01 (x, y as in the alloy family's formula, "
            "e.g. Al(x)Ga(1−x)As, the paths of qwell.design); the changed stack is solved again "
            "with the exact solver. A layer named inside a repeat changes in every period "
            "(×N).", size=8, color="0.25"))
    else:
        blocks.append(Paragraph("No sensitivity table."))
    for n in data.sensitivity_notes:
        blocks.append(Paragraph(n, size=8, bullet="•", color="0.25"))
    blocks += spectra_blocks(data)
    return blocks


def spectra_blocks(data: ReportData) -> list:
    """Absolute spectra: alpha [cm^-1] and per-pass absorption, gain and transparency."""
    spec = data.spectra
    if spec is None or not (spec.panels or spec.notes):
        return []
    n = spec.panels
    title = " and ".join(w for w, on in (("Absorption", spec.absorption is not None),
                                        ("gain", spec.gain is not None)) if on) or "Spectra"
    blocks = [Heading(title.capitalize(), 11.0, keep=190.0 * n + 60.0)]
    rows = spectra_rows(spec)
    if rows:
        blocks.append(Table(["quantity", "value"], rows, ["l", "l"], wrap=(1,)))
    if n:
        # a long stack: alpha drawn where it absorbs (lines inside a miniband lie at mm)
        xlim = absorbing_range_um(spec) if is_long(data.exact) else None
        blocks.append(FigureBlock(190.0 * n, spectra_draw(spec, absorption_xlim_um=xlim)))
    text = []
    if spec.absorption is not None:
        a = spec.absorption
        text.append(f"Intersubband α for light polarised along z, from the populated subbands "
                    f"only ({spec.absorption_basis}); Lorentzian lines of "
                    f"{a.lines[0].linewidth_meV:g} meV FWHM, depolarisation shift included, "
                    f"refractive index {a.refractive_index:g}; α is averaged over the active "
                    "length. The dashed curve is the fraction of p-polarised light absorbed in "
                    "one pass through a 45° polished facet (unpolarised light: half).")
    if spec.gain is not None:
        g = spec.gain
        text.append(f"Interband material gain (TE) from the step-shaped 2-D joint density of "
                    f"states of each subband pair with quasi-Fermi levels of an injected n = p, "
                    f"Lorentzian FWHM {g.linewidth_meV:.3g} meV, at "
                    f"{g.model.temperature_K:g} K. Parabolic in-plane subbands: valence-band "
                    "mixing is not included; carriers in barrier/guide states are not counted; "
                    "excitons are not applied (screened at laser densities). Transparency: the "
                    "density where the peak gain crosses zero.")
    for t in text:
        blocks.append(Paragraph(t, size=8, color="0.25"))
    for note in spec.notes:
        blocks.append(Paragraph(note, size=8, bullet="•", color="0.25"))
    return blocks


def design_cautions(data: ReportData) -> list:
    """The cautions specific to this design (listed under 'For this design')."""
    own = list(data.profile.warnings)
    unconv = [s.label for s in data.exact.states if not s.converged]
    if unconv:
        own.append("states not converged to the tolerance: " + ", ".join(unconv))
    if data.charge is not None:
        own.append("states, transitions and sensitivities use the self-consistent "
                   "(Schrödinger–Poisson) potential of the doping; donors are taken as fully "
                   "ionised unless a donor level is given")
    if any(t.kind == "interband" for t in data.exact.transitions):
        own.append(EXCITON_NOTE)
    if data.warnings:
        n_semi = sum(1 for w in data.warnings if "unreliable" in w)
        other = [w for w in data.warnings if "unreliable" not in w]
        if n_semi:
            own.append(f"semiclassical estimate flagged unreliable for {n_semi} state(s) "
                       "(tunnel-coupled regions); use the exact energies")
        own += other
    return own


def caution_blocks(data: ReportData) -> list:
    """Page 7: cautions (the fixed :data:`CAUTIONS` and this design's warnings)."""
    blocks = [Heading("Cautions")]
    for c in CAUTIONS:
        blocks.append(Paragraph(c, size=9.5, bullet="•"))
    own = design_cautions(data)
    if own:
        blocks.append(Heading("For this design", 11.0))
        for w in own:
            blocks.append(Paragraph(w, size=9, bullet="•"))
    return blocks


def report_pages(data: ReportData) -> list[list[Item]]:
    """Lay out all sections (each starts on a new page); returns the pages' items."""
    flow = Flow()
    sections = [diagram_blocks, stack_blocks, material_blocks, state_blocks, transition_blocks,
                lifetime_blocks, sensitivity_blocks, caution_blocks]
    for k, sec in enumerate(sections):
        if k:
            PageBreak().place(flow)
        for b in sec(data):
            b.place(flow)
    return [p for p in flow.pages if p]



def render_pdf(data: ReportData) -> tuple[bytes, int]:
    """The report as PDF bytes and its page count (nothing written to disk)."""
    pages = report_pages(data)
    meta = {"Title": f"qwell design review: {data.stack.name}",
            "Creator": f"qwell {__version__}", "Subject": "quantum-well design review",
            "CreationDate": data.created_utc}
    footers = [footer_lines(data, i, len(pages)) for i in range(1, len(pages) + 1)]
    return typeset_pdf(pages, footers, meta), len(pages)
