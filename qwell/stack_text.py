"""Design values written into a stack's own YAML text: comments, order and layout kept.

:func:`edit_stack_text` replaces only the scalars that change (a layer's
``thickness``, its ``material`` formula for a composition, the top-level
``field`` or ``temperature``) at their places in the text, found through the
YAML composer's marks, so the grower's file keeps its comments, key order,
flow or block style and every other value as written.  The edited text is
read back by the loader and checked to give the values asked for.
"""

from __future__ import annotations

import math
from typing import Mapping

from .errors import ParameterError, StackError
from .formula import format_formula
from .stack import Stack, stack_from_text
from .stack_edit import get_parameter

__all__ = ["edit_stack_text"]


def _compose(text: str):
    # PyYAML's composer gives the node tree with text positions (marks); only needed here
    import yaml
    return yaml.compose(text, Loader=yaml.SafeLoader)


def _mapping_get(node, key: str):
    for k, v in getattr(node, "value", ()):
        if getattr(k, "value", None) == key:
            return k, v
    return None, None


def _layer_nodes(seq, out: dict) -> dict:
    """1-based line of each layer mapping -> its node (repeat blocks walked)."""
    for item in getattr(seq, "value", ()):
        if not hasattr(item, "value") or not isinstance(item.value, list):
            continue
        _, inner = _mapping_get(item, "layers")
        if inner is not None and _mapping_get(item, "repeat")[1] is not None:
            _layer_nodes(inner, out)
        else:
            out.setdefault(item.start_mark.line + 1, item)
    return out


def _value_text(p, value: float, monolayers: int | None) -> str:
    if p.kind == "thickness":
        return f"{monolayers} ML" if monolayers is not None else f"{value!r} nm"
    if p.kind in ("x", "y"):
        comp = dict(p.composition)
        comp[p.kind] = float(value)
        return format_formula(p.family, comp)
    if p.kind == "field":
        return f"{value!r} kV/cm"
    return f"{value!r} K"


def edit_stack_text(stack: Stack, text: str, values: Mapping[str, float], *,
                    monolayers: Mapping[str, int] | None = None) -> str:
    """The stack's YAML ``text`` with the design ``values`` written in place.

    Parameters
    ----------
    stack : Stack
        The stack loaded from ``text``.
    text : str
        Its YAML source.
    values : Mapping[str, float]
        Parameter path -> new value (nm, fraction, kV/cm, K).
    monolayers : Mapping[str, int], optional
        Thickness path -> whole monolayers to write (``'22 ML'``) instead of nm.

    Returns
    -------
    str
        The edited text; everything not named in ``values`` is byte for byte
        as before.

    Raises
    ------
    ParameterError
        Unknown path, a value the loader refuses, or a text the editor cannot
        place the value in (an alias shared by other layers, a graded layer's
        composition).
    """
    monolayers = dict(monolayers or {})
    root = _compose(text)
    layers_key, layers_seq = _mapping_get(root, "layers")
    by_line = _layer_nodes(layers_seq, {}) if layers_seq is not None else {}
    edits = []          # (start, end, new text)
    appended = []
    for path, value in values.items():
        p = get_parameter(stack, path)
        new = _value_text(p, float(value), monolayers.get(path))
        if p.layer is None:
            k, node = _mapping_get(root, p.kind)
            if node is None:
                appended.append(f"{p.kind}: {new}\n")
            else:
                edits.append((node.start_mark.index, node.end_mark.index, new))
            continue
        layer = next(lay for lay in stack.layers if p.layer in (lay.name, lay.label))
        node = by_line.get(layer.line)
        key = "thickness" if p.kind == "thickness" else "material"
        _, scalar = _mapping_get(node, key) if node is not None else (None, None)
        if scalar is None or not hasattr(scalar, "start_mark") or isinstance(scalar.value, list):
            raise ParameterError(f"{path}: cannot find the layer's {key!r} in the text to "
                                 "write the value in place")
        edits.append((scalar.start_mark.index, scalar.end_mark.index, new))
    spans = sorted(edits)
    for (a0, a1, _), (b0, _, _) in zip(spans, spans[1:]):
        if b0 < a1 or a0 == b0:
            raise ParameterError("two values share one place in the text (a YAML alias?); "
                                 "cannot write them in place")
    out = text
    for start, end, new in sorted(edits, reverse=True):
        out = out[:start] + new + out[end:]
    if appended:
        out = out + ("" if out.endswith("\n") else "\n") + "".join(appended)
    _check(out, stack, values, monolayers)
    return out


def _check(out: str, stack: Stack, values, monolayers) -> None:
    """The edited text loads and gives the values asked for (monolayers: their thickness)."""
    try:
        edited = stack_from_text(out, file=stack.path)
    except StackError as exc:
        raise ParameterError(f"the edited stack does not load: {exc}") from None
    for path, value in values.items():
        got = get_parameter(edited, path).value
        # a monolayer count reads back as the loader's own n·a/2 (rounding of the product)
        tol = 1e-9 if path in monolayers else 1e-12
        if not math.isclose(got, float(value), rel_tol=tol, abs_tol=1e-12):
            raise ParameterError(f"{path}: the edited text reads {got!r}, expected {value!r}")
