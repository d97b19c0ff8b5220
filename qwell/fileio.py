"""Atomic file output: write to a temporary file beside the target, then rename.

A failure leaves no half-written file, and no function here ever writes over
an input file the caller names in ``protect``.
"""

from __future__ import annotations

import io
import os
import tempfile
from pathlib import Path

from .errors import QwellError

__all__ = ["atomic_write_bytes", "atomic_write_text", "atomic_savefig", "OutputError"]


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
            raise OutputError(f"{path}: refusing to overwrite the input file")
    if path.exists() and path.is_dir():
        raise OutputError(f"{path}: is a directory; expected a file name")
    parent = path.parent if str(path.parent) else Path(".")
    if not parent.exists():
        raise OutputError(f"{path}: folder {parent} does not exist")
    return path


def _umask() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return mask


def atomic_write_bytes(path, data: bytes, protect=()) -> Path:
    """Write ``data`` to ``path`` atomically (temporary file + rename)."""
    path = _check_target(Path(path), protect)
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
