"""What every command shares: stack loading, tables, number formats, JSON printing.

Nothing here holds state between calls; the options of one invocation are
passed in as arguments.
"""

from __future__ import annotations

import argparse
import json
import math
import sys
import warnings
from dataclasses import replace

import numpy as np

from ..constants import HBAR2_2M0_EV_NM2
from ..errors import ConvergenceError, QwellError, StackError, ValidityWarning
from ..levels import prepare_profile
from ..materials import load_library
from ..profile import band_profile
from ..solvers._transfer import BASE_STEP_NM
from ..solvers.exact import output_step_nm
from ..spectral import UNITS, parse_unit
from ..stack import load_stack
from ..units import format_exponent

__all__ = ["EXIT_USAGE", "load", "profile_and_charge", "print_self_consistent", "print_json",
           "print_warnings", "print_stack_warnings",
           "table", "fmt", "unit_text", "add_self_consistent_option", "add_library_option",
           "add_unit_option", "check_work", "estimate_bound_states", "estimate_state_bytes",
           "MAX_STATE_BYTES",
           "MAX_SOLVED_LAYERS", "locate_error"]

#: Exit status of every user error (bad input, bad option).
EXIT_USAGE = 2


def add_self_consistent_option(parser) -> None:
    """Add ``--self-consistent`` to a command that loads a stack."""
    parser.add_argument("--self-consistent", action="store_true",
                        help="solve Schrödinger–Poisson with the stack's doping first "
                             "(also set by 'self_consistent: true' in the stack)")


#: Most memory [bytes] the states of one band of an accepted stack may take, estimated
#: before any solve (:func:`estimate_state_bytes`): 256 MiB, about 1,500 states on the
#: solver's 20,000-point output grid; beyond it the states, envelopes and transitions would
#: need more than ~1 GB and minutes.
MAX_STATE_BYTES = 256 * 1024 ** 2
#: Cladding tail of the output grid on each side, at most [nm] (the exact solver's cap).
_TAIL_NM = 60.0
#: Refinement level of sliced (graded, tilted) pieces: 2**level slices per BASE_STEP_NM
#: (the least the exact solver refines to before it checks the tolerance).
_SLICE_LEVEL = 2
#: Most expanded layers a command solves (the loader alone accepts more): the solve time
#: grows with the layer count, and 2,500 layers stay within ~30 s for ``levels``.
MAX_SOLVED_LAYERS = 2500


def estimate_bound_states(band) -> float:
    """Semiclassical count of the bound states of a band (no solve).

    N ≈ Σ ceil((1/π) ∫ sqrt(2 m(z) (E_lim - V(z))) / ħ dz) over each run of pieces below
    E_lim (a well, or wells with no barrier reaching E_lim between them), E_lim the lower
    cladding edge, evaluated at the middle of every piece: the Bohr-Sommerfeld phase
    integral, rounded up per well as the finite square well's count is (common practice,
    no source).
    """
    starts = np.array([p.z_start_nm for p in band.pieces])
    ends = np.array([p.z_end_nm for p in band.pieces])
    if starts.size == 0:
        return 0.0
    mid = 0.5 * (starts + ends)
    depth = np.maximum(band.confinement_limit_eV - band.potential(mid), 0.0)
    k = np.sqrt(np.abs(band.edge_mass(mid)) * depth / HBAR2_2M0_EV_NM2)
    phase = k * (ends - starts) / math.pi
    # runs of consecutive pieces below the limit: one well (or coupled wells) each
    inside = depth > 0
    run = np.cumsum(np.concatenate([[inside[0]], inside[1:] & ~inside[:-1]]))
    per_run = np.bincount(run[inside], weights=phase[inside]) if np.any(inside) else np.zeros(0)
    return float(np.sum(np.ceil(per_run[per_run > 0] - 1e-9)))


def estimate_state_bytes(band, grid_step_nm: float = 0.02) -> tuple[float, float]:
    """``(bytes, states)``: memory of a band's states with wavefunctions, estimated (no solve).

    bytes = states x (output grid points + 2 x slice boundaries) x 8: each state's sampled
    envelope on the output grid (:func:`qwell.solvers.exact.output_step_nm`, at most 20,000
    points plus the cladding tails) and its stored solution at the slice boundaries
    (two numbers each; a flat piece is one slice, a graded or tilted piece
    ``max(2, ceil(t / 0.5 nm)) * 4``), in float64; states from
    :func:`estimate_bound_states`.
    """
    n = estimate_bound_states(band)
    step = output_step_nm(band, grid_step_nm)
    grid = (band.z_end_nm - band.z_start_nm) / step + len(band.pieces) + 2 * _TAIL_NM / step
    slices = sum(1 if p.kind == "flat" else
                 max(2, math.ceil(p.thickness_nm / BASE_STEP_NM)) * 2 ** _SLICE_LEVEL
                 for p in band.pieces)
    return n * (grid + 2.0 * (slices + 1)) * 8.0, n


def check_work(stack) -> None:
    """Refuse a stack whose states (estimated on the flat-band profile) would take more than
    :data:`MAX_STATE_BYTES` in any band, before any solve or allocation.

    Raises
    ------
    StackError
        Naming the file, the band, the estimate and the limit.
    """
    if len(stack.layers) > MAX_SOLVED_LAYERS:
        raise StackError(f"{len(stack.layers):,} layers after expanding the repeats, above the "
                         f"limit of {MAX_SOLVED_LAYERS:,} for a solve (about 10 s per 1,000 "
                         "layers); expected fewer periods", file=stack.path, key="layers")
    prof = band_profile(stack)
    for name, band in prof.bands.items():
        nbytes, n = estimate_state_bytes(band)
        if nbytes > MAX_STATE_BYTES:
            raise StackError(f"the {name.replace('_', ' ')} band would hold about {n:,.0f} bound "
                             f"states taking about {nbytes:,.0f} bytes, above the limit of "
                             f"{MAX_STATE_BYTES:,} bytes (states x grid points x 8 bytes plus "
                             "the stored transfer solutions); expected thinner wells, fewer "
                             "periods or lighter masses", file=stack.path, key="layers")


def add_library_option(parser) -> None:
    """Add ``--library FILE`` (repeatable) to a command that loads a stack."""
    parser.add_argument("--library", action="append", default=[], metavar="FILE",
                        help="material library (YAML, see 'qwell materials --check'); "
                             "repeatable, applied after the stack's own 'library:' files, later "
                             "ones win")


def _unit_choice(text: str) -> str:
    try:
        return parse_unit(text)
    except ValueError as exc:  # argparse turns this into one line and exit 2
        raise argparse.ArgumentTypeError(str(exc).split(": ", 1)[1]) from None


def add_unit_option(parser) -> None:
    """Add ``--unit`` (photon unit of printed lines) to a command that prints lines."""
    parser.add_argument("--unit", type=_unit_choice, default=None, metavar="|".join(UNITS),
                        help="photon unit of printed lines and spreads (default: by spectral "
                             "region: nm below 2 µm, µm to 30 µm, THz with meV beyond)")


def load(path, self_consistent: bool = False, libraries=()):
    """Load a stack; ``self_consistent`` (the ``--self-consistent`` flag) switches on the
    charged path as if the stack said ``self_consistent: true``; ``libraries`` (``--library``)
    are applied after the stack's own.  A library's check warnings (Kane-mass disagreement)
    are issued as :class:`~qwell.errors.ValidityWarning`."""
    for lib in libraries or ():
        load_library(lib)  # a bad --library file is named first (file:line:key), not via the stack
    stack = load_stack(path, libraries=tuple(libraries or ()))
    for issue in stack.material_set.warnings:
        warnings.warn(f"material library {issue}", ValidityWarning, stacklevel=2)
    check_work(stack)
    if self_consistent and not stack.self_consistent:
        stack = replace(stack, self_consistent=True,
                        raw={**dict(stack.raw), "self_consistent": True})
    return stack


def profile_and_charge(stack, *, quiet: bool):
    """``(profile, sc)`` of a stack (see :func:`qwell.levels.prepare_profile`).

    Unless ``quiet`` (JSON output), a self-consistent result is summarised on
    stdout first.
    """
    prof, sc = prepare_profile(stack)
    if sc is not None and not quiet:
        print_self_consistent(sc)
    return prof, sc


def print_self_consistent(sc, blank: bool = True) -> None:
    """Iterations, residuals, Fermi level and occupied sheet densities, then (``blank``) a
    blank line."""
    ef = sc.fermi_level_eV
    print(f"self-consistent (Schrödinger–Poisson): {sc.iterations} iterations, residual "
          f"{sc.residual_meV:.3g} meV, charge residual {sc.charge_residual:.2g}, Fermi level "
          + ("not defined (no charge)" if ef is None or math.isnan(ef) else f"{ef:.6f} eV"))
    occ = {k: v for k, v in sc.sheet_densities_cm2.items() if v > 0}
    if occ:
        print("sheet densities: " + ", ".join(f"{k} {format_exponent(v)} cm⁻²"
                                              for k, v in occ.items()))
    if blank:
        print()


def print_warnings(messages) -> None:
    """Model warnings of a profile: on stderr, each once, in the order given."""
    for w in dict.fromkeys(messages):
        print(f"warning: {w}", file=sys.stderr)


def print_stack_warnings(stack) -> None:
    """The flat-band profile's warnings of a stack (strain, offsets) on stderr, each once."""
    print_warnings(band_profile(stack).warnings)


def print_json(obj) -> None:
    """Write ``obj`` as indented JSON to stdout; non-finite floats become null."""
    def default(o):
        if isinstance(o, np.ndarray):
            return o.tolist()
        if isinstance(o, (np.floating, np.integer)):
            return o.item()
        raise TypeError(type(o).__name__)

    def clean(o):
        if isinstance(o, float) and not math.isfinite(o):
            return None
        if isinstance(o, dict):
            return {k: clean(v) for k, v in o.items()}
        if isinstance(o, (list, tuple)):
            return [clean(v) for v in o]
        return o

    json.dump(clean(obj), sys.stdout, indent=1, default=default)
    sys.stdout.write("\n")


def table(rows, headers, aligns=None) -> str:
    """Plain-text table: a header line, a rule, one line per row; ``None`` cells empty."""
    rows = [[("" if c is None else str(c)) for c in r] for r in rows]
    widths = [max([len(h)] + [len(r[i]) for r in rows]) for i, h in enumerate(headers)]
    aligns = aligns or ["<"] * len(headers)

    def line(r):
        return "  ".join(f"{c:{a}{w}}" for c, a, w in zip(r, aligns, widths)).rstrip()
    out = [line(headers), line(["-" * w for w in widths])]
    out += [line(r) for r in rows]
    return "\n".join(out)


def fmt(v, spec=".6g", none="—") -> str:
    """``format(v, spec)``; ``none`` for None or non-finite; no '-0.000' from rounding noise."""
    if v is None or (isinstance(v, float) and not math.isfinite(v)):
        return none
    text = format(v, spec)
    if text.startswith("-") and not any(ch in "123456789" for ch in text.split("e")[0]):
        text = ("+" if "+" in spec else "") + text[1:]
    return text


def unit_text(unit) -> str:
    """' nm' for a unit, '' for a plain fraction."""
    return "" if unit == "fraction" else f" {unit}"


def locate_error(exc, stack_path):
    """A self-consistent failure (no neutral Fermi level, no convergence) as a StackError that
    points at the stack file and its first doped layer; other errors unchanged."""
    if not isinstance(exc, ConvergenceError) or not stack_path:
        return exc
    line, key = None, "self_consistent"
    try:
        stack = load_stack(stack_path)
        doped = next((lay for lay in stack.layers if lay.doping is not None), None)
        if doped is not None:
            where = f"layers[{doped.index}]" if not stack.repeats else doped.label
            line, key = doped.line, f"{where}.doping"
    except QwellError:
        pass
    located = StackError(str(exc), file=str(stack_path), line=line, key=key)
    located.history = list(getattr(exc, "history", []) or [])
    return located
