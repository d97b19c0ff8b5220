"""Brent's root bracketing method on a scalar function, in plain Python floats.

:func:`brentq` follows step for step the algorithm of ``scipy.optimize.brentq`` (the
C routine ``brentq.c``: inverse quadratic interpolation / secant, else bisection, with
the tolerance ``xtol + rtol |x|``), so it returns the same float; it exists so that the
Matthews-Blakeslee balance solved on every stack does not import ``scipy.optimize``
(~0.1-0.5 s of start-up).  ``tests/test_rootfind.py`` compares it with scipy's bit for bit.

References
----------
.. [1] R. P. Brent, Algorithms for Minimization without Derivatives, Prentice-Hall (1973),
   chapter 4.
"""

from __future__ import annotations

import math
from typing import Callable

from .errors import ConvergenceError

__all__ = ["brentq"]


def brentq(f: Callable[[float], float], a: float, b: float, *, xtol: float = 2e-12,
           rtol: float = 8.881784197001252e-16, maxiter: int = 100) -> float:
    """Root of ``f`` in ``[a, b]`` (``f(a)`` and ``f(b)`` of opposite signs).

    Raises
    ------
    ValueError
        If ``f(a)`` and ``f(b)`` have the same sign, or the tolerances are not positive.
    ConvergenceError
        If ``maxiter`` steps do not reach the tolerance.
    """
    if xtol <= 0 or rtol < 4 * 2.220446049250313e-16:
        raise ValueError("xtol must be > 0 and rtol >= 4 eps")
    xpre, xcur = float(a), float(b)
    xblk = fblk = spre = scur = 0.0
    fpre = float(f(xpre))
    fcur = float(f(xcur))
    if fpre == 0:
        return xpre
    if fcur == 0:
        return xcur
    if math.copysign(1.0, fpre) == math.copysign(1.0, fcur):
        raise ValueError("f(a) and f(b) must have different signs")
    for _ in range(maxiter):
        if fpre != 0 and fcur != 0 and math.copysign(1.0, fpre) != math.copysign(1.0, fcur):
            xblk = xpre
            fblk = fpre
            spre = scur = xcur - xpre
        if abs(fblk) < abs(fcur):
            xpre, xcur, xblk = xcur, xblk, xcur
            fpre, fcur, fblk = fcur, fblk, fcur
        delta = (xtol + rtol * abs(xcur)) / 2
        sbis = (xblk - xcur) / 2
        if fcur == 0 or abs(sbis) < delta:
            return xcur
        if abs(spre) > delta and abs(fcur) < abs(fpre):
            if xpre == xblk:
                stry = -fcur * (xcur - xpre) / (fcur - fpre)          # interpolate
            else:
                dpre = (fpre - fcur) / (xpre - xcur)                    # extrapolate
                dblk = (fblk - fcur) / (xblk - xcur)
                stry = -fcur * (fblk * dblk - fpre * dpre) / (dblk * dpre * (fblk - fpre))
            if 2 * abs(stry) < min(abs(spre), 3 * abs(sbis) - delta):
                spre = scur                                             # good short step
                scur = stry
            else:
                spre = sbis                                             # bisect
                scur = sbis
        else:
            spre = sbis
            scur = sbis
        xpre = xcur
        fpre = fcur
        if abs(scur) > delta:
            xcur += scur
        else:
            xcur += delta if sbis > 0 else -delta
        fcur = float(f(xcur))
    raise ConvergenceError(f"brentq: no convergence in {maxiter} iterations")
