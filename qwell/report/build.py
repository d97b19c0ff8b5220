"""Writing a design-review report: the PDF and the PNG band diagram of one stack.

:func:`build_report` collects the data (:mod:`qwell.report.data`), renders
the pages (:mod:`qwell.report.pages`) and the band diagram
(:mod:`qwell.diagram`) in memory and writes both files atomically
(:mod:`qwell.fileio`): a failure leaves no half-written file and the input
is never overwritten.
"""

from __future__ import annotations

import os
import re
import time
import warnings
from dataclasses import dataclass, replace
from pathlib import Path

from ..diagram import band_diagram_png
from ..errors import QwellError, ValidityWarning, one_line
from ..fileio import OutputGroup, atomic_write_bytes, os_error_text
from ..stack import load_stack
from .data import collect_report_data
from .layout import drawable
from .pages import render_pdf

__all__ = ["DEFAULT_OUT_DIR", "ReportResult", "build_report"]

#: Default output folder of ``qwell report`` (relative to the current directory).
DEFAULT_OUT_DIR = "reports"


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
    line : qwell.design.line.DesignLine or None
        The design line the report reviews (first of its transitions).
    """

    pdf_path: Path
    png_path: Path
    pages: int
    elapsed_s: float
    warnings: tuple[str, ...] = ()
    line: object = None



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
    return d


def _create_dir(d: Path) -> list:
    """Create ``d`` (and missing parents); returns the folders created, deepest first."""
    made = []
    p = d
    while not p.exists():
        made.append(p)
        if p.parent == p:
            break
        p = p.parent
    try:
        d.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise QwellError(f"cannot create output folder {one_line(str(d))} "
                         f"({os_error_text(exc)})") from None
    return made


def build_report(stack, *, transitions=None, out_dir=DEFAULT_OUT_DIR,
                 create_out_dir: bool | None = None, unit: str | None = None) -> ReportResult:
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
    unit : str, optional
        Photon unit of lines and shifts; default: each line's spectral region.

    Returns
    -------
    ReportResult

    Raises
    ------
    QwellError
        Missing or unwritable output folder, or bad input (one-line message).

    Validity warnings raised while solving are listed in the report and, in
    summary, re-issued as one :class:`~qwell.errors.ValidityWarning`.

    Examples
    --------
    >>> import tempfile
    >>> from qwell import build_report, load_stack
    >>> res = build_report(load_stack("layers/lwir-detector.yaml"),
    ...                    out_dir=tempfile.mkdtemp())   # doctest: +SKIP
    >>> res.pdf_path.name                                 # doctest: +SKIP
    'lwir-detector.pdf'
    """
    t0 = time.perf_counter()
    if isinstance(stack, (str, os.PathLike)):
        stack = load_stack(stack)
    d = _output_dir(out_dir, create_out_dir)
    if d.exists() and not os.access(d, os.W_OK | os.X_OK):
        raise QwellError(f"output folder {one_line(str(d))} is not writable")
    # characters the page font lacks (an emoji) are drawn as '?' in every title
    stack = replace(stack, name=drawable(stack.name))
    data = collect_report_data(stack, transitions=transitions, unit=unit)
    pdf_bytes, pages = render_pdf(data)
    title = f"{stack.name}  (T = {stack.temperature_K:g} K)"
    png_bytes = band_diagram_png(data.profile, data.exact.levels, transitions=data.chosen,
                                 title=title, fermi_level_eV=data.fermi_level_eV)
    stem = _stem(stack)
    pdf_path, png_path = d / f"{stem}.pdf", d / f"{stem}.png"
    protect = [stack.path] if stack.path else []
    # the default folder is created only now that both files are rendered, and removed
    # again if writing fails; both files are committed together or not at all
    made = _create_dir(d)
    try:
        with OutputGroup([pdf_path, png_path], protect=protect) as group:
            atomic_write_bytes(group.path(pdf_path), pdf_bytes, protect=protect)
            atomic_write_bytes(group.path(png_path), png_bytes, protect=protect)
    except BaseException as exc:
        for folder in made:
            try:
                folder.rmdir()
            except OSError:
                break
        if isinstance(exc, OSError) and not isinstance(exc, QwellError):
            raise QwellError(f"cannot write the report into {one_line(str(d))} "
                             f"({os_error_text(exc)})") from None
        raise
    if data.warnings:
        warnings.warn(f"{len(data.warnings)} validity warning(s) while solving {stack.name!r}; "
                      f"they are listed on the cautions page of {pdf_path}", ValidityWarning,
                      stacklevel=2)
    return ReportResult(pdf_path=pdf_path, png_path=png_path, pages=pages,
                        elapsed_s=time.perf_counter() - t0, warnings=data.warnings,
                        line=data.line)
