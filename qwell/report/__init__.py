"""Design-review reports: a multi-page PDF and a PNG band diagram of one stack.

:func:`build_report` solves a stack with both methods, picks the transitions
to review, asks the design engine (:mod:`qwell.design`) how each one's
wavelength moves with growth errors and writes

* ``DIR/<stem>.pdf``: (1) band diagram, (2) stack table and settings,
  (3) material parameters with numbered citations, (4) states, exact and
  semiclassical side by side, (5) transitions with strengths, (6) wavelength
  sensitivity to each layer's thickness (±1 ML) and composition (±0.01) and
  the absorption spectrum, (7) cautions; every page carries a
  reproducibility footer (qwell version, UTC time, SHA-256 of the input,
  temperature, solver settings);
* ``DIR/<stem>.png``: the band diagram (:mod:`qwell.diagram`).

The package has one module per topic:

* :mod:`qwell.report.data`: what the report says (:class:`ReportData`,
  :func:`collect_report_data`, :func:`sensitivity_rows`);
* :mod:`qwell.report.layout`: the typesetting engine (text measurement,
  wrapping, headings, paragraphs, tables, figures, page flow, PDF bytes);
* :mod:`qwell.report.pages`: the content of each page and :func:`render_pdf`;
* :mod:`qwell.report.build`: :func:`build_report`, the atomic file output.

Units inside: eV, nm, m0, K, kV/cm (see :mod:`qwell.units`).

Examples
--------
>>> from qwell.report import build_report                      # doctest: +SKIP
>>> res = build_report("layers/midir-emitter.yaml", out_dir="/tmp")  # doctest: +SKIP
>>> res.pdf_path.name, res.pages                               # doctest: +SKIP
('midir-emitter.pdf', 9)
"""

from __future__ import annotations

from .build import DEFAULT_OUT_DIR, ReportResult, build_report
from .data import (
    REPORT_TOLERANCE_EV,
    ReportData,
    SensitivityRow,
    collect_report_data,
    default_transitions,
    sensitivity_rows,
)
from .layout import FigureBlock, Heading, PageBreak, Paragraph, Table
from .pages import (
    CAUTIONS,
    caution_blocks,
    design_cautions,
    diagram_blocks,
    footer_lines,
    material_blocks,
    render_pdf,
    report_pages,
    sensitivity_blocks,
    stack_blocks,
    state_blocks,
    transition_blocks,
)

__all__ = [
    "CAUTIONS",
    "DEFAULT_OUT_DIR",
    "REPORT_TOLERANCE_EV",
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
    "design_cautions",
    "Heading",
    "Paragraph",
    "Table",
    "FigureBlock",
    "PageBreak",
]
