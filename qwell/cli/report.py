"""``qwell report STACK``: design-review PDF and band-diagram PNG.

``qwell report STACK.yaml [-o DIR] [--transition e1-e2 ...]`` writes
``DIR/<stem>.pdf`` and ``DIR/<stem>.png`` (default DIR ``reports/``, created
when missing; a folder given with ``-o`` must exist) and prints both paths.
"""

from __future__ import annotations

from ..report import DEFAULT_OUT_DIR, build_report
from .common import add_library_option, add_self_consistent_option, add_unit_option, load

__all__ = ["register", "cmd_report"]


def register(subparsers) -> None:
    """Add ``report`` to the ``qwell`` sub-commands."""
    r = subparsers.add_parser("report", help="design-review report: PDF pages and a PNG band diagram")
    r.add_argument("stack", help="stack YAML file")
    r.add_argument("-o", "--output-dir", dest="out_dir", metavar="DIR", default=None,
                   help="folder the report is written into: DIR/NAME.pdf and DIR/NAME.png, "
                        "NAME being the stack file's name without .yaml (the folder must exist; "
                        "default reports/, created if missing)")
    r.add_argument("--transition", action="append", metavar="e1-e2",
                   help="transition to review (repeatable); default: the stack's design line and the "
                        "strongest ones")
    add_unit_option(r)
    add_self_consistent_option(r)
    add_library_option(r)
    r.set_defaults(func=cmd_report)


def cmd_report(args) -> int:
    """Run ``qwell report``; returns the exit status."""
    stack = load(args.stack, args.self_consistent, args.library)
    given = args.out_dir is not None
    res = build_report(stack, transitions=args.transition,
                       out_dir=args.out_dir if given else DEFAULT_OUT_DIR,
                       create_out_dir=not given, unit=args.unit)
    if res.line is not None:
        print(res.line.headline())
    print(f"wrote {res.pdf_path}")
    print(f"wrote {res.png_path}")
    return 0
