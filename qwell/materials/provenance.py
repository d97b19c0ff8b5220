"""Where every material parameter came from.

Each value of a :class:`~qwell.materials.Material` carries source keys
(:attr:`Material.sources`, ``'a+b'`` when several entries combine, as for an
alloy: the end members and the bowing).  This module turns them into
records a reviewer can sign: a built-in entry with its citation and whether
it was entered from memory, a library entry with the file, its SHA-256, the
line and the source text the group wrote (and what it replaced: the
built-in value or an earlier library's), or a value set in the stack file.

Examples
--------
>>> from qwell.materials import get_material
>>> from qwell.materials.provenance import material_provenance
>>> p = material_provenance(get_material("GaAs"))["electron_mass"]
>>> p.origins[0].kind, p.from_memory
('built-in', True)
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping
from dataclasses import dataclass

from . import _database as db
from .library import BUILTIN, MaterialSet

__all__ = ["Origin", "ParameterProvenance", "origin_of", "material_provenance",
           "provenance_json", "from_memory_count", "origin_label"]


@dataclass(frozen=True)
class Origin:
    """One entry a value rests on.

    Attributes
    ----------
    kind : {'built-in', 'library', 'stack'}
        ``'stack'``: a per-layer override or user material of the stack file
        (or a value given through the Python API).
    key : str
        Source key (``'vurgaftman2001'``, ``'library:<hash>:<line>:<key>'``, ``'user'``).
    citation : str
        Full citation text (for a library: the group's source text and the file).
    from_memory : bool
        True when the entry says it was entered from memory and not re-checked.
    file, sha256 : str or None
        Library file and the SHA-256 of its bytes.
    line : int or None
        Line of the value in the library file.
    library_key : str or None
        Dotted key of the value in the library, e.g. ``ternaries.InGaAs.bowing.valence_edge_eV``.
    source_text : str or None
        The source the library gives for the value.
    replaces : tuple of Origin
        What a library value replaced, earliest first (a built-in entry, then
        earlier libraries); empty otherwise.
    """

    kind: str
    key: str
    citation: str
    from_memory: bool
    file: str | None = None
    sha256: str | None = None
    line: int | None = None
    library_key: str | None = None
    source_text: str | None = None
    replaces: tuple = ()

    def to_json(self) -> dict:
        """Plain-dict form (``replaces`` as a list of dicts)."""
        out = {"kind": self.kind, "key": self.key, "citation": self.citation,
               "from_memory": self.from_memory}
        if self.kind == "library":
            out.update(file=self.file, sha256=self.sha256, line=self.line,
                       library_key=self.library_key, source=self.source_text)
        if self.replaces:
            out["replaces"] = [r.to_json() for r in self.replaces]
        return out


@dataclass(frozen=True)
class ParameterProvenance:
    """Provenance of one parameter of one material.

    Attributes
    ----------
    parameter : str
        Material field name (``electron_mass``, ``valence_edge_eV``, ...).
    value : float or None
        The value in internal units (see :class:`qwell.materials.Material`).
    origins : tuple of Origin
        Every entry the value rests on.
    """

    parameter: str
    value: float | None
    origins: tuple

    @property
    def from_memory(self) -> bool:
        """True when any entry the value rests on was entered from memory."""
        return any(o.from_memory for o in self.origins)

    @property
    def overrides(self) -> tuple:
        """Entries replaced by the library values this one rests on (earliest first)."""
        return tuple(r for o in self.origins for r in o.replaces)

    def to_json(self) -> dict:
        """Plain-dict form."""
        return {"value": self.value, "from_memory": self.from_memory,
                "origins": [o.to_json() for o in self.origins]}


def _is_from_memory(entry: Mapping) -> bool:
    return "from memory" in str(entry.get("note") or "").lower()


def origin_of(key: str, material_set: MaterialSet | None = None, *, _depth: int = 0) -> Origin:
    """The :class:`Origin` of one source key (no ``'+'``).

    Parameters
    ----------
    key : str
    material_set : MaterialSet, optional
        The set the value was looked up in; it knows what a library value
        replaced.  Without it ``replaces`` stays empty.
    """
    entry = db.source_entry(key)
    cite = db.citation(key)
    if key == "user":
        return Origin(kind="stack", key=key, citation="value set in the stack file (per-layer "
                      "override or user material); no published source", from_memory=False)
    if "library_file" in entry:
        replaced = ()
        if material_set is not None and _depth == 0:
            replaced = tuple(origin_of(k, material_set, _depth=1)
                             for k in material_set.replaced.get(key, ()))
        # the same bytes may be read under several paths: name the file as this set read it
        file = next((lib.path for lib in (material_set.libraries if material_set else ())
                     if lib.sha256 == entry["library_sha256"]), entry["library_file"])
        return Origin(kind="library", key=key, citation=cite, from_memory=_is_from_memory(entry),
                      file=file, sha256=entry["library_sha256"],
                      line=entry["library_line"], library_key=entry["library_key"],
                      source_text=entry["library_source"], replaces=replaced)
    return Origin(kind="built-in", key=key, citation=cite, from_memory=_is_from_memory(entry))


def material_provenance(material, material_set: MaterialSet | None = None) -> dict:
    """Parameter name -> :class:`ParameterProvenance` for every parameter with a value.

    Parameters
    ----------
    material : Material
    material_set : MaterialSet, optional
        Where the material was looked up (default: the built-in tables).
    """
    mset = material_set or BUILTIN
    out = {}
    for f in db.PARAM_FIELDS:
        v = getattr(material, f, None)
        key = (material.sources or {}).get(f)
        if v is None or not key:
            continue
        keys = [k.strip() for k in str(key).split("+") if k.strip()]
        out[f] = ParameterProvenance(parameter=f, value=float(v),
                                     origins=tuple(origin_of(k, mset) for k in keys))
    return out


def provenance_json(provenance: Mapping) -> dict:
    """JSON-ready form of :func:`material_provenance`'s result."""
    return {f: p.to_json() for f, p in provenance.items()}


def from_memory_count(materials: Iterable, material_set: MaterialSet | None = None,
                      fields: Iterable[str] | None = None) -> tuple[int, int]:
    """(values resting on from-memory entries, values counted) over some materials.

    Parameters
    ----------
    materials : iterable of Material
        The distinct materials of a design (each counted once).
    material_set : MaterialSet, optional
    fields : iterable of str, optional
        Parameters to count (default: all with a value).
    """
    wanted = None if fields is None else set(fields)
    n_mem = n = 0
    for mat in materials:
        for f, p in material_provenance(mat, material_set).items():
            if wanted is not None and f not in wanted:
                continue
            n += 1
            n_mem += p.from_memory
    return n_mem, n


def origin_label(origin: Origin, *, short: bool = False) -> str:
    """One-line description of an origin for tables and reports.

    ``'built-in, from memory: <citation>'``, ``'library lab.yaml:19 (SHA-256
    56bf8484df32...): <source text>; replaces ...'`` or ``'user-defined value in the stack file ...'``;
    ``short`` drops the citation and source texts.
    """
    if origin.kind == "library":
        text = f"library {origin.file}:{origin.line} (SHA-256 {origin.sha256[:12]}...)"
        if not short:
            text += f": {origin.source_text}"
        if origin.replaces:
            last = origin.replaces[-1]
            was = (f"{last.file}:{last.line}" if last.kind == "library" else f"built-in {last.key}")
            text += f"; overrides {was}"
        return text
    if origin.kind == "stack":
        return "user-defined value in the stack file (override or user material; no published source)"
    mem = ", from memory" if origin.from_memory else ""
    return f"built-in {origin.key}{mem}" if short else f"built-in{mem}: {origin.citation}"
