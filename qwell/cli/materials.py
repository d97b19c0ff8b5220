"""``qwell materials [NAME]``: the material list, or one material's parameters and sources."""

from __future__ import annotations

from ..errors import QwellError, one_line
from ..materials import get_material, known_materials
from ..units import out_of_range, to_float
from .common import print_json, table
from .json_out import material_json, material_list_json

__all__ = ["register", "cmd_materials"]


def register(subparsers) -> None:
    """Add ``materials`` to the ``qwell`` sub-commands."""
    m = subparsers.add_parser("materials", help="list materials, or show one's parameters and sources")
    m.add_argument("name", nargs="?", help="material, e.g. GaAs or Al0.3Ga0.7As")
    m.add_argument("--temperature", default="300 K", help="temperature (default 300 K)")
    m.add_argument("--json", action="store_true", help="machine-readable output")
    m.set_defaults(func=cmd_materials)


def cmd_materials(args) -> int:
    """Run ``qwell materials``; returns the exit status."""
    if not args.name:
        names = known_materials()
        if args.json:
            print_json(material_list_json(names))
        else:
            print("Known materials (formula notation with numbers, e.g. Al0.3Ga0.7As):")
            for n in names:
                print(f"  {n}")
        return 0
    temperature_K = to_float(args.temperature, "K", "a temperature (e.g. '300 K')")
    why = out_of_range("temperature", temperature_K)
    if why is not None:
        raise QwellError(f"--temperature {one_line(repr(args.temperature))} {why}")
    mat = get_material(args.name, temperature_K)
    if args.json:
        print_json(material_json(mat, temperature_K))
        return 0
    print_parameters(mat, temperature_K)
    return 0


def print_parameters(mat, temperature_K: float) -> None:
    """Parameter table with numbered sources, then the numbered source list."""
    params = mat.parameters()
    sources = mat.parameter_sources()
    print(f"{mat.name}  ({mat.family}, T = {temperature_K:g} K)")
    cites = []
    rows = []
    for k, v in params.items():
        src = sources.get(k, "")
        if src not in cites:
            cites.append(src)
        rows.append([k, "—" if v is None else f"{v:.6g}", f"[{cites.index(src) + 1}]"])
    print(table(rows, ["parameter", "value", "source"], ["<", ">", "<"]))
    print()
    for i, c in enumerate(cites, 1):
        print(f"[{i}] {c}")
