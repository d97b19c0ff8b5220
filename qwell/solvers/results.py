"""Result objects of the subband solvers.

Every field documents its unit.  A solver never returns an unconverged
energy unflagged: each :class:`State` carries ``converged`` and the
``tolerance_eV`` it actually reached.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

__all__ = ["State", "Miniband", "Levels", "UNCOUPLED_WIDTH_EV"]


class _FromEnvelope:
    """A State attribute given at construction or computed on first use from its envelope.

    The exact solver stores each state compactly (its state vector at every
    slice boundary, see ``State.envelope``); the sampled ``z_nm``, ``psi`` and
    ``layer_probability`` are built from it on first access and then kept.
    A value passed to the constructor always wins.
    """

    def __init__(self, name: str, default):
        self.name, self.default = name, default

    def __get__(self, obj, owner=None):
        if obj is None:
            return self.default
        d = obj.__dict__
        val = d.get(self.name, self.default)
        if val is self.default and d.get("envelope") is not None:
            sampled = d["envelope"].sample()
            for attr, v, dflt in zip(("z_nm", "psi", "layer_probability"), sampled,
                                     (None, None, ())):
                if d.get(attr, dflt) is dflt:
                    d[attr] = v
            val = d[self.name]
        return val

    def __set__(self, obj, value):
        # frozen dataclass: written once by __init__ (object.__setattr__)
        obj.__dict__[self.name] = self.default if value is self else value


@dataclass(frozen=True)
class State:
    """One subband state.

    Attributes
    ----------
    band : str
        'conduction', 'heavy_hole' or 'light_hole'.
    label : str
        'e1', 'hh2', ... (1-based, in order of increasing carrier energy).
    index : int
        1-based index within its band.
    energy_eV : float
        Energy on the band-diagram scale, the same as the profile's band
        edges [eV].
    carrier_energy_eV : float
        Energy in the carrier convention of :mod:`qwell.bands` [eV].
    bound : bool
        True for a truly bound state; False for a quasi-bound resonance that
        can escape through a cladding (then ``lifetime_s`` is set).
    lifetime_s : float or None
        Escape lifetime [s] of a quasi-bound state (hbar / Gamma), None if bound.
    tolerance_eV : float
        Accuracy reached for ``energy_eV`` [eV] (root bracket width plus the
        discretisation error estimate, whichever is larger).
    converged : bool
        Whether ``tolerance_eV`` meets the requested tolerance.
    z_nm : numpy.ndarray or None
        Grid of the wavefunction [nm].
    psi : numpy.ndarray or None
        Real envelope function on ``z_nm`` [nm^-1/2], normalised to
        ``int |psi|^2 dz = 1`` (tails beyond the grid included analytically),
        sign chosen so that the largest lobe is positive.
    layer_probability : tuple of float
        Probability of finding the carrier in each stack layer (the first
        and last include their semi-infinite claddings).
    region : int or None
        Classically allowed region the state belongs to (semiclassical).
    validity : float or None
        Semiclassical validity figure (max |d lambda/dz|, << 1 is good).
    message : str
        Notes on this state (empty when nothing to say).
    envelope : object or None
        Compact storage the exact solver leaves instead of sampled arrays: an
        object whose ``sample()`` returns ``(z_nm, psi, layer_probability)``;
        those three attributes are computed from it on first access (and kept).
    """

    band: str
    label: str
    index: int
    energy_eV: float
    carrier_energy_eV: float
    bound: bool = True
    lifetime_s: float | None = None
    tolerance_eV: float = 0.0
    converged: bool = True
    z_nm: np.ndarray | None = field(default=_FromEnvelope("z_nm", None), repr=False,
                                    compare=False)
    psi: np.ndarray | None = field(default=_FromEnvelope("psi", None), repr=False,
                                   compare=False)
    layer_probability: tuple = field(default=_FromEnvelope("layer_probability", ()))
    region: int | None = None
    validity: float | None = None
    message: str = ""
    envelope: object = field(default=None, repr=False, compare=False)


#: Width [eV] below which a "miniband" is a level repeated in uncoupled periods (10 µeV:
#: far below any linewidth or kT of a device; common practice, no source).
UNCOUPLED_WIDTH_EV = 1e-5


@dataclass(frozen=True)
class Miniband:
    """A superlattice miniband from Bloch's theorem on one period.

    Attributes
    ----------
    band : str
    index : int
        1-based miniband index.
    bottom_eV, top_eV : float
        Band-diagram energies of the miniband edges [eV] (bottom <= top on the
        carrier scale; for holes they are mapped back with the sign).
    width_eV : float
        |top - bottom| [eV].
    repeat_index : int
        Which repeat block of the stack.
    period_nm : float
    """

    band: str
    index: int
    bottom_eV: float
    top_eV: float
    width_eV: float
    repeat_index: int
    period_nm: float

    @property
    def coupled(self) -> bool:
        """False when the width is below :data:`UNCOUPLED_WIDTH_EV`: the periods are
        practically uncoupled (one level repeated in each well), not a band."""
        return self.width_eV >= UNCOUPLED_WIDTH_EV


@dataclass(frozen=True)
class Levels:
    """All states of one band found by one method.

    Attributes
    ----------
    band : str
    method : str
        'exact' or 'semiclassical'.
    states : tuple of State
        In order of increasing carrier energy.
    converged : bool
        All states converged.
    message : str
        Summary (e.g. 'no bound state: deepest well 0.12 eV in layer "well"').
    notes : tuple of str
        Further remarks (validity warnings, leaking claddings, ...).
    minibands : tuple of Miniband
    tolerance_eV : float
        Requested energy tolerance [eV].
    confinement_limit_eV : float or None
        Band-diagram energy of the lower cladding edge (states beyond it are
        not bound) [eV].
    """

    band: str
    method: str
    states: tuple = ()
    converged: bool = True
    message: str = ""
    notes: tuple = ()
    minibands: tuple = ()
    tolerance_eV: float = 1e-7
    confinement_limit_eV: float | None = None

    def __len__(self) -> int:
        return len(self.states)

    def __getitem__(self, key):
        if isinstance(key, str):
            for s in self.states:
                if s.label == key:
                    return s
            raise KeyError(key)
        return self.states[key]

    @property
    def energies_eV(self) -> np.ndarray:
        return np.array([s.energy_eV for s in self.states])
