"""Correlated growth errors: which parameters a real growth error moves together.

Two errors of epitaxial growth are shared by many layers at once:

* a **composition error** of one cell setting: every layer grown with the
  same alloy composition (same family, same fractions) is off by the same
  amount, so all barriers of ``Al0.25Ga0.75As`` move together;
* a **growth-rate error**: every layer of one material is thicker (or
  thinner) by the same percentage.

:func:`composition_groups` and :func:`growth_rate_groups` build these groups
from the one-at-a-time tolerance items of :mod:`.tolerances`; each group is
one error source (moved as a whole, never split into root-sum-squared
members).  :func:`parse_growth_rate` reads ``--growth-rate 2%``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from .. import materials
from ..errors import ParameterError, QwellError
from ..formula import format_formula
from ..stack_edit import Parameter

__all__ = ["CorrelatedGroup", "composition_groups", "growth_rate_groups", "parse_growth_rate"]


@dataclass(frozen=True)
class CorrelatedGroup:
    """Parameters one growth error moves together (one error source).

    Attributes
    ----------
    name : str
        E.g. ``'composition Al0.25Ga0.75As (x)'`` or ``'growth rate GaAs'``.
    kind : {'composition', 'growth rate'}
    members : tuple of Parameter
        The parameters moved together, in stack order.
    deltas : tuple of float
        Half-width of each member in its unit (fraction, or nm: the rate
        times the member's thickness).
    spec : str
        The tolerance as given (``'0.01'``, ``'2%'``).
    """

    name: str
    kind: str
    members: tuple
    deltas: tuple
    spec: str

    def values(self, sign: float) -> dict:
        """Member path -> value moved by ``sign`` half-widths (every member together)."""
        return {p.path: p.value + sign * d for p, d in zip(self.members, self.deltas)}

    @property
    def paths(self) -> tuple:
        return tuple(p.path for p in self.members)


def _material_key(stack, layer_key: str) -> str:
    """Material of a layer as one name per composition (every spelling of it alike)."""
    layer = next((lay for lay in stack.layers if layer_key in (lay.name, lay.label)), None)
    if layer is None or layer.material is None:
        return f"graded layer {layer_key}"
    try:
        family, comp = materials.parse_formula(layer.material)
    except QwellError:
        return layer.material
    return _composition_text(family, dict(comp)) if comp else layer.material


def composition_groups(items) -> list:
    """Composition items grouped by alloy family and full composition (one cell setting).

    Parameters
    ----------
    items : sequence of (Parameter, delta, spec)
        One-at-a-time tolerance items; only composition ones (``x``, ``y``)
        are grouped.

    Returns
    -------
    list of CorrelatedGroup
        One group per (family, composition, fraction key), with one member or
        more, in order of first appearance.
    """
    groups: dict = {}
    for p, d, spec in items:
        if p.kind not in ("x", "y"):
            continue
        comp = tuple(sorted((k, round(float(v), 9)) for k, v in (p.composition or {}).items()))
        key = (p.family, comp, p.kind)
        groups.setdefault(key, []).append((p, d, spec))
    out = []
    for (family, comp, kind), members in groups.items():
        ds = [d for _, d, _ in members]
        specs = dict.fromkeys(s for _, _, s in members)
        formula = _composition_text(family, dict(comp))
        out.append(CorrelatedGroup(name=f"composition {formula} ({kind})", kind="composition",
                                   members=tuple(p for p, _, _ in members), deltas=tuple(ds),
                                   spec=" / ".join(specs)))
    return out


def _composition_text(family, comp) -> str:
    """The formula of a composition (one name for every spelling of the same cell setting)."""
    try:
        return format_formula(family, comp)
    except QwellError:
        return f"{family} " + ", ".join(f"{k} = {v:g}" for k, v in comp.items())


def growth_rate_groups(stack, params, rate: float, spec: str) -> list:
    """Thickness parameters grouped by material, each scaled by ``1 ± rate``.

    Parameters
    ----------
    stack : Stack
    params : Mapping[str, Parameter]
        :func:`qwell.stack_edit.parameters` of ``stack``.
    rate : float
        Relative growth-rate error (0.02 for 2 %).
    spec : str
        The rate as given.
    """
    groups: dict = {}
    for p in params.values():
        if p.kind != "thickness":
            continue
        groups.setdefault(_material_key(stack, p.layer), []).append(p)
    return [CorrelatedGroup(name=f"growth rate {mat}", kind="growth rate", members=tuple(ps),
                            deltas=tuple(rate * p.value for p in ps), spec=spec)
            for mat, ps in groups.items()]


def parse_growth_rate(text) -> float:
    """``'2%'``, ``'2 %'`` or ``0.02`` -> 0.02 (a relative error in [0, 1)).

    Raises
    ------
    ParameterError
        Not a number or percentage, negative, or 100 % and more.
    """
    if isinstance(text, (int, float)) and not isinstance(text, bool):
        r = float(text)
        shown = f"{text!r}"
    else:
        s = str(text).strip()
        shown = repr(str(text))
        try:
            r = float(s[:-1]) / 100.0 if s.endswith("%") else float(s)
        except ValueError:
            raise ParameterError(f"growth rate {shown}: expected a percentage such as 2%") \
                from None
    if not math.isfinite(r) or r < 0 or r >= 1:
        raise ParameterError(f"growth rate {shown}: expected a relative error >= 0 % and "
                             "below 100 % (e.g. 2%)")
    return r


def member_text(group: CorrelatedGroup, limit: int = 4) -> str:
    """``'top_barrier.x, bottom_barrier.x'`` (at most ``limit`` names, then a count)."""
    names = [p.layer or p.path for p in group.members]
    if len(names) <= limit:
        return ", ".join(names)
    return ", ".join(names[:limit]) + f" … ({len(names)} layers)"


def check_group(group: CorrelatedGroup, sign: float) -> None:
    """Raise ParameterError naming the member a group design moves out of its valid range."""
    for p, d in zip(group.members, group.deltas):
        v = p.value + sign * d
        try:
            Parameter.check(p, v)
        except ParameterError as exc:
            raise ParameterError(f"{group.name} ±{group.spec} moves {p.path} (nominal "
                                 f"{p.value:.6g}) out of its valid range: {exc}") from None
