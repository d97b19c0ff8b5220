"""The import graph of qwell, read from the source with ``ast``.

(a) no import cycle among qwell modules; (b) no import pointing up the layer table below;
(c) no import of a qwell module inside a function unless that line or the line above
carries a comment saying why.  Every module must be placed in the layer table, so a new
module has to be given its layer here (common practice, no source).
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1] / "qwell"

#: Layers from the bottom up.  A module may import from its own layer and the layers
#: below.  Sub-packages (materials/, solvers/, and design/, report/, cli/ when they are
#: packages) count as one entry: their modules share the layer.
LAYERS = (
    ("constants", "errors", "rootfind"),
    ("unit_table",),
    ("units", "spectral"),
    ("fileio", "parallel", "yamlio"),
    ("materials",),
    ("strain", "formula"),
    ("stack", "stack_edit", "stack_text"),
    ("bands", "profile", "reference"),
    ("stack_bands",),           # the solver bands alone, from the profile's layer functions
    ("solvers",),
    ("optics", "poisson", "lifetimes", "carriers", "excitons"),
    ("selfconsistent",),
    ("levels",),
    ("absorption", "gain"),     # stack-level spectra: they solve a stack through levels
    ("design",),
    ("plots", "diagram", "spectra_plots"),
    ("report",),
    ("cli",),
    ("qwell",),                 # the package itself: the public API imports everything
)
LAYER = {name: i for i, names in enumerate(LAYERS) for name in names}


def _module_name(path: Path) -> str:
    rel = path.relative_to(ROOT.parent).with_suffix("")
    parts = list(rel.parts)
    if parts[-1] == "__init__":
        parts.pop()
    return ".".join(parts)


MODULES = {_module_name(p): p for p in sorted(ROOT.rglob("*.py"))}


def _entry(module: str) -> str:
    """Layer-table entry of a module: 'qwell' for the package, else its first component."""
    parts = module.split(".")
    return "qwell" if len(parts) == 1 else parts[1]


def _is_package(module: str) -> bool:
    return MODULES[module].name == "__init__.py"


def _imports(module: str):
    """(imported qwell module, line number, inside a function?) for every import."""
    path = MODULES[module]
    tree = ast.parse(path.read_text(encoding="utf-8"), filename=str(path))
    package = module if _is_package(module) else module.rpartition(".")[0]
    out = []

    def visit(node, in_function):
        for child in ast.iter_child_nodes(node):
            inner = in_function or isinstance(child, (ast.FunctionDef, ast.AsyncFunctionDef,
                                                      ast.Lambda))
            if isinstance(child, ast.Import):
                for alias in child.names:
                    if alias.name == "qwell" or alias.name.startswith("qwell."):
                        out.append((alias.name, child.lineno, in_function))
            elif isinstance(child, ast.ImportFrom):
                if child.level:
                    base = package.split(".")
                    base = base[: len(base) - (child.level - 1)]
                    target = ".".join(base + ([child.module] if child.module else []))
                else:
                    target = child.module or ""
                if target == "qwell" or target.startswith("qwell."):
                    found = []
                    for alias in child.names:
                        sub = f"{target}.{alias.name}"
                        if sub in MODULES:
                            found.append(sub)
                        elif target == "qwell" and alias.name == "__version__":
                            continue    # a constant of the package, not a dependency on its API
                        else:
                            found.append(target)
                    out.extend((t, child.lineno, in_function) for t in dict.fromkeys(found))
            visit(child, inner)

    visit(tree, False)
    return out


GRAPH = {m: sorted({t for t, _, _ in _imports(m) if t != m and t in MODULES}) for m in MODULES}


def test_every_module_has_a_layer():
    missing = sorted(m for m in MODULES if _entry(m) not in LAYER)
    assert not missing, ("place these modules in LAYERS of tests/test_architecture.py: "
                         + ", ".join(missing))


def test_no_import_cycle():
    cycles, state, stack = [], {}, []

    def dfs(m):
        state[m] = "open"
        stack.append(m)
        for t in GRAPH[m]:
            # a package's own modules importing each other or the package are not a cycle
            # of topics; only cycles through more than one layer-table entry count
            if state.get(t) == "open":
                cyc = stack[stack.index(t):] + [t]
                if len({_entry(x) for x in cyc}) > 1:
                    cycles.append(" -> ".join(cyc))
            elif t not in state:
                dfs(t)
        stack.pop()
        state[m] = "done"

    for m in MODULES:
        if m not in state:
            dfs(m)
    assert not cycles, "import cycles:\n" + "\n".join(cycles)


def test_no_upward_import():
    bad = []
    for m in MODULES:
        if _entry(m) not in LAYER:
            continue
        for t, line, _ in _imports(m):
            if t in MODULES and _entry(t) in LAYER and LAYER[_entry(t)] > LAYER[_entry(m)]:
                bad.append(f"{MODULES[m].relative_to(ROOT.parent)}:{line}: {m} imports {t}")
    assert not bad, "imports pointing up the layers:\n" + "\n".join(bad)


def test_no_unexplained_import_in_a_function():
    bad = []
    for m, path in MODULES.items():
        lines = path.read_text(encoding="utf-8").splitlines()
        for _target, line, in_function in _imports(m):
            if not in_function:
                continue
            here, above = lines[line - 1], lines[line - 2] if line >= 2 else ""
            if "#" in here or above.strip().startswith("#"):
                continue
            bad.append(f"{path.relative_to(ROOT.parent)}:{line}: {here.strip()}")
    assert not bad, ("imports of qwell modules inside functions without a comment saying why:\n"
                     + "\n".join(bad))


@pytest.mark.parametrize("module", ["qwell.selfconsistent", "qwell.solvers", "qwell.optics"])
def test_physics_layer_does_not_import_the_stack_api(module):
    # the loop and the solvers sit below levels: they never import it
    assert "qwell.levels" not in GRAPH[module]
