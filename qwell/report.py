"""Design-review reports: a multi-page PDF and a PNG band diagram of one stack.

:func:`build_report` solves a stack with both methods, picks the transitions
to review, estimates each one's sensitivity to growth errors and writes

* ``DIR/<stem>.pdf``: (1) band diagram, (2) stack table and settings,
  (3) material parameters with numbered citations, (4) states, exact and
  semiclassical side by side, (5) transitions with strengths, (6) wavelength
  sensitivity to each layer's thickness (±1 ML) and composition (±0.01) and
  the absorption spectrum, (7) cautions; every page carries a
  reproducibility footer (qwell version, UTC time, SHA-256 of the input,
  temperature, solver settings);
* ``DIR/<stem>.png``: the band diagram (:mod:`qwell.diagram`).

Both files are rendered in memory first and written atomically
(:mod:`qwell.fileio`); a failure leaves no half-written file and the input is
never overwritten.

Pages are laid out by a small flow engine: blocks (headings, paragraphs,
tables, figures) fill A4 pages top to bottom; a table that does not fit
continues on the next page with its header repeated; text is measured with
matplotlib's renderer so that nothing is clipped; no font is below 7 pt.

Units inside: eV, nm, m0, K, kV/cm (see :mod:`qwell.units`).
"""

from __future__ import annotations

import copy
import datetime as _dt
import math
import os
import re
import time
import warnings
from dataclasses import dataclass
from functools import lru_cache
from pathlib import Path

import numpy as np

from . import __version__
from .bands import band_of_label
from .errors import QwellError, QwellWarning, ValidityWarning
from .units import HC_EV_UM

__all__ = [
    "CAUTIONS",
    "DEFAULT_OUT_DIR",
    "ReportResult",
    "ReportData",
    "SensitivityRow",
    "build_report",
    "collect_report_data",
    "default_transitions",
    "sensitivity_rows",
    "footer_lines",
    "report_pages",
    "render_pdf",
    "diagram_blocks",
    "stack_blocks",
    "material_blocks",
    "state_blocks",
    "transition_blocks",
    "sensitivity_blocks",
    "caution_blocks",
]

#: Default output folder of ``qwell report`` (relative to the current directory).
DEFAULT_OUT_DIR = "reports"

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

#: Energy tolerance of the solvers in the report [eV].
REPORT_TOLERANCE_EV = 1e-7

# page geometry (points, A4 portrait)
PAGE_W_PT, PAGE_H_PT = 595.28, 841.89
_MARGIN_L = _MARGIN_R = 46.0
_MARGIN_T = 44.0
_FOOTER_TOP = 46.0            # the footer sits below this height
_BODY_BOTTOM = _FOOTER_TOP + 8.0
_BODY_W = PAGE_W_PT - _MARGIN_L - _MARGIN_R
_MIN_FONT = 7.0
_TABLE_FONT = 8.0
_TEXT_FONT = 9.0

_SIGMA = "·"


# ---------------------------------------------------------------------------
# result objects
# ---------------------------------------------------------------------------
@dataclass(frozen=True)
class ReportResult:
    """What :func:`build_report` wrote.

    Attributes
    ----------
    pdf_path, png_path : pathlib.Path
        The report and the band diagram.
    pages : int
        Number of PDF pages.
    elapsed_s : float
        Wall time of the whole build [s].
    warnings : tuple of str
        Validity warnings raised while solving (also listed in the PDF).
    """

    pdf_path: Path
    png_path: Path
    pages: int
    elapsed_s: float
    warnings: tuple = ()


@dataclass(frozen=True)
class SensitivityRow:
    """Change of one transition's wavelength when one layer parameter changes.

    Attributes
    ----------
    transition : str
        e.g. 'e1-e2'.
    layer : str
        Layer label (a named layer in a repeat changes in every period).
    parameter : str
        'thickness' or 'x(Al)', 'x(In)', ... (fraction of that element on its
        sublattice, traded against the last element of the sublattice).
    step : float
        Size of the change [nm for thickness, 1 for composition].
    step_text : str
        The change as shown, e.g. '1 ML = 0.2827 nm'.
    minus_nm, plus_nm : float or None
        Wavelength change [nm] for -step and +step; None when that side was
        not computed (composition at the end of [0, 1]) or the transition
        does not exist there (see ``note``).
    per_unit_nm : float or None
        Central (or one-sided) difference in nm per step.
    note : str
    """

    transition: str
    layer: str
    parameter: str
    step: float
    step_text: str
    minus_nm: float | None
    plus_nm: float | None
    per_unit_nm: float | None
    note: str = ""


@dataclass(frozen=True)
class ReportData:
    """Everything the pages show (computed once by :func:`collect_report_data`).

    Attributes
    ----------
    stack : qwell.stack.Stack
    profile : qwell.profile.Profile
    exact, semiclassical : qwell.levels.Solution
    chosen : tuple of qwell.optics.Transition
        Transitions reviewed (arrows, sensitivity).
    comparison : list of dict
        :func:`qwell.levels.compare_methods` rows.
    sensitivity : tuple of SensitivityRow
    sensitivity_notes : tuple of str
    warnings : tuple of str
        Distinct warning messages raised while solving.
    created_utc : datetime.datetime
    tolerance_eV : float
    charge : qwell.selfconsistent.SelfConsistentResult or None
        The Schrödinger–Poisson result when the stack is solved self-consistently.
    """

    stack: object
    profile: object
    exact: object
    semiclassical: object
    chosen: tuple
    comparison: list
    sensitivity: tuple
    sensitivity_notes: tuple
    warnings: tuple
    created_utc: _dt.datetime
    tolerance_eV: float = REPORT_TOLERANCE_EV
    charge: object = None


# ---------------------------------------------------------------------------
# computing
# ---------------------------------------------------------------------------
def default_transitions(solution) -> tuple:
    """Transitions reviewed when the user names none.

    The strongest intersubband line from the ground state (flagged
    ``strongest`` by :mod:`qwell.optics`) and the fundamental interband line
    ``e1-hh1``, when they exist.
    """
    out = []
    inter = [t for t in solution.transitions if t.kind == "intersubband" and t.strongest]
    if inter:
        out.append(inter[0])
    for name in ("e1-hh1",):
        for t in solution.transitions:
            if t.name == name:
                out.append(t)
                break
    return tuple(out)


def _energies_by_label(solution) -> dict:
    return {s.label: s.energy_eV for s in solution.states}


def _wavelength_um(energies: dict, t) -> float | None:
    a, b = energies.get(t.initial), energies.get(t.final)
    if a is None or b is None:
        return None
    de = abs(b - a)
    return HC_EV_UM / de if de > 0 else None


# -- stack modification for the sensitivity page -------------------------------
_GROUP_III = ("B", "Al", "Ga", "In", "Tl")
_GROUP_V = ("N", "P", "As", "Sb", "Bi")
_TOKEN = re.compile(r"([A-Z][a-z]?)(\d*\.?\d+)?")


def _formula_tokens(name: str):
    """[(element, fraction text or None)] if ``name`` is a plain III–V formula, else None."""
    pos, out = 0, []
    for m in _TOKEN.finditer(name):
        if m.start() != pos:
            return None
        out.append((m.group(1), m.group(2)))
        pos = m.end()
    if pos != len(name) or not out:
        return None
    if any(el not in _GROUP_III + _GROUP_V for el, _ in out):
        return None
    return out


def composition_parameters(name: str) -> list[tuple[str, int, int]]:
    """Composition parameters of a formula: [(label, token index, partner index)].

    For each sublattice with two or more elements, every element but the
    last one gives a parameter 'x(El)': its fraction, traded against the last
    element of the same sublattice (so the sublattice still sums to 1).
    """
    toks = _formula_tokens(name)
    if toks is None:
        return []
    out = []
    for group in (_GROUP_III, _GROUP_V):
        idx = [i for i, (el, frac) in enumerate(toks) if el in group and frac is not None]
        if len(idx) >= 2:
            for i in idx[:-1]:
                out.append((f"x({toks[i][0]})", i, idx[-1]))
    return out


def shifted_formula(name: str, token: int, partner: int, delta: float) -> str | None:
    """The formula with element ``token`` changed by ``delta`` and ``partner`` by ``-delta``.

    Returns None when a fraction would leave [0, 1].  Decimals: as written,
    at least two.
    """
    toks = _formula_tokens(name)
    if toks is None:
        return None
    nd = max([2] + [len(f.split(".")[1]) for _, f in toks if f and "." in f])
    vals = [None if f is None else float(f) for _, f in toks]
    a = round(vals[token] + delta, nd)
    b = round(vals[partner] - delta, nd)
    if not (0.0 <= a <= 1.0 and 0.0 <= b <= 1.0):
        return None
    vals[token], vals[partner] = a, b
    return "".join(el + ("" if v is None else f"{v:.{nd}f}") for (el, _), v in zip(toks, vals))


def _written_entries(stack):
    """[(path into raw, entry, index of its first expanded layer)] for every written layer."""
    raw = stack.raw
    entries = raw.get("layers") if isinstance(raw, dict) else None
    if not isinstance(entries, list):
        return None
    found = []

    def walk(items, path, idx):
        for k, e in enumerate(items):
            if not isinstance(e, dict):
                raise ValueError("unexpected layer entry")
            if "repeat" in e:
                count = int(e["repeat"])
                start = idx
                after = walk(e.get("layers") or [], path + [k, "layers"], idx)
                idx = start + count * (after - start)
            else:
                found.append((path + [k], e, idx))
                idx += 1
        return idx

    try:
        total = walk(entries, ["layers"], 0)
    except (ValueError, TypeError):
        return None
    if total != len(stack.layers):
        return None
    return found


def _set_in(raw, path, key, value):
    node = raw
    for p in path:
        node = node[p]
    node[key] = value


def _plain(obj):
    """Deep plain-python copy of mappings/sequences (MappingProxyType -> dict)."""
    if hasattr(obj, "items"):
        return {k: _plain(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_plain(v) for v in obj]
    return obj


def _wavelengths_of(stack, pairs, bands, quasi_bound_bands, tolerance_eV) -> dict:
    """{transition name: wavelength [µm] or None} of a (modified) stack, exact solver.

    ``pairs``: (name, initial label, final label).  Only ``bands`` are solved,
    without wavefunctions; quasi-bound states only where a reviewed state is one.
    """
    from .levels import stack_profile
    from .solvers import solve

    prof = stack_profile(stack)
    energies = {}
    for b in bands:
        if b not in prof.bands:
            continue
        lev = solve(prof.bands[b], "exact", tolerance_eV=tolerance_eV, wavefunctions=False,
                    quasi_bound=b in quasi_bound_bands)
        energies.update({s.label: s.energy_eV for s in lev.states})
    out = {}
    for name, ini, fin in pairs:
        a, c = energies.get(ini), energies.get(fin)
        de = None if a is None or c is None else abs(c - a)
        out[name] = HC_EV_UM / de if de else None
    return out


def _design_jobs(stack, composition_step):
    """Sensitivity jobs through :mod:`qwell.design` (its parameter paths and apply_parameters).

    Returns (jobs, notes) with jobs = [(layer label, parameter, step, step text,
    [(sign, make_stack)])], or None when qwell.design is not available.
    """
    try:
        from . import design
    except ImportError:
        return None
    from .errors import ParameterError

    jobs, notes = [], []
    for path, p in design.parameters(stack).items():
        if p.layer is None:
            continue
        copies = sum(1 for L in stack.layers if L.name == p.layer)
        label = p.layer + (f" (×{copies})" if copies > 1 else "")
        if p.kind == "thickness":
            if not p.monolayer_nm:
                notes.append(f"{p.layer}: no lattice constant, so no monolayer step; "
                             "thickness sensitivity not computed")
                continue
            step, text, pname = p.monolayer_nm, f"1 ML = {p.monolayer_nm:.4f} nm", "thickness"
        elif p.kind in ("x", "y"):
            step, text = composition_step, f"±{composition_step:g}"
            pname = f"{p.kind} ({p.family})" if p.family else p.kind
        else:
            continue
        sides = []
        for sgn in (-1, 1):
            v = p.value + sgn * step
            try:
                p.check(v)
            except ParameterError:
                continue
            sides.append((sgn, lambda _p=path, _v=v: design.apply_parameters(stack, {_p: _v})))
        jobs.append((label, pname, step, text, sides))
    named = {p.layer for p in design.parameters(stack).values() if p.layer is not None}
    missing = [L.label for L in stack.layers
               if L.name is None and L.repeat_block is not None and L.label not in named]
    if missing:
        notes.append("unnamed layers inside a repeat block have no parameter path and were not "
                     "varied: " + ", ".join(missing[:8]) + (" …" if len(missing) > 8 else ""))
    return jobs, notes


def _raw_jobs(stack, prof, composition_step):
    """Sensitivity jobs by editing ``stack.raw`` directly (used without qwell.design)."""
    from .stack import stack_from_mapping

    entries = _written_entries(stack)
    if entries is None:
        return None
    jobs, notes = [], []
    base_raw = _plain(stack.raw)

    def maker(path, key, value):
        def make():
            raw = copy.deepcopy(base_raw)
            _set_in(raw, path, key, value)
            return stack_from_mapping(raw, file=stack.path)
        return make

    for path, entry, first in entries:
        layer = stack.layers[first]
        lp = prof.layers[first]
        copies = sum(1 for L in stack.layers if L.name is not None and L.name == layer.name)
        label = layer.label + (f" (×{copies})" if copies > 1 else "")
        ml = lp.monolayer_nm
        if ml:
            sides = [(sgn, maker(path, "thickness", f"{layer.thickness_nm + sgn * ml:.9f} nm"))
                     for sgn in (-1, 1) if layer.thickness_nm + sgn * ml > 0]
            jobs.append((label, "thickness", ml, f"1 ML = {ml:.4f} nm", sides))
        else:
            notes.append(f"{layer.label}: no lattice constant, so no monolayer step; "
                         "thickness sensitivity not computed")
        mat = entry.get("material")
        if layer.grade is not None or not isinstance(mat, str):
            continue
        if mat in (stack.user_materials or {}):
            continue
        for pname, tok, partner in composition_parameters(mat):
            sides = []
            for sgn in (-1, 1):
                new = shifted_formula(mat, tok, partner, sgn * composition_step)
                if new is not None:
                    sides.append((sgn, maker(path, "material", new)))
            jobs.append((label, pname, composition_step, f"±{composition_step:g}", sides))
    return jobs, notes


def sensitivity_rows(stack, chosen, *, profile=None, solution=None,
                     tolerance_eV: float = REPORT_TOLERANCE_EV, composition_step: float = 0.01,
                     use_design: bool = True):
    """Wavelength change of each chosen transition per layer thickness (±1 ML) and composition (±0.01).

    Every layer parameter is changed alone: through :mod:`qwell.design`
    (``parameters`` and ``apply_parameters``, the same paths as ``qwell
    tolerance``) when it is available, otherwise by editing a copy of
    ``stack.raw`` and re-validating it.  A named layer inside a repeat changes
    in every period.  Each changed stack is solved with the exact solver;
    wavelengths come from the state energies, ``λ = hc/|E_f - E_i|``.
    Thickness steps are one monolayer (a/2 of the layer's material); layers
    without a lattice constant, and compositions of graded layers and user
    materials, are skipped (with a note).

    Parameters
    ----------
    stack : qwell.stack.Stack
    chosen : sequence of qwell.optics.Transition
    profile : qwell.profile.Profile, optional
        The stack's profile (saves rebuilding it).
    solution : qwell.levels.Solution, optional
        The stack's exact solution: bands holding a quasi-bound reviewed
        state are solved with quasi-bound states, the others without.
    composition_step : float
        Composition change (fraction).
    use_design : bool
        Use :mod:`qwell.design` if importable (False: always edit the mapping).

    Returns
    -------
    (tuple of SensitivityRow, tuple of str)
        Rows (grouped by transition) and notes.
    """
    from .levels import stack_profile

    chosen = tuple(chosen)
    if not chosen:
        return (), ("no transition chosen: no sensitivity computed",)
    prof = profile if profile is not None else stack_profile(stack)
    plan = _design_jobs(stack, composition_step) if use_design else None
    if plan is None:
        plan = _raw_jobs(stack, prof, composition_step)
    if plan is None:
        return (), ("the stack's layer list could not be mapped for modification: "
                    "no sensitivity computed",)
    jobs, notes = plan
    notes = list(notes)
    pairs = [(t.name, t.initial, t.final) for t in chosen]
    labels = {lab for t in chosen for lab in (t.initial, t.final)}
    bands = sorted({band_of_label(lab) for lab in labels})
    if solution is not None:
        qb = {s.band for s in solution.states if s.label in labels and not s.bound}
    else:
        qb = set(bands)
    base = _wavelengths_of(stack, pairs, bands, qb, tolerance_eV)
    results = {}
    for j, (label, pname, _step, text, sides) in enumerate(jobs):
        for sgn, make in sides:
            try:
                results[(j, sgn)] = _wavelengths_of(make(), pairs, bands, qb, tolerance_eV)
            except QwellError as exc:
                results[(j, sgn)] = None
                notes.append(f"{label} {pname} {'+' if sgn > 0 else '−'}{text.lstrip('±')}: "
                             f"{exc}")

    rows = []
    for t in chosen:
        lam0 = base.get(t.name)
        for j, (label, pname, step, text, _sides) in enumerate(jobs):
            shift = {}
            note = ""
            for sgn in (-1, 1):
                r = results.get((j, sgn))
                if r is None:
                    shift[sgn] = None
                    continue
                lam = r.get(t.name)
                if lam is None or lam0 is None:
                    shift[sgn] = None
                    side = "+" if sgn > 0 else "−"
                    note = (note + "; " if note else "") + f"{side}step: {t.name} not found " \
                        "(a state left the well)"
                else:
                    d = 1e3 * (lam - lam0)
                    shift[sgn] = 0.0 if abs(d) < 5e-4 else d
            mi, pl = shift.get(-1), shift.get(1)
            if mi is not None and pl is not None:
                per = 0.5 * (pl - mi)
            elif pl is not None:
                per = pl
                note = note or "one-sided (+ step only)"
            elif mi is not None:
                per = -mi
                note = note or "one-sided (− step only)"
            else:
                per = None
            rows.append(SensitivityRow(transition=t.name, layer=label, parameter=pname,
                                       step=step, step_text=text, minus_nm=mi, plus_nm=pl,
                                       per_unit_nm=per, note=note))
    return tuple(rows), tuple(dict.fromkeys(notes))


def collect_report_data(stack, *, transitions=None, tolerance_eV: float = REPORT_TOLERANCE_EV,
                        sensitivity: bool = True) -> ReportData:
    """Solve ``stack`` with both methods and gather what the report shows.

    Parameters
    ----------
    stack : qwell.stack.Stack
    transitions : sequence of str, optional
        Transition names to review ('e1-e2', 'e1-hh1'); default
        :func:`default_transitions`.  Unknown names raise ParameterError
        listing the available ones.
    tolerance_eV : float
        Energy tolerance of both solvers [eV].
    sensitivity : bool
        Compute the sensitivity page (the costly part).

    Warnings raised while solving are captured, listed in the report and
    returned in :attr:`ReportData.warnings` (not re-raised here).
    """
    from .levels import compare_methods, prepare_profile, solve_profile
    from .optics import select_transitions

    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", QwellWarning)
        prof, sc = prepare_profile(stack)
        exact = solve_profile(prof, method="exact", transitions=True, tolerance_eV=tolerance_eV)
        semi = solve_profile(prof, method="semiclassical", transitions=False,
                             tolerance_eV=tolerance_eV)
        if transitions:
            chosen = select_transitions(exact.transitions, list(transitions))
        else:
            chosen = default_transitions(exact)
        comparison = compare_methods(exact, semi)
        if sensitivity:
            sens, sens_notes = sensitivity_rows(stack, chosen, profile=prof, solution=exact,
                                                tolerance_eV=tolerance_eV)
        else:
            sens, sens_notes = (), ("sensitivity not computed",)
    msgs = []
    for w in caught:
        if issubclass(w.category, QwellWarning):
            msgs.append(str(w.message))
        else:  # not ours: pass it on unchanged
            warnings.warn_explicit(w.message, w.category, w.filename, w.lineno)
    return ReportData(stack=stack, profile=prof, exact=exact, semiclassical=semi, charge=sc,
                      chosen=tuple(chosen), comparison=comparison, sensitivity=tuple(sens),
                      sensitivity_notes=tuple(sens_notes), warnings=tuple(dict.fromkeys(msgs)),
                      created_utc=_dt.datetime.now(_dt.timezone.utc).replace(microsecond=0),
                      tolerance_eV=tolerance_eV)


# ---------------------------------------------------------------------------
# text measurement and the flow layout
# ---------------------------------------------------------------------------
@lru_cache(maxsize=1)
def _renderer():
    from matplotlib.backends.backend_agg import RendererAgg

    return RendererAgg(10, 10, 72.0)


@lru_cache(maxsize=4)
def _font(bold: bool):
    from matplotlib.font_manager import FontProperties, findfont, get_font

    return get_font(findfont(FontProperties(weight="bold" if bold else "normal")))


@lru_cache(maxsize=4096)
def _char_width(ch: str, bold: bool) -> float:
    """Unhinted advance width of one character at 10 pt [pt] (cached)."""
    try:
        from matplotlib.ft2font import LoadFlags
        flags = LoadFlags.NO_HINTING
    except ImportError:  # matplotlib < 3.10
        from matplotlib.ft2font import LOAD_NO_HINTING as flags

    font = _font(bold)
    font.set_size(100.0, 72.0)
    glyph = font.load_char(ord(ch), flags=flags)
    return glyph.linearHoriAdvance / 65536.0 / 10.0


@lru_cache(maxsize=20000)
def _text_width(text: str, size: float, bold: bool = False) -> float:
    """Width of one line of text [pt] in the default sans font.

    Sum of cached per-character advances (kerning ignored) plus 2 %: never
    narrower than the rendered text, and much faster than measuring each string.
    """
    return 1.02 * size / 10.0 * sum(_char_width(c, bold) for c in str(text))


def _wrap(text: str, width_pt: float, size: float, bold: bool = False) -> list[str]:
    """Greedy word wrap by measured width; words longer than a line are split."""
    limit = width_pt + 0.05   # measured widths are exact sums: allow rounding
    out = []
    for para in str(text).split("\n"):
        words = para.split(" ")
        line = ""
        for w in words:
            cand = w if not line else line + " " + w
            if _text_width(cand, size, bold) <= limit:
                line = cand
                continue
            if line:
                out.append(line)
            while _text_width(w, size, bold) > limit and len(w) > 1:
                k = len(w)
                while k > 1 and _text_width(w[:k], size, bold) > limit:
                    k -= 1
                out.append(w[:k])
                w = w[k:]
            line = w
        out.append(line)
    return out


@dataclass
class _Item:
    kind: str                     # 'text' | 'rect' | 'line' | 'figure'
    x: float = 0.0
    y: float = 0.0                # top (text) or bottom (rect) [pt from the page bottom]
    w: float = 0.0
    h: float = 0.0
    text: str = ""
    size: float = _TEXT_FONT
    bold: bool = False
    ha: str = "left"
    color: str = "black"
    draw: object = None


class _Flow:
    """Places blocks on pages top to bottom; each page is a list of _Item."""

    def __init__(self):
        self.pages: list[list[_Item]] = []
        self.new_page()

    def new_page(self):
        self.pages.append([])
        self.y = PAGE_H_PT - _MARGIN_T

    @property
    def room(self) -> float:
        return self.y - _BODY_BOTTOM

    def ensure(self, h: float):
        if h > self.room and self.y < PAGE_H_PT - _MARGIN_T - 1.0:
            self.new_page()

    def add(self, item: _Item):
        self.pages[-1].append(item)


@dataclass(frozen=True)
class Heading:
    """A bold heading kept on one page with the next ``keep`` points (default three lines)."""

    text: str
    size: float = 13.0
    keep: float = 3 * _TEXT_FONT * 1.35

    def place(self, flow: _Flow):
        lines = _wrap(self.text, _BODY_W, self.size, True)
        h = len(lines) * self.size * 1.3 + 6.0
        flow.ensure(h + self.keep)    # keep with what follows
        flow.y -= 4.0
        for ln in lines:
            flow.add(_Item("text", _MARGIN_L, flow.y, text=ln, size=self.size, bold=True))
            flow.y -= self.size * 1.3
        flow.y -= 2.0


@dataclass(frozen=True)
class Paragraph:
    text: str
    size: float = _TEXT_FONT
    bullet: str = ""
    color: str = "black"
    gap_after: float = 3.0

    def place(self, flow: _Flow):
        indent = _text_width(self.bullet + " ", self.size) if self.bullet else 0.0
        lines = _wrap(self.text, _BODY_W - indent, self.size)
        lh = self.size * 1.3
        for i, ln in enumerate(lines):
            flow.ensure(lh)
            if i == 0 and self.bullet:
                flow.add(_Item("text", _MARGIN_L, flow.y, text=self.bullet, size=self.size,
                               color=self.color))
            flow.add(_Item("text", _MARGIN_L + indent, flow.y, text=ln, size=self.size,
                           color=self.color))
            flow.y -= lh
        flow.y -= self.gap_after


@dataclass(frozen=True)
class Table:
    """A table; ``aligns`` per column ('l' or 'r'); ``wrap`` columns may wrap."""

    headers: list
    rows: list
    aligns: list = None
    wrap: tuple = ()
    size: float = _TABLE_FONT
    title: str = ""
    zebra: bool = True

    def _layout(self):
        n = len(self.headers)
        aligns = self.aligns or ["l"] * n
        pad = 6.0
        for size in (self.size, max(self.size - 0.5, _MIN_FONT), _MIN_FONT):
            widths = []
            for c in range(n):
                cells = [str(r[c]) for r in self.rows] + [str(self.headers[c])]
                widths.append(max(max(_text_width(x, size, i == len(cells) - 1)
                                      for ln in [cell] for x in ln.split("\n"))
                                  for i, cell in enumerate(cells)) + pad)
            if sum(widths) <= _BODY_W:
                return size, widths, aligns
        # still too wide: shrink wrappable columns (or the widest ones) to share the rest
        wrap_cols = list(self.wrap) or sorted(range(n), key=lambda c: -widths[c])[:1]
        fixed = sum(w for c, w in enumerate(widths) if c not in wrap_cols)
        left = max(_BODY_W - fixed, 40.0 * len(wrap_cols))
        share = sum(widths[c] for c in wrap_cols)
        for c in wrap_cols:
            widths[c] = max(left * widths[c] / share, 40.0)
        return size, widths, aligns

    def place(self, flow: _Flow):
        size, widths, aligns = self._layout()
        lh = size * 1.3
        pad = 3.0
        scale = min(1.0, _BODY_W / sum(widths))
        widths = [w * scale for w in widths]
        xs = np.concatenate([[_MARGIN_L], _MARGIN_L + np.cumsum(widths)])

        def cell_lines(text, c, bold=False):
            out = []
            for part in str(text).split("\n"):
                out += _wrap(part, widths[c] - 2 * pad, size, bold)
            return out

        head = [cell_lines(h, c, True) for c, h in enumerate(self.headers)]
        head_h = max(len(x) for x in head) * lh + 4.0

        def put_header(cont: bool):
            if self.title:
                t = self.title + (" (continued)" if cont else "")
                flow.add(_Item("text", _MARGIN_L, flow.y, text=t, size=size + 1, bold=True))
                flow.y -= (size + 1) * 1.35
            for c, lines in enumerate(head):
                for k, ln in enumerate(lines):
                    x = xs[c] + pad if aligns[c] == "l" else xs[c + 1] - pad
                    flow.add(_Item("text", x, flow.y - k * lh, text=ln, size=size, bold=True,
                                   ha="left" if aligns[c] == "l" else "right"))
            flow.y -= head_h
            flow.add(_Item("line", _MARGIN_L, flow.y + 2.0, w=xs[-1] - _MARGIN_L))

        title_h = (size + 1) * 1.35 if self.title else 0.0
        first = [cell_lines(x, c) for c, x in enumerate(self.rows[0])] if self.rows else [[""]]
        flow.ensure(title_h + head_h + max(len(x) for x in first) * lh + 2.0)
        put_header(False)
        for i, row in enumerate(self.rows):
            cells = [cell_lines(x, c) for c, x in enumerate(row)]
            rh = max(len(x) for x in cells) * lh + 1.0
            if rh > flow.room:
                flow.add(_Item("line", _MARGIN_L, flow.y + 1.0, w=xs[-1] - _MARGIN_L))
                flow.new_page()
                put_header(True)
            if self.zebra and i % 2 == 1:
                flow.add(_Item("rect", _MARGIN_L, flow.y - rh + 1.5 + 0.25 * lh,
                               w=xs[-1] - _MARGIN_L, h=rh, color="0.93"))
            for c, lines in enumerate(cells):
                for k, ln in enumerate(lines):
                    x = xs[c] + pad if aligns[c] == "l" else xs[c + 1] - pad
                    flow.add(_Item("text", x, flow.y - k * lh, text=ln, size=size,
                                   ha="left" if aligns[c] == "l" else "right"))
            flow.y -= rh
        flow.add(_Item("line", _MARGIN_L, flow.y + 1.0, w=xs[-1] - _MARGIN_L))
        flow.y -= 8.0


@dataclass(frozen=True)
class FigureBlock:
    """A drawing of ``height`` points: ``draw(fig, rect_in_figure_fractions)``."""

    height: float
    draw: object

    def place(self, flow: _Flow):
        h = min(self.height, PAGE_H_PT - _MARGIN_T - _BODY_BOTTOM)
        flow.ensure(h)
        flow.add(_Item("figure", _MARGIN_L, flow.y - h, w=_BODY_W, h=h, draw=self.draw))
        flow.y -= h + 6.0


@dataclass(frozen=True)
class PageBreak:
    def place(self, flow: _Flow):
        if flow.pages[-1]:
            flow.new_page()


# ---------------------------------------------------------------------------
# formatting helpers
# ---------------------------------------------------------------------------
def _f(v, spec: str, none: str = "—") -> str:
    if v is None or (isinstance(v, float) and not math.isfinite(v)):
        return none
    return format(v, spec)


def _composition_text(material: str) -> str:
    try:
        from .materials import parse_formula

        fam, comp = parse_formula(material)
    except Exception:
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
        parts.append(f"n sheet {d.sheet_cm2:.3g} cm⁻²")
    if d.sheet_acceptors_cm2:
        parts.append(f"p sheet {d.sheet_acceptors_cm2:.3g} cm⁻²")
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
    return [line1, line2, _solver_text(data)]


# ---------------------------------------------------------------------------
# pages
# ---------------------------------------------------------------------------
def _transition_energy_text(t) -> str:
    return f"{t.energy_eV:.6f}"


def diagram_blocks(data: ReportData) -> list:
    """Page 1: title, band diagram, the chosen transitions."""
    from .diagram import draw_band_diagram

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
        draw_band_diagram(fig, data.profile, data.exact.levels, transitions=data.chosen, rect=rect)

    blocks.append(FigureBlock(470.0, draw))
    if data.chosen:
        rows = [[t.name, t.kind, _transition_energy_text(t), f"{t.wavelength_um:.5f}",
                 f"{t.wavenumber_cm1:.2f}"] for t in data.chosen]
        blocks.append(Table(["transition", "kind", "energy (eV)", "λ (µm)", "wavenumber (cm⁻¹)"],
                            rows, ["l", "l", "r", "r", "r"], title="Transitions reviewed"))
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
    import math
    ef = sc.fermi_level_eV
    occ = ", ".join(f"{k} {v:.3g} cm⁻²" for k, v in sc.sheet_densities_cm2.items() if v > 1e6)
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
    for L, lp in zip(st.layers, prof.layers):
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
    blocks = [Heading("Layer stack"),
              Table(headers, rows, aligns, wrap=wrap, title="Layers in growth order"),
              Paragraph("ML: thickness in monolayers of the layer's material (a/2 on (001)). "
                        "Strain: pseudomorphic in-plane strain to the substrate (negative = "
                        "compressive). h_c: Matthews–Blakeslee critical thickness.",
                        size=8, color="0.25")]
    settings = [
        ["name", st.name],
        ["file", str(st.path) if st.path else "(in memory)"],
        ["SHA-256 of the file", st.sha256 or "n/a"],
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
]


def _distinct_materials(data: ReportData):
    """[(label, Material)] for every distinct material (grade ends included)."""
    from .materials import get_material

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
                    out.setdefault(name, get_material(name, st.temperature_K, st.user_materials))
        except QwellError:
            continue
    if st.substrate and st.substrate not in out:
        try:
            out[st.substrate + " (substrate)"] = get_material(st.substrate, st.temperature_K,
                                                              st.user_materials)
        except QwellError:
            pass
    return list(out.items())


def _citations_of(mat, field_name):
    """Full citation strings of one parameter of one material."""
    from .materials import citation

    key = (getattr(mat, "sources", None) or {}).get(field_name)
    if key:
        out = []
        for k in str(key).split("+"):
            k = k.strip()
            if k == "user":
                out.append("user-defined value in the stack file (no published source)")
                continue
            try:
                out.append(citation(k))
            except Exception:
                out.append(k)
        return out
    try:
        src = mat.parameter_sources().get(field_name)
    except Exception:
        src = None
    return [src] if src else []


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
                try:
                    v = m.parameters().get(key)
                except Exception:
                    v = getattr(m, key, None)
                if v is None:
                    vals.append("—")
                    continue
                any_val = True
                refs = ",".join(str(num(c)) for c in _citations_of(m, key))
                vals.append(f"{format(v, spec)} [{refs}]" if refs else format(v, spec))
            if any_val:
                rows.append([label, unit] + vals)
        blocks.append(Table(["parameter", "unit"] + [k for k, _ in part], rows,
                            ["l", "l"] + ["r"] * len(part), wrap=tuple(range(2, 2 + len(part))),
                            title="Parameters used" if g0 == 0 else ""))
    blocks.append(Paragraph("Numbers in brackets refer to the sources below. Alloy values are "
                            "interpolated from the binaries as the first source describes; band "
                            "edges are unstrained (strain shifts appear in the band diagram).",
                            size=8, color="0.25"))
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
    rows = []
    for r in data.comparison:
        s = exact_states.get(r["label"])
        w = semi_states.get(r["label"])
        status = ""
        if s is not None:
            status = "bound" if s.bound else "quasi-bound"
            if s.lifetime_s is not None:
                status += f", τ = {s.lifetime_s:.3g} s"
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
                            ["l", "l", "r", "r", "r", "r", "l", "l"], wrap=(6, 7)))
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
                              f"{m.top_eV:.6f}", f"{1e3 * m.width_eV:.3f}", f"{m.period_nm:.3f}"]
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


def transition_blocks(data: ReportData) -> list:
    """Page 5: transitions with energies, wavelengths and strengths."""
    blocks = [Heading("Optical transitions")]
    trans = data.exact.transitions
    chosen = {t.name for t in data.chosen}
    inter = [t for t in trans if t.kind == "intersubband"]
    band = [t for t in trans if t.kind == "interband"]
    if inter:
        rows = [[("» " if t.name in chosen else "") + t.name, f"{t.energy_eV:.6f}",
                 f"{t.wavelength_um:.5f}", f"{t.wavenumber_cm1:.2f}", f"{t.frequency_THz:.3f}",
                 _f(t.dipole_nm, ".4f"), _f(t.oscillator_strength, ".4f")] for t in inter]
        blocks.append(Table(["transition", "energy\n(eV)", "λ\n(µm)", "wavenumber\n(cm⁻¹)",
                             "frequency\n(THz)", "dipole\n|⟨i|z|j⟩| (nm)", "oscillator\nstrength f"],
                            rows, ["l"] + ["r"] * 6,
                            title="Intersubband (strongest first)"))
    if band:
        rows = [[("» " if t.name in chosen else "") + t.name, f"{t.energy_eV:.6f}",
                 f"{t.wavelength_um:.5f}", f"{t.wavenumber_cm1:.2f}", _f(t.overlap, ".4f"),
                 _f(t.te, ".4f"), _f(t.tm, ".4f"), "yes" if t.strongest else ""] for t in band]
        blocks.append(Table(["transition", "energy\n(eV)", "λ\n(µm)", "wavenumber\n(cm⁻¹)",
                             "overlap\n|⟨e|h⟩|²", "TE", "TM", "Δn = 0"], rows,
                            ["l"] + ["r"] * 6 + ["l"], title="Interband (strongest first)"))
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
        from .optics import EXCITON_NOTE
        blocks.append(Paragraph("Interband: " + EXCITON_NOTE + ".", size=8, color="0.25"))
    return blocks


def _spectrum_draw(data: ReportData):
    """Draw function for the absorption spectra (one panel per transition kind)."""
    from .optics import spectrum

    trans = data.exact.transitions
    kinds = [k for k in ("intersubband", "interband") if any(t.kind == k for t in trans)]
    chosen = {t.name for t in data.chosen}

    def draw(fig, rect):
        left, bottom, width, height = rect
        n = len(kinds)
        gap = 0.06 * height
        ph = (height - gap * (n - 1)) / max(n, 1)
        styles = ("--", ":", "-.", (0, (5, 1, 1, 1)))
        for i, kind in enumerate(kinds):
            lines = [t for t in trans if t.kind == kind]
            spec = spectrum(lines, linewidth_meV=10.0)
            b = bottom + (n - 1 - i) * (ph + gap)
            ax = fig.add_axes((left + 0.1 * width, b + 0.22 * ph, 0.86 * width, 0.68 * ph))
            ax.plot(spec.wavelength_um, spec.absorption, color="black", lw=1.3)
            ax.set_xlim(float(np.min(spec.wavelength_um)), float(np.max(spec.wavelength_um)))
            ax.set_ylim(0, 1.25)
            ax.set_xlabel("wavelength (µm)", fontsize=8)
            ax.set_ylabel("absorption (peak = 1)", fontsize=8)
            ax.tick_params(labelsize=8)
            what = ("intersubband, weight f" if kind == "intersubband"
                    else "interband, TE weight; excitons not included")
            ax.set_title(f"{what}; Lorentzian lines, FWHM 10 meV", fontsize=8)
            k = 0
            marks = []
            for t in lines:
                if t.name not in chosen:
                    continue
                ax.axvline(t.wavelength_um, color="#0072B2", ls=styles[k % len(styles)], lw=1.0)
                marks.append((t.wavelength_um, t.name))
                k += 1
            if marks:
                from .diagram import spread_positions
                xs = np.array([m[0] for m in marks])
                lo, hi = ax.get_xlim()
                ax_w_pt = 0.86 * width * fig.get_figwidth() * 72.0
                gap_data = 60.0 / ax_w_pt * (hi - lo)
                pos = spread_positions(xs, gap_data, lo + 0.5 * gap_data, hi - 0.5 * gap_data)
                for (_x, name), px in zip(marks, pos):
                    ax.text(px, 1.12, name, ha="center", va="center", fontsize=8,
                            color="#0072B2", parse_math=False)
    return draw, len(kinds)


def sensitivity_blocks(data: ReportData) -> list:
    """Page 6: wavelength sensitivity table and the absorption spectrum."""
    blocks = [Heading("Sensitivity to growth errors")]
    if data.sensitivity:
        by_t = {}
        for r in data.sensitivity:
            by_t.setdefault(r.transition, []).append(r)
        lam0 = {t.name: t.wavelength_um for t in data.chosen}
        for name, rows in by_t.items():
            trs = [[r.layer, r.parameter, r.step_text, _f(r.minus_nm, "+.2f", "—"),
                    _f(r.plus_nm, "+.2f", "—"), r.note] for r in rows]
            blocks.append(Table(["layer", "parameter", "step", "Δλ for\n−step (nm)",
                                 "Δλ for\n+step (nm)", "note"], trs,
                                ["l", "l", "l", "r", "r", "l"], wrap=(5,),
                                title=f"{name}: λ = {lam0.get(name, float('nan')):.5f} µm"))
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
    draw, n = _spectrum_draw(data)
    if n:
        blocks.append(Heading("Absorption spectrum", 11.0, keep=190.0 * n))
        blocks.append(FigureBlock(190.0 * n, draw))
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
        from .optics import EXCITON_NOTE
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


def report_pages(data: ReportData) -> list[list[_Item]]:
    """Lay out all sections (each starts on a new page); returns the pages' items."""
    flow = _Flow()
    sections = [diagram_blocks, stack_blocks, material_blocks, state_blocks, transition_blocks,
                sensitivity_blocks, caution_blocks]
    for k, sec in enumerate(sections):
        if k:
            PageBreak().place(flow)
        for b in sec(data):
            b.place(flow)
    return [p for p in flow.pages if p]


def _render_page(items, footer, pdf):
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure
    from matplotlib.lines import Line2D
    from matplotlib.patches import Rectangle

    fig = Figure(figsize=(PAGE_W_PT / 72.0, PAGE_H_PT / 72.0), dpi=72)
    FigureCanvasAgg(fig)
    W, H = PAGE_W_PT, PAGE_H_PT
    for it in items:
        if it.kind == "text":
            fig.text(it.x / W, it.y / H, it.text, fontsize=it.size, ha=it.ha, va="top",
                     fontweight="bold" if it.bold else "normal", color=it.color,
                     parse_math=False)
        elif it.kind == "line":
            fig.add_artist(Line2D([it.x / W, (it.x + it.w) / W], [it.y / H, it.y / H],
                                  lw=0.6, color="0.3", transform=fig.transFigure))
        elif it.kind == "rect":
            fig.add_artist(Rectangle((it.x / W, it.y / H), it.w / W, it.h / H, lw=0,
                                     facecolor=it.color, transform=fig.transFigure, zorder=-1))
        elif it.kind == "figure":
            it.draw(fig, (it.x / W, it.y / H, it.w / W, it.h / H))
    fig.add_artist(Line2D([_MARGIN_L / W, (W - _MARGIN_R) / W], [_FOOTER_TOP / H] * 2, lw=0.5,
                          color="0.5", transform=fig.transFigure))
    y = _FOOTER_TOP - 4.0
    for ln in footer:
        for sub in _wrap(ln, _BODY_W, _MIN_FONT):
            fig.text(_MARGIN_L / W, y / H, sub, fontsize=_MIN_FONT, va="top", color="0.25",
                     parse_math=False)
            y -= _MIN_FONT * 1.3
    pdf.savefig(fig)


def render_pdf(data: ReportData) -> tuple[bytes, int]:
    """The report as PDF bytes and its page count (nothing written to disk)."""
    import io

    import matplotlib
    from matplotlib.backends.backend_pdf import PdfPages

    pages = report_pages(data)
    buf = io.BytesIO()
    meta = {"Title": f"qwell design review: {data.stack.name}",
            "Creator": f"qwell {__version__}", "Subject": "quantum-well design review",
            "CreationDate": data.created_utc}
    with matplotlib.rc_context({"pdf.fonttype": 3, "axes.unicode_minus": False}):
        with PdfPages(buf, metadata=meta) as pdf:
            for i, items in enumerate(pages, 1):
                _render_page(items, footer_lines(data, i, len(pages)), pdf)
    return buf.getvalue(), len(pages)


# ---------------------------------------------------------------------------
# the whole report
# ---------------------------------------------------------------------------
def _stem(stack) -> str:
    if stack.path:
        return Path(stack.path).stem
    s = re.sub(r"[^A-Za-z0-9_.-]+", "-", str(stack.name)).strip("-.")
    return s or "stack"


def _output_dir(out_dir, create: bool | None) -> Path:
    d = Path(out_dir)
    if create is None:
        create = d == Path(DEFAULT_OUT_DIR)
    if d.exists():
        if not d.is_dir():
            raise QwellError(f"output folder {d} is not a folder; expected a directory")
        return d
    if not create:
        raise QwellError(f"output folder {d} does not exist; create it or leave out -o to "
                         f"write to {DEFAULT_OUT_DIR}/")
    try:
        d.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise QwellError(f"cannot create output folder {d} ({exc.strerror or exc})") from None
    return d


def build_report(stack, *, transitions=None, out_dir=DEFAULT_OUT_DIR,
                 create_out_dir: bool | None = None) -> ReportResult:
    """Write the design-review PDF and the band-diagram PNG of a stack.

    Parameters
    ----------
    stack : qwell.stack.Stack or path
        The stack (a path is loaded with :func:`qwell.stack.load_stack`).
    transitions : sequence of str, optional
        Transitions to review, e.g. ``['e1-e2']``; default
        :func:`default_transitions`.
    out_dir : str or Path
        Output folder (default ``reports`` in the current directory).
    create_out_dir : bool, optional
        Create a missing folder; default: only for the default folder (a
        user-given folder must exist).

    Returns
    -------
    ReportResult

    Raises
    ------
    QwellError
        Missing or unwritable output folder, or bad input (one-line message).

    Validity warnings raised while solving are listed in the report and, in
    summary, re-issued as one :class:`~qwell.errors.ValidityWarning`.
    """
    from .diagram import band_diagram_png
    from .fileio import atomic_write_bytes

    t0 = time.perf_counter()
    if isinstance(stack, (str, os.PathLike)):
        from .stack import load_stack
        stack = load_stack(stack)
    d = _output_dir(out_dir, create_out_dir)
    if not os.access(d, os.W_OK | os.X_OK):
        raise QwellError(f"output folder {d} is not writable")
    data = collect_report_data(stack, transitions=transitions)
    pdf_bytes, pages = render_pdf(data)
    title = f"{stack.name}  (T = {stack.temperature_K:g} K)"
    png_bytes = band_diagram_png(data.profile, data.exact.levels, transitions=data.chosen,
                                 title=title)
    stem = _stem(stack)
    pdf_path, png_path = d / f"{stem}.pdf", d / f"{stem}.png"
    protect = [stack.path] if stack.path else []
    pdf_existed = pdf_path.exists()
    try:
        atomic_write_bytes(pdf_path, pdf_bytes, protect=protect)
        try:
            atomic_write_bytes(png_path, png_bytes, protect=protect)
        except BaseException:
            if not pdf_existed:
                try:
                    pdf_path.unlink()
                except OSError:
                    pass
            raise
    except QwellError:
        raise
    except OSError as exc:
        raise QwellError(f"cannot write the report into {d} "
                         f"({exc.strerror or type(exc).__name__})") from None
    if data.warnings:
        warnings.warn(f"{len(data.warnings)} validity warning(s) while solving {stack.name!r}; "
                      f"they are listed on the cautions page of {pdf_path}", ValidityWarning,
                      stacklevel=2)
    return ReportResult(pdf_path=pdf_path, png_path=png_path, pages=pages,
                        elapsed_s=time.perf_counter() - t0, warnings=data.warnings)

