"""Safe reading of qwell's YAML input files, with the line of every key.

Stack files (:mod:`qwell.stack`) and material libraries
(:mod:`qwell.materials.library`) are read the same way: only regular files
(a FIFO, a device or a directory is refused before it is opened), a size
cap, UTF-8 text, and a :class:`yaml.SafeLoader` subclass that records the
line of every mapping key and sequence item in a side table (the parsed data
stay plain Python), refuses duplicate keys, and refuses alias expansion
beyond small limits (the "billion laughs" document).

Errors are raised as the caller's error class (a
:class:`~qwell.errors.StackError` or a subclass), so messages keep the form
``FILE:LINE: what is wrong; what is expected``.
"""

from __future__ import annotations

import os
import stat

from collections.abc import Mapping

import yaml

from .errors import StackError

__all__ = ["MAX_ALIASES", "MAX_YAML_NODES", "parse_marked_yaml", "decode_text", "type_word",
           "read_regular_file", "one_line"]

#: Most YAML aliases (``*name``) in one document.
MAX_ALIASES = 100
#: Most YAML nodes in one document, as written and after alias expansion.
MAX_YAML_NODES = 1_000_000


def type_word(value) -> str:
    """What a YAML value is, for messages: 'a mapping', 'a list', 'nothing', or its short repr."""
    if isinstance(value, Mapping):
        return "a mapping"
    if isinstance(value, list):
        return "a list"
    if value is None:
        return "nothing"
    if isinstance(value, bool):
        return f"{value!r} (a boolean)"
    text = repr(value)
    return text if len(text) <= 60 else text[:57] + "..."


def one_line(text) -> str:
    """``text`` with every run of white space (newlines included) made one space."""
    return " ".join(str(text).split())


class _Refused(Exception):
    """Internal: the YAML document is refused (with a reason and a line)."""

    def __init__(self, message: str, line: int | None = None):
        self.message = message
        self.line = line
        super().__init__(message)


_MERGE_TAG = "tag:yaml.org,2002:merge"


class _MarkedLoader(yaml.SafeLoader):
    """SafeLoader that records the line of every key and item, with alias limits."""

    def __init__(self, stream, what: str = "stack file"):
        super().__init__(stream)
        self.qwell_marks: dict = {}  # id(container) -> (line, {key: line} | [line, ...])
        self.keep: list = []  # keeps the marked containers alive (stable ids)
        self.alias_count = 0
        self.node_count = 0
        self.what = what

    def compose_node(self, parent, index):
        if self.check_event(yaml.AliasEvent):
            self.alias_count += 1
            if self.alias_count > MAX_ALIASES:
                event = self.peek_event()
                hint = " (write repeated layers with 'repeat:')" if self.what == "stack file" else ""
                raise _Refused(f"more than {MAX_ALIASES} YAML aliases; expected a plain "
                               f"{self.what}{hint}", event.start_mark.line + 1)
        else:
            self.node_count += 1
            if self.node_count > MAX_YAML_NODES:
                event = self.peek_event()
                raise _Refused(f"more than {MAX_YAML_NODES} YAML nodes; expected a smaller "
                               f"{self.what}", event.start_mark.line + 1)
        return super().compose_node(parent, index)

    def construct_marked_map(self, node):
        data: dict = {}
        yield data
        own = set()
        for key_node, _ in node.value:
            if key_node.tag == _MERGE_TAG:
                continue
            key = self.construct_object(key_node, deep=True)
            try:
                hash(key)
            except TypeError:
                raise _Refused("a mapping key must be a plain value; expected 'key: value'",
                               key_node.start_mark.line + 1) from None
            if key in own:
                raise _Refused(f"duplicate key {key!r}; expected each key once per mapping",
                               key_node.start_mark.line + 1)
            own.add(key)
        self.flatten_mapping(node)
        lines = {}
        for key_node, value_node in node.value:
            key = self.construct_object(key_node, deep=True)
            try:
                hash(key)
            except TypeError:
                raise _Refused("a mapping key must be a plain value; expected 'key: value'",
                               key_node.start_mark.line + 1) from None
            data[key] = self.construct_object(value_node, deep=False)
            lines[key] = key_node.start_mark.line + 1
        self.qwell_marks[id(data)] = (node.start_mark.line + 1, lines)
        self.keep.append(data)

    def construct_marked_seq(self, node):
        data: list = []
        yield data
        data.extend(self.construct_object(child, deep=False) for child in node.value)
        self.qwell_marks[id(data)] = (node.start_mark.line + 1,
                                      [child.start_mark.line + 1 for child in node.value])
        self.keep.append(data)


_MarkedLoader.add_constructor("tag:yaml.org,2002:map", _MarkedLoader.construct_marked_map)
_MarkedLoader.add_constructor("tag:yaml.org,2002:seq", _MarkedLoader.construct_marked_seq)


def _expanded_size(root, what: str) -> int:
    """Node count of the document with every alias expanded (refuses cycles)."""
    memo: dict = {}
    active: set = set()
    # iterative post-order walk: deep documents must not exhaust the C stack
    stack = [(root, False)]
    while stack:
        node, done = stack.pop()
        nid = id(node)
        if done:
            active.discard(nid)
            if isinstance(node, yaml.MappingNode):
                kids = [n for pair in node.value for n in pair]
            elif isinstance(node, yaml.SequenceNode):
                kids = node.value
            else:
                kids = ()
            total = 1 + sum(memo[id(k)] for k in kids)
            if total > MAX_YAML_NODES:
                raise _Refused(f"the YAML aliases expand to more than {MAX_YAML_NODES} nodes; "
                               f"expected a plain {what}", node.start_mark.line + 1)
            memo[nid] = total
            continue
        if nid in memo:
            continue
        if nid in active:
            raise _Refused("a YAML alias refers to its own parent (recursive document); "
                           f"expected a plain {what}", node.start_mark.line + 1)
        active.add(nid)
        stack.append((node, True))
        if isinstance(node, yaml.MappingNode):
            kids = [n for pair in node.value for n in pair]
        elif isinstance(node, yaml.SequenceNode):
            kids = node.value
        else:
            kids = ()
        for k in kids:
            kid = id(k)
            if kid in active:
                raise _Refused("a YAML alias refers to its own parent (recursive document); "
                               f"expected a plain {what}", k.start_mark.line + 1)
            if kid not in memo:
                stack.append((k, False))
    return memo[id(root)]


def _reader_line(text: str, exc) -> int | None:
    pos = getattr(exc, "position", None)
    if isinstance(pos, int) and 0 <= pos <= len(text):
        return text.count("\n", 0, pos) + 1
    return None


def parse_marked_yaml(text: str, file: str | None, *, error=StackError,
                      what: str = "stack file", mapping_of: str = "stack keys"):
    """Parse YAML text into ``(data, marks)``.

    Parameters
    ----------
    text : str
        The document.
    file : str or None
        File name for messages.
    error : type
        Error class raised (``StackError`` or a subclass), called with
        ``message, file=, line=``.
    what, mapping_of : str
        Words for messages: ``"expected a plain {what}"``, ``"expected a YAML
        mapping of {mapping_of}"``.

    Returns
    -------
    data : object
        Plain Python (dicts, lists, scalars); None for an empty document.
    marks : dict
        ``id(container) -> (line, {key: line} | [line, ...])`` for every
        mapping and list, ``'root'`` -> the line of the top node.
    """
    try:
        loader = _MarkedLoader(text, what)
    except yaml.YAMLError as exc:  # the reader refuses control characters at once
        raise error(f"not valid YAML text ({one_line(str(exc))}); expected a YAML text "
                    "file", file=file, line=_reader_line(text, exc)) from None
    try:
        try:
            node = loader.get_single_node()
            if node is None:
                return None, {}
            _expanded_size(node, what)
            data = loader.construct_document(node)
            loader.qwell_marks["root"] = node.start_mark.line + 1
            loader.qwell_marks["keep"] = loader.keep  # marked ids stay valid while marks live
        except _Refused as exc:
            raise error(exc.message, file=file, line=exc.line) from None
        except yaml.MarkedYAMLError as exc:
            mark = exc.problem_mark or exc.context_mark
            line = mark.line + 1 if mark is not None else None
            problem = one_line(exc.problem or exc.context or "syntax error")
            raise error(f"not valid YAML ({problem}); expected a YAML mapping of {mapping_of}",
                        file=file, line=line) from None
        except yaml.YAMLError as exc:
            raise error(f"not valid YAML ({one_line(str(exc))}); expected a YAML text "
                        "file", file=file, line=_reader_line(text, exc)) from None
        except RecursionError:
            raise error(f"YAML nested too deeply; expected a plain {what}", file=file) from None
    finally:
        loader.dispose()
    return data, loader.qwell_marks


def decode_text(data: bytes, file: str | None, limit_bytes: int, *, error=StackError,
                what: str = "stack file") -> str:
    """UTF-8 text of file bytes; refuses oversized, binary (NUL) and non-UTF-8 data."""
    if len(data) > limit_bytes:
        raise error(f"file is {len(data) / 1e6:.3g} MB, over the {limit_bytes / 1e6:.3g} "
                    f"MB limit; expected a {what} of a few kB", file=file)
    if b"\x00" in data:
        raise error("binary file (contains NUL bytes); expected a YAML text file", file=file)
    try:
        return data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        line = data[: exc.start].count(b"\n") + 1
        raise error(f"not UTF-8 text (byte 0x{data[exc.start]:02x} at offset {exc.start}); "
                    "expected a UTF-8 YAML text file", file=file, line=line) from None


def read_regular_file(file: str, limit_bytes: int, *, error=StackError,
                      what: str = "stack file") -> bytes:
    """Bytes of a regular file of at most ``limit_bytes``.

    A missing path, a directory, a FIFO, a socket or a device is refused
    from its ``stat`` before it is opened (opening a FIFO would block).
    """
    try:
        st = os.stat(file)
    except FileNotFoundError:
        raise error(f"file does not exist; expected the path of a YAML {what}",
                    file=file) from None
    except OSError as exc:
        raise error(f"cannot read the file ({one_line(exc.strerror or exc)}); expected a "
                    f"readable YAML {what}", file=file) from None
    if stat.S_ISDIR(st.st_mode):
        raise error(f"is a directory; expected a YAML {what}", file=file)
    if not stat.S_ISREG(st.st_mode):
        kind = ("a FIFO (named pipe)" if stat.S_ISFIFO(st.st_mode) else
                "a socket" if stat.S_ISSOCK(st.st_mode) else
                "a device" if stat.S_ISCHR(st.st_mode) or stat.S_ISBLK(st.st_mode) else
                "not a regular file")
        raise error(f"is {kind}; expected a regular YAML {what}", file=file)
    if st.st_size > limit_bytes:
        raise error(f"file is {st.st_size / 1e6:.3g} MB, over the {limit_bytes / 1e6:.3g} "
                    f"MB limit; expected a {what} of a few kB", file=file)
    try:
        with open(file, "rb") as fh:
            return fh.read(limit_bytes + 1)
    except OSError as exc:
        raise error(f"cannot read the file ({one_line(exc.strerror or exc)}); expected a "
                    f"readable YAML {what}", file=file) from None
