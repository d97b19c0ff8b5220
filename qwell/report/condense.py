"""Condensed report tables for long stacks: states per miniband or cluster, a few in full.

A stack of many periods has hundreds of states and tens of thousands of
transitions; listed in full, its report runs to hundreds of pages.  When a
solution holds more than :data:`LONG_STACK_STATES` states the report pages
(:mod:`qwell.report.pages`) show instead

* one row per group of states (:func:`state_groups`): the states of one
  miniband of a repeat block (Bloch's theorem on one period, carried by the
  solution's :class:`~qwell.solvers.results.Levels`), or a cluster of
  near-degenerate states (neighbours closer than :data:`CLUSTER_GAP_EV`),
  with its count and energy range;
* a representative few states in full (:func:`shown_states`): the bottom,
  middle and top state of each group (the ones the band diagram draws), the
  states of the reviewed transitions and their neighbours, and the lowest and
  highest of the remaining single states;
* one row per pair of groups for the transitions (:func:`transition_groups`),
  and in full only the reviewed lines, their neighbours in energy and the
  strongest few (:func:`shown_transitions`).

Every condensed table says how many rows it shows of how many, and where the
full list is (:func:`full_list_hint`).  Short stacks are never condensed:
nothing here changes a report of :data:`LONG_STACK_STATES` states or fewer.

Energies in eV (band-diagram scale unless named ``carrier``).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from pathlib import Path

from ..diagram import miniband_groups

__all__ = [
    "CLUSTER_GAP_EV",
    "LONG_LAYERS",
    "LONG_STACK_STATES",
    "StateGroup",
    "TransitionGroup",
    "full_list_hint",
    "is_long",
    "shown_states",
    "shown_transitions",
    "state_groups",
    "transition_groups",
]

#: A solution with more states than this is reported condensed (the state table of a
#: longer one fills more than a page; every example stack of layers/ stays below it).
LONG_STACK_STATES = 40
#: Layer tables of more expanded layers than this show the first and last period of each
#: repeat block only.
LONG_LAYERS = 40
#: Neighbouring states of one band closer than this [eV] form a cluster (1 meV: well below
#: kT at 77 K and any linewidth of a device; common practice, no source).
CLUSTER_GAP_EV = 1e-3
#: A cluster or miniband needs this many states to be a group (fewer: listed singly).
_GROUP_MIN = 4
#: States shown per group: bottom, middle, top (the band diagram's representatives).
_PER_GROUP = 3
#: Single (ungrouped) states of a band listed in full when there are at most this many;
#: beyond it, the lowest _SINGLE_LOW and highest _SINGLE_HIGH of them.
_SINGLES_ALL, _SINGLE_LOW, _SINGLE_HIGH = 12, 4, 2
#: Transitions shown in full besides the reviewed ones: the strongest of each kind, and
#: the neighbours in energy on each side of each reviewed line.
_STRONGEST, _NEIGHBOURS = 8, 2


@dataclass(frozen=True)
class StateGroup:
    """States of one band taken together in a condensed table.

    Attributes
    ----------
    band : str
    kind : str
        'miniband' (the states of one Bloch miniband of a repeat block), 'cluster'
        (near-degenerate neighbours) or 'single'.
    states : tuple of State
        In order of increasing carrier energy.
    representatives : tuple of State
        Bottom, middle and top states (all of a single).
    miniband : Miniband or None
    """

    band: str
    kind: str
    states: tuple
    representatives: tuple
    miniband: object = None

    @property
    def label(self) -> str:
        """'e1–e50' (or the state's own label)."""
        if len(self.states) == 1:
            return self.states[0].label
        return f"{self.states[0].label}–{self.states[-1].label}"

    @property
    def bottom_eV(self) -> float:
        return min(s.energy_eV for s in self.states)

    @property
    def top_eV(self) -> float:
        return max(s.energy_eV for s in self.states)

    @property
    def width_eV(self) -> float:
        return self.top_eV - self.bottom_eV


@dataclass(frozen=True)
class TransitionGroup:
    """Transitions of one kind between two groups of states.

    Attributes
    ----------
    kind : str
        'intersubband' or 'interband'.
    initial, final : str
        Labels of the two groups (:attr:`StateGroup.label`).
    transitions : tuple of Transition
    strongest : Transition
        Largest oscillator strength (intersubband) or TE/TM strength (interband).
    """

    kind: str
    initial: str
    final: str
    transitions: tuple
    strongest: object

    @property
    def low_eV(self) -> float:
        return min(t.energy_eV for t in self.transitions)

    @property
    def high_eV(self) -> float:
        return max(t.energy_eV for t in self.transitions)


def is_long(solution) -> bool:
    """Whether a solution holds more than :data:`LONG_STACK_STATES` states."""
    return len(solution.states) > LONG_STACK_STATES


def _carrier(s) -> float:
    e = getattr(s, "carrier_energy_eV", None)
    return float(s.energy_eV if e is None else e)


def _representatives(states) -> tuple:
    if len(states) <= _PER_GROUP:
        return tuple(states)
    idx = sorted({round(k * (len(states) - 1) / (_PER_GROUP - 1)) for k in range(_PER_GROUP)})
    return tuple(states[i] for i in idx)


def state_groups(lev) -> list:
    """:class:`StateGroup` s of one band's Levels in carrier-energy order.

    The minibands of :func:`qwell.diagram.miniband_groups` first (the grouping
    the band diagram draws); the remaining states form clusters where at least
    four neighbours lie closer than :data:`CLUSTER_GAP_EV` to the next, and
    singles otherwise.
    """
    out = []
    singles = []
    for mb, states in miniband_groups(lev):
        if mb is None:
            singles.extend(states)
            continue
        st = tuple(sorted(states, key=_carrier))
        out.append(StateGroup(lev.band, "miniband", st, _representatives(st), mb))
    singles.sort(key=_carrier)
    run: list = []

    def flush():
        if len(run) >= _GROUP_MIN:
            out.append(StateGroup(lev.band, "cluster", tuple(run), _representatives(run)))
        else:
            out.extend(StateGroup(lev.band, "single", (s,), (s,)) for s in run)
        run.clear()

    for s in singles:
        if run and abs(_carrier(s) - _carrier(run[-1])) >= CLUSTER_GAP_EV:
            flush()
        run.append(s)
    flush()
    out.sort(key=lambda g: _carrier(g.states[0]))
    return out


def _group_index(groups) -> dict:
    """State label -> its group."""
    return {s.label: g for g in groups for s in g.states}


def shown_states(solution, chosen=()) -> list:
    """Labels of the states a condensed report lists in full, in the solution's order.

    Each group's representatives; the states of the ``chosen`` transitions and
    their neighbours (one index below and above in the same band); of a band's
    single states all when there are few (12 or fewer), else the lowest four and
    highest two.
    """
    keep = set()
    for lev in solution.levels.values():
        groups = state_groups(lev)
        keep.update(s.label for g in groups if g.kind != "single" for s in g.representatives)
        singles = [g.states[0] for g in groups if g.kind == "single"]
        if len(singles) <= _SINGLES_ALL:
            keep.update(s.label for s in singles)
        else:
            keep.update(s.label for s in singles[:_SINGLE_LOW] + singles[-_SINGLE_HIGH:])
        order = [s.label for s in lev.states]
        pos = {lab: i for i, lab in enumerate(order)}
        for t in chosen:
            for lab in (t.initial, t.final):
                if lab in pos:
                    i = pos[lab]
                    keep.update(order[max(0, i - 1):i + 2])
    return [s.label for s in solution.states if s.label in keep]


def _strength(t) -> float:
    """Oscillator strength of an intersubband line, the larger of TE/TM of an interband one."""
    vals = ([t.oscillator_strength] if t.kind == "intersubband"
            else [getattr(t, "te", None), getattr(t, "tm", None)])
    vals = [abs(v) for v in vals if v is not None and math.isfinite(v)]
    return max(vals) if vals else 0.0


def transition_groups(solution, kind: str) -> list:
    """:class:`TransitionGroup` s of the solution's transitions of ``kind``, strongest first."""
    gi = {}
    for lev in solution.levels.values():
        gi.update(_group_index(state_groups(lev)))
    by = {}
    for t in solution.transitions:
        if t.kind != kind:
            continue
        a, b = gi.get(t.initial), gi.get(t.final)
        key = (a.label if a else t.initial, b.label if b else t.final)
        by.setdefault(key, []).append(t)
    out = [TransitionGroup(kind, k[0], k[1], tuple(ts), max(ts, key=_strength))
           for k, ts in by.items()]
    out.sort(key=lambda g: -_strength(g.strongest))
    return out


def shown_transitions(transitions, chosen=(), solution=None) -> list:
    """The transitions (of one kind, in their given order) a condensed table lists in full.

    The reviewed ones (``chosen``), the strongest few (the first eight of the
    list, which :mod:`qwell.optics` orders strongest first; with ``solution``,
    the first eight joining two different groups of states, since lines inside
    one miniband lie at millimetre wavelengths) and, for each reviewed line, its
    two neighbours in energy on either side.
    """
    trans = list(transitions)
    names = {t.name for t in chosen}
    lead = trans
    if solution is not None:
        gi = {}
        for lev in solution.levels.values():
            gi.update({lab: g.label for lab, g in _group_index(state_groups(lev)).items()})
        between = [t for t in trans if gi.get(t.initial, t.initial) != gi.get(t.final, t.final)]
        lead = between or trans
    keep = {t.name for t in lead[:_STRONGEST]} | (names & {t.name for t in trans})
    by_e = sorted(trans, key=lambda t: t.energy_eV)
    pos = {t.name: i for i, t in enumerate(by_e)}
    for n in names:
        if n in pos:
            i = pos[n]
            keep.update(t.name for t in by_e[max(0, i - _NEIGHBOURS):i + _NEIGHBOURS + 1])
    return [t for t in trans if t.name in keep]


def full_list_hint(stack, *, lifetimes: bool = False) -> str:
    """Where every state and transition is listed: the command giving the JSON of all
    (``lifetimes``: of every LO-phonon rate and intersubband line)."""
    name = Path(stack.path).name if getattr(stack, "path", None) else "STACK.yaml"
    if lifetimes:
        return f"qwell levels {name} --lifetimes --json"
    return f"qwell levels {name} --band all --json"
