"""The design line: the one transition every command follows, and why.

A device engineer designs to one line: the e1-hh1 emission of a laser well,
the e3-e2 line of an intersubband emitter, the e1-e2 absorption of a
detector.  :func:`design_line` decides it in one place for ``levels``,
``size``, ``sweep``, ``tolerance`` and ``report``:

1. a transition given on the command line (``--transition``);
2. else the stack's ``line:`` block (:class:`qwell.stack.DeclaredLine`);
3. else a default from the physics of the nominal design
   (:func:`default_line`): e1-e2 when both states are bound (or, in a doped
   stack, whenever e1-e2 exists: the absorption of the populated ground
   subband), else the lowest-energy allowed interband line (e1-hh1 when
   heavy holes lie highest: compressive or unstrained wells; e1-lh1 when
   light holes lie highest: tensile wells).

In a self-consistent (doped) stack an intersubband line is the
depolarisation-shifted absorption line (see
:attr:`qwell.design.evaluate.DesignPoint.bare_transitions`).
"""

from __future__ import annotations

from dataclasses import dataclass

from ..errors import ParameterError
from ..levels import solve_stack
from ..optics import strength

__all__ = ["DesignLine", "design_line", "default_line", "ALLOWED_OVERLAP", "check_line",
           "line_bands", "HOLES_NOT_SOLVED"]

#: Smallest |<e|h>|^2 of an interband line counted as allowed (the tables' threshold).
ALLOWED_OVERLAP = 1e-3


@dataclass(frozen=True)
class DesignLine:
    """The line a command follows.

    Attributes
    ----------
    transition : str
        Transition name, e.g. ``'e1-hh1'``.
    source : str
        ``'option'`` (``--transition``), ``'declared'`` (the stack's
        ``line:``) or ``'default'`` (chosen from the physics).
    reason : str
        Why this line, in words (printed in each command's first line).
    target_eV : float or None
        Declared target photon energy [eV].
    target_text : str or None
        The declared target as written.
    depolarised : bool
        The line is an intersubband line of a self-consistent (doped) stack,
        so the commands use its depolarisation-shifted energy.
    """

    transition: str
    source: str
    reason: str
    target_eV: float | None = None
    target_text: str | None = None
    depolarised: bool = False

    @property
    def kind(self) -> str:
        """'intersubband' (e-e) or 'interband' (e-hh, e-lh)."""
        return "interband" if "h" in self.transition else "intersubband"

    def headline(self) -> str:
        """The first line of every command's text output."""
        text = f"design line {self.transition}: {self.reason}"
        if self.target_text:
            text += f"; target {self.target_text}"
        if self.depolarised:
            text += "; doped stack: the depolarisation-shifted absorption line"
        return text


def default_line(solution) -> tuple[str, str]:
    """``(transition, reason)`` of the physics default of a solved stack.

    Parameters
    ----------
    solution : qwell.levels.Solution
        Exact solution of all bands with transitions (overlaps).

    Raises
    ------
    ParameterError
        No transition at all (nothing to design to).
    """
    names = {t.name for t in solution.transitions}
    cb = solution.levels.get("conduction")
    bound = {s.label for s in cb.states if s.bound} if cb is not None else set()
    if "e1-e2" in names and {"e1", "e2"} <= bound:
        return "e1-e2", "default: the lowest bound intersubband pair (e1, e2)"
    doped = solution.self_consistent is not None
    if "e1-e2" in names and doped:
        return "e1-e2", "default: absorption of the populated ground subband (doped stack)"
    inter = [t for t in solution.transitions
             if t.kind == "interband" and (t.overlap or 0.0) >= ALLOWED_OVERLAP]
    if inter:
        low = min(inter, key=lambda t: (round(t.energy_eV, 9), -strength(t)))
        which = ("light holes lie highest (lh1 above hh1: a tensile well)"
                 if low.final.startswith("lh") else "heavy holes lie highest (hh1 above lh1)")
        return low.name, f"default: the lowest-energy allowed interband line; {which}"
    if "e1-e2" in names:
        return "e1-e2", "default: the lowest intersubband line (e2 not bound)"
    raise ParameterError("no transition to follow: the stack has no bound electron state with "
                         "a partner; states: " + (", ".join(s.label for s in solution.states)
                                                  or "none"))


#: Note of a command that solved the conduction band only (``{line}``: the line it follows).
HOLES_NOT_SOLVED = ("hole bands not solved: the design line {line} is a conduction-band "
                    "(intersubband) line; --band all adds heavy- and light-hole states and "
                    "interband transitions")


def _intersubband_name(name: str) -> bool:
    """Whether ``name`` reads as a conduction intersubband line (e1-e2, E3 - e2)."""
    parts = [p.strip().lower() for p in str(name).split("-")]
    return len(parts) == 2 and all(p[:1] == "e" and p[1:].isdigit() for p in parts)


def line_bands(stack, transitions=()) -> tuple | None:
    """The bands a command following the stack's line needs, decided without solving.

    ``('conduction',)`` when every line the command follows is a conduction
    intersubband line: the ``transitions`` given on the command line, else the
    stack's declared ``line:``.  None (every band) when one of them is an
    interband line, or when nothing is declared: the physics default
    (:func:`default_line`) needs the hole states to choose.

    Parameters
    ----------
    stack : qwell.stack.Stack
    transitions : sequence of str
        Lines named with ``--transition`` (win over the declared line).
    """
    names = list(transitions or ())
    if not names:
        declared = stack.declared_line
        if declared is None:
            return None
        names = [declared.transition]
    if all(_intersubband_name(n) for n in names):
        return ("conduction",)
    return None


def check_line(name: str, solution, where: str = "the nominal design") -> None:
    """Raise :class:`ParameterError` naming the states that exist when ``name`` is absent."""
    have = [t.name for t in solution.transitions]
    if name in have:
        return
    states = ", ".join(s.label for s in solution.states) or "none"
    raise ParameterError(f"line {name!r} does not exist at {where}; states there: {states}")


def design_line(stack, transition: str | None = None, solution=None, *,
                check: bool = True) -> DesignLine:
    """The line the commands follow on ``stack`` (see the module docstring).

    Parameters
    ----------
    stack : qwell.stack.Stack
    transition : str, optional
        A line chosen on the command line (wins over the stack's).
    solution : qwell.levels.Solution, optional
        The exact nominal solution (all bands, transitions) if the caller has
        one; else it is solved here when the default is needed or a declared
        line must be checked.
    check : bool
        Check that a declared line exists at the nominal design (the design
        workflows check it themselves on their own nominal solve).

    Raises
    ------
    ParameterError
        A declared line that does not exist at the nominal design (the
        message names the states that do).
    """
    declared = stack.declared_line
    doped = bool(stack.self_consistent)
    if transition:
        name, source = transition, "option"
        reason = "given with --transition"
        target_eV = target_text = None
        if declared is not None and declared.transition == transition:
            reason = "given with --transition (the stack's declared line)"
            target_eV, target_text = declared.target_eV, declared.target_text
    elif declared is not None:
        name, source = declared.transition, "declared"
        where = f"{stack.path}:{declared.line}" if stack.path and declared.line else "the stack"
        reason = f"declared in the stack (line: at {where})"
        target_eV, target_text = declared.target_eV, declared.target_text
        if check:
            # no solution given: solve the bands the declared line needs (None: all)
            check_line(name, solution if solution is not None
                       else solve_stack(stack, bands=line_bands(stack)))
    else:
        sol = solution if solution is not None else solve_stack(stack)
        name, reason = default_line(sol)
        source, target_eV, target_text = "default", None, None
    kind = "interband" if "h" in name else "intersubband"
    return DesignLine(transition=name, source=source, reason=reason, target_eV=target_eV,
                      target_text=target_text, depolarised=doped and kind == "intersubband")
