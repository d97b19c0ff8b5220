"""``qwell materials [NAME]``: the material list, one material's parameters with the provenance
of each value, or ``--check FILE``: a material library checked before use."""

from __future__ import annotations

from ..errors import QwellError, one_line
from ..materials import check_library, format_check, material_provenance, material_set, origin_label
from ..units import out_of_range, to_float
from .common import EXIT_USAGE, add_library_option, print_json, table
from .json_out import library_check_json, material_json, material_list_json

__all__ = ["register", "cmd_materials"]


def register(subparsers) -> None:
    """Add ``materials`` to the ``qwell`` sub-commands."""
    m = subparsers.add_parser("materials", help="list materials, show one's parameters and where "
                              "each value comes from, or check a material library")
    m.add_argument("name", nargs="?", help="material, e.g. GaAs or Al0.3Ga0.7As")
    m.add_argument("--temperature", default="300 K", help="temperature (default 300 K)")
    m.add_argument("--json", action="store_true", help="machine-readable output")
    m.add_argument("--check", metavar="FILE",
                   help="check a material library (units, types, keys, impossible values, gaps "
                        "in range, Kane-mass consistency); exit status 2 when it is refused")
    add_library_option(m)
    m.set_defaults(func=cmd_materials)


def cmd_materials(args) -> int:
    """Run ``qwell materials``; returns the exit status."""
    if args.check:
        if args.name or args.library:
            raise QwellError("--check FILE checks one library on its own; expected no NAME "
                             "and no --library with it")
        res = check_library(args.check)
        if args.json:
            print_json(library_check_json(res))
        else:
            print(format_check(res))
        return 0 if res.ok else EXIT_USAGE
    mset = material_set(args.library)
    if not args.name:
        names = mset.known_materials()
        if args.json:
            print_json(material_list_json(names))
        else:
            print("Known materials (formula notation with numbers, e.g. Al0.3Ga0.7As):")
            for n in names:
                print(f"  {n}")
        return 0
    temperature_K = to_float(args.temperature, "K", "a temperature (e.g. '300 K')")
    # the published tables are at 0 K: 0 K is allowed, else the plausible range
    why = None if temperature_K == 0 else out_of_range("temperature", temperature_K)
    if why is not None:
        raise QwellError(f"--temperature {one_line(repr(args.temperature))} {why}")
    mat = mset.get_material(args.name, temperature_K)
    if args.json:
        print_json(material_json(mat, temperature_K, mset))
        return 0
    print_parameters(mat, temperature_K, mset)
    return 0


def print_parameters(mat, temperature_K: float, mset=None) -> None:
    """Parameter table with numbered origins and a from-memory mark, then the origin list."""
    params = mat.parameters()
    prov = material_provenance(mat, mset)
    print(f"{mat.name}  ({mat.family}, T = {temperature_K:g} K)")
    if mset is not None and mset.libraries:
        for lib in mset.libraries:
            print(f"library: {lib.path}  (SHA-256 {lib.sha256})")
    labels: list[str] = []
    rows = []
    for k, v in params.items():
        p = prov.get(k)
        refs, memory = "", ""
        if p is not None:
            nums = []
            for o in p.origins:
                text = origin_label(o)
                if text not in labels:
                    labels.append(text)
                nums.append(labels.index(text) + 1)
            refs = "[" + ",".join(str(n) for n in sorted(set(nums))) + "]"
            memory = "yes" if p.from_memory else "no"
        rows.append([k, "—" if v is None else f"{v:.6g}", refs, memory])
    print(table(rows, ["parameter", "value", "source", "from memory"], ["<", ">", "<", "<"]))
    print()
    for i, c in enumerate(labels, 1):
        print(f"[{i}] {c}")
