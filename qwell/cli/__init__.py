"""Command line of qwell: a thin layer over the Python API.

Every command reads its inputs, calls the API and prints a readable table or
(with ``--json``) the machine-readable contract (:mod:`qwell.cli.json_out`).
Any :class:`QwellError` becomes one line on stderr and exit status 2; nothing
is half-written.

One module per command group adds its sub-commands with ``register``:
:mod:`~qwell.cli.materials`, :mod:`~qwell.cli.profile`,
:mod:`~qwell.cli.levels`, :mod:`~qwell.cli.design` (size, sweep, tolerance),
:mod:`~qwell.cli.report` and :mod:`~qwell.cli.spectra` (absorption, gain); :mod:`~qwell.cli.common` holds what they share.
"""

from __future__ import annotations

import argparse
import importlib
import os
import re
import signal
import sys
import warnings

from .. import __version__
from ..errors import QwellError, QwellWarning, one_line
from .common import EXIT_USAGE, locate_error

__all__ = ["main", "build_parser", "EXIT_USAGE"]


class _Parser(argparse.ArgumentParser):
    def error(self, message):  # one line, exit 2
        self.exit(EXIT_USAGE, f"{self.prog}: error: {message}\n")


#: sub-command -> the module of :mod:`qwell.cli` that registers and runs it.  Only the
#: module of the command being run is imported (``qwell levels`` does not pay for the
#: design, report and plotting layers); ``qwell --help`` and unknown commands import all.
COMMANDS = {
    "materials": "materials",
    "profile": "profile",
    "levels": "levels",
    "size": "design",
    "sweep": "design",
    "tolerance": "design",
    "report": "report",
    "absorption": "spectra",
    "gain": "spectra",
}


def _command_modules(argv=None) -> list:
    """The command modules to register for ``argv``: that of its command, else all (in order)."""
    names = list(dict.fromkeys(COMMANDS.values()))
    first = next((tok for tok in (argv or ()) if not tok.startswith("-")), None)
    if argv is not None and first in COMMANDS and not any(
            tok in ("-h", "--help", "--version") for tok in argv[:argv.index(first)]):
        names = [COMMANDS[first]]
    # imported on demand (see COMMANDS): start-up pays only for the command being run
    return [importlib.import_module(f"{__name__}.{n}") for n in names]


def build_parser(argv=None) -> argparse.ArgumentParser:
    """The ``qwell`` argument parser: every sub-command, or with ``argv`` only the one it runs."""
    p = _Parser(prog="qwell", description="Quantum-well layer-stack design: profiles, subbands, "
                "transitions, sizing, sweeps and design-review reports.")
    p.add_argument("--version", action="version", version=f"qwell {__version__}")
    sub = p.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    for module in _command_modules(argv):
        module.register(sub)
    return p


_NEGATIVE_VALUE = re.compile(r"^-(\d|\.\d)")


def _join_negative_values(argv):
    """Let '--to -2nm' mean '--to=-2nm' (argparse would take '-2nm' for an option)."""
    out = []
    for tok in argv:
        if (out and out[-1].startswith("--") and "=" not in out[-1]
                and _NEGATIVE_VALUE.match(tok)):
            out[-1] = f"{out[-1]}={tok}"
        else:
            out.append(tok)
    return out


def _error_line(exc: QwellError) -> str:
    """The one stderr line of a user error (a refused self-consistent loop adds its history)."""
    msg = str(exc)
    hist = getattr(exc, "history", None)
    if hist and "history" not in msg:
        shown = ", ".join(f"{h:.3g}" for h in list(hist)[-12:])
        msg += f" (residual history, meV: {shown})"
    return f"qwell: error: {one_line(msg)}"


def _terminate(signum, frame):
    raise KeyboardInterrupt


def _stop_on_sigterm():
    """SIGTERM ends a run like Ctrl-C (one line, exit 130, no partial output); returns the
    previous handler, or None when not in the main thread (no handler installed)."""
    try:
        return signal.signal(signal.SIGTERM, _terminate)
    except (ValueError, OSError, AttributeError):  # not the main thread, or no SIGTERM
        return None


def _restore_sigterm(previous) -> None:
    if previous is not None:
        try:
            signal.signal(signal.SIGTERM, previous)
        except (ValueError, OSError):
            pass


def main(argv=None) -> int:
    """Run ``qwell`` with ``argv`` (default ``sys.argv[1:]``); returns the exit status."""
    argv = _join_negative_values(sys.argv[1:] if argv is None else list(argv))
    parser = build_parser(argv)
    args = parser.parse_args(argv)
    if not getattr(args, "func", None):
        parser.print_help()
        return EXIT_USAGE
    previous = _stop_on_sigterm()
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", QwellWarning)
        try:
            rc = args.func(args)
        except QwellError as exc:
            print(_error_line(locate_error(exc, getattr(args, "stack", None))), file=sys.stderr)
            return EXIT_USAGE
        except KeyboardInterrupt:
            print("qwell: interrupted", file=sys.stderr)
            return 130
        except BrokenPipeError:
            return 0
        except MemoryError:
            print("qwell: error: out of memory; expected a smaller stack or run (see the limits "
                  "table in the README)", file=sys.stderr)
            return EXIT_USAGE
        except Exception as exc:  # a bug: one line, details on request
            if os.environ.get("QWELL_DEBUG"):
                raise
            print(one_line(f"qwell: internal error: {type(exc).__name__}: {exc} "
                           "(set QWELL_DEBUG=1 for details; please report it)"), file=sys.stderr)
            return 1
        finally:
            _restore_sigterm(previous)
    seen = set()
    for w in caught:
        if issubclass(w.category, QwellWarning):
            msg = str(w.message)
            if msg not in seen:
                seen.add(msg)
                print(f"warning: {msg}", file=sys.stderr)
    return rc
