"""Atomic file output: write to a temporary file beside the target, then rename.

A failure leaves no half-written file, and no function here ever writes over
an input file the caller names in ``protect``.
"""

from __future__ import annotations

import io
import os
import tempfile
from pathlib import Path

from .errors import QwellError, one_line

__all__ = ["atomic_write_bytes", "atomic_write_text", "atomic_savefig", "OutputError",
           "OutputGroup", "os_error_text", "check_figure_target"]


class OutputError(OSError, QwellError):
    """An output file cannot be written (or would overwrite an input)."""


def _check_target(path: Path, protect=()) -> Path:
    path = Path(path)
    for p in protect:
        if p is None:
            continue
        try:
            same = Path(p).exists() and path.exists() and path.resolve() == Path(p).resolve()
        except OSError:
            same = False
        if same:
            raise OutputError(f"{one_line(str(path))}: refusing to overwrite the input file")
    shown = one_line(str(path))
    if path.exists() and path.is_dir():
        raise OutputError(f"{shown}: is a directory; expected a file name")
    parent = path.parent if str(path.parent) else Path(".")
    if not parent.exists():
        raise OutputError(f"{shown}: folder {one_line(str(parent))} does not exist")
    if not parent.is_dir():
        raise OutputError(f"{shown}: {one_line(str(parent))} is not a folder")
    return path


def _umask() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return mask


def os_error_text(exc: OSError) -> str:
    """A short one-line reason of an OS error: 'Permission denied', 'No space left on device'."""
    return one_line(str(exc.strerror or exc or type(exc).__name__))


def atomic_write_bytes(path, data: bytes, protect=()) -> Path:
    """Write ``data`` to ``path`` atomically (temporary file + rename).

    Raises
    ------
    OutputError
        The target is an input, a directory, in a missing folder, or cannot be
        written (read-only folder, full disk: one line naming the file).
    """
    path = _check_target(Path(path), protect)
    try:
        return _write_bytes(path, data)
    except OutputError:
        raise
    except OSError as exc:
        raise OutputError(f"{one_line(str(path))}: cannot write the file "
                          f"({os_error_text(exc)})") from None


def _write_bytes(path: Path, data: bytes) -> Path:
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent or ".")
    try:
        os.chmod(tmp, 0o666 & ~_umask())  # mkstemp makes 0600; give the usual file mode
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, path)
    except BaseException:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        raise
    return path


def atomic_write_text(path, text: str, protect=()) -> Path:
    """Write ``text`` (UTF-8) to ``path`` atomically."""
    return atomic_write_bytes(path, text.encode("utf-8"), protect)


def atomic_savefig(fig, path, protect=(), **kwargs) -> Path:
    """Save a matplotlib figure atomically; the format follows the file suffix."""
    path = _check_target(Path(path), protect)
    fmt = kwargs.pop("format", None) or (path.suffix.lstrip(".").lower() or "png")
    supported = fig.canvas.get_supported_filetypes()
    if fmt not in supported:
        raise OutputError(f"{path}: cannot write a figure as '.{fmt}'; expected a file name "
                          "ending in " + ", ".join(f".{k}" for k in sorted(supported)))
    buf = io.BytesIO()
    fig.savefig(buf, format=fmt, **kwargs)
    return atomic_write_bytes(path, buf.getvalue(), protect)


class OutputGroup:
    """Several output files committed together, or none of them.

    Each writer writes to :meth:`path` (a temporary name beside the target,
    with the target's suffix); :meth:`commit` renames all of them once every
    one is written.  Leaving the ``with`` block by an exception (a failed
    writer, Ctrl-C) deletes the temporary files, so the previous files stay
    untouched.

    Parameters
    ----------
    targets : sequence of path
        The final file names (checked at once: not an input, not a folder, in
        an existing folder, no name twice).
    protect : sequence of path
        Input files that must never be overwritten.

    Raises
    ------
    OutputError
        A bad target, or a temporary file that cannot be created or renamed.
    """

    def __init__(self, targets, protect=()):
        self.targets = [_check_target(Path(t), protect) for t in targets]
        seen = set()
        for t in self.targets:
            key = os.path.abspath(t)
            if key in seen:
                raise OutputError(f"{one_line(str(t))}: given twice; expected a different file "
                                  "name for each output")
            seen.add(key)
        self._tmp: dict = {}

    def path(self, target) -> Path:
        """The temporary name to write ``target`` to (created empty, mode of a new file)."""
        target = Path(target)
        key = os.path.abspath(target)
        if key not in self._tmp:
            try:
                fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", suffix=f".part{target.suffix}",
                                           dir=target.parent if str(target.parent) else ".")
                os.close(fd)
                os.chmod(tmp, 0o666 & ~_umask())
            except OSError as exc:
                raise OutputError(f"{one_line(str(target))}: cannot write the file "
                                  f"({os_error_text(exc)})") from None
            self._tmp[key] = (target, Path(tmp))
        return self._tmp[key][1]

    def commit(self) -> None:
        """Rename every temporary file to its target."""
        missing = [t for t in self.targets if os.path.abspath(t) not in self._tmp]
        if missing:
            self.discard()
            raise OutputError(f"{one_line(str(missing[0]))}: was not written")
        try:
            for target, tmp in self._tmp.values():
                os.replace(tmp, target)
        except OSError as exc:
            self.discard()
            raise OutputError(f"{one_line(str(target))}: cannot write the file "
                              f"({os_error_text(exc)})") from None
        self._tmp.clear()

    def discard(self) -> None:
        """Delete the temporary files (the targets stay as they were)."""
        for _target, tmp in self._tmp.values():
            try:
                os.unlink(tmp)
            except OSError:
                pass
        self._tmp.clear()

    def __enter__(self):
        return self

    def __exit__(self, kind, exc, tb):
        if kind is None:
            self.commit()
            return False
        names = {str(tmp): str(target) for target, tmp in self._tmp.values()}
        self.discard()
        if isinstance(exc, QwellError):
            text = str(exc)
            shown = text
            for tmp, target in names.items():
                shown = shown.replace(tmp, target)
            if shown != text:  # the message names the final file, not its temporary name
                raise OutputError(shown) from None
        return False


def check_figure_target(path) -> None:
    """Refuse a figure file name whose suffix matplotlib cannot write, before any work.

    Raises
    ------
    OutputError
    """
    # matplotlib is heavy: imported only when a figure is asked for
    from matplotlib.backend_bases import FigureCanvasBase

    path = Path(path)
    fmt = path.suffix.lstrip(".").lower() or "png"
    supported = FigureCanvasBase.get_supported_filetypes()
    if fmt not in supported:
        raise OutputError(f"{one_line(str(path))}: cannot write a figure as '.{fmt}'; expected a "
                          "file name ending in " + ", ".join(f".{k}" for k in sorted(supported)))
