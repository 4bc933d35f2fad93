"""The package keeps a one-way house: no import cycles (function-level imports included) and no
private name imported from another module. The layer map is in DEVELOPERS.md."""
from __future__ import annotations

import ast
from pathlib import Path

PKG = Path(__file__).resolve().parents[1] / "elastofe"


def module_name(path: Path) -> str:
    rel = path.relative_to(PKG.parent).with_suffix("")
    parts = list(rel.parts)
    if parts[-1] == "__init__":
        parts = parts[:-1]
    return ".".join(parts)


def modules() -> dict[str, Path]:
    return {module_name(p): p for p in PKG.rglob("*.py")}


def imports(name: str, path: Path, known: set[str]) -> list[tuple[str, list[str], int]]:
    """(imported module, imported names, line) of every package import in the file, at any depth."""
    tree = ast.parse(path.read_text(encoding="utf-8"))
    is_pkg = path.name == "__init__.py"
    base = name.split(".") if is_pkg else name.split(".")[:-1]
    out = []
    for node in ast.walk(tree):
        if isinstance(node, ast.ImportFrom):
            if node.level:
                parent = base[: len(base) - node.level + 1]
                target = ".".join(parent + ([node.module] if node.module else []))
            else:
                target = node.module or ""
            if not target.startswith("elastofe"):
                continue
            names = [a.name for a in node.names]
            # "from . import x" imports the submodule x when there is one
            subs = [f"{target}.{n}" for n in names if f"{target}.{n}" in known]
            if subs:
                out.extend((s, [], node.lineno) for s in subs)
                rest = [n for n in names if f"{target}.{n}" not in known]
                if rest:
                    out.append((target, rest, node.lineno))
            else:
                out.append((target, names, node.lineno))
        elif isinstance(node, ast.Import):
            for a in node.names:
                if a.name.startswith("elastofe"):
                    out.append((a.name, [], node.lineno))
    return out


def graph() -> dict[str, set[str]]:
    mods = modules()
    known = set(mods)
    g: dict[str, set[str]] = {m: set() for m in mods}
    for name, path in mods.items():
        for target, _, _ in imports(name, path, known):
            if target in known and target != name:
                g[name].add(target)
    return g


def strongly_connected(g: dict[str, set[str]]) -> list[list[str]]:
    """Tarjan's algorithm; components of more than one module are cycles."""
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on: set[str] = set()
    comps: list[list[str]] = []
    counter = [0]

    def visit(v: str) -> None:
        index[v] = low[v] = counter[0]
        counter[0] += 1
        stack.append(v)
        on.add(v)
        for w in g[v]:
            if w not in index:
                visit(w)
                low[v] = min(low[v], low[w])
            elif w in on:
                low[v] = min(low[v], index[w])
        if low[v] == index[v]:
            comp = []
            while True:
                w = stack.pop()
                on.discard(w)
                comp.append(w)
                if w == v:
                    break
            comps.append(comp)

    for v in sorted(g):
        if v not in index:
            visit(v)
    return comps


def is_package(name: str, g: dict[str, set[str]]) -> bool:
    return any(m.startswith(name + ".") for m in g)


def test_no_import_cycles():
    g = graph()
    # A package's __init__ that re-exports from its own submodules is not a cycle of the data
    # flow: the edge submodule -> its own package __init__ is what we forbid instead (below).
    cycles = []
    for comp in strongly_connected(g):
        if len(comp) > 1:
            cycles.append(sorted(comp))
    assert not cycles, f"import cycles: {cycles}"


#: The layer map (DEVELOPERS.md): an import points down (or sideways, within a layer), never up.
#: Longest matching prefix wins.
LAYERS = {
    0: ["elastofe.errors", "elastofe.units", "elastofe.formula", "elastofe.files", "elastofe.progress",
        "elastofe.resources", "elastofe.notice", "elastofe.version", "elastofe.fdcapture", "elastofe.handcalc",
        "elastofe.plotting", "elastofe.xdmf",
        "elastofe.parallel"],  # parallel/__init__ only: thread limits read from the environment
    1: ["elastofe.case"],
    2: ["elastofe.fem.elements", "elastofe.fem.quadrature", "elastofe.fem.nullspace"],
    3: ["elastofe.mesh", "elastofe.fem.surface", "elastofe.locate", "elastofe.post.probe"],
    4: ["elastofe.geometry"],
    5: ["elastofe.regions"],
    6: ["elastofe.fem", "elastofe.bc", "elastofe.elimination", "elastofe.bodies"],
    7: ["elastofe.solve"],
    8: ["elastofe.result"],
    9: ["elastofe.post"],
    10: ["elastofe.stages", "elastofe.eigenstages", "elastofe.pipeline", "elastofe.parallel.distributed",
         "elastofe.parallel.partition", "elastofe.parallel.mpi", "elastofe.parallel.cli", "elastofe.parallel.halo",
         "elastofe.parallel.assembly", "elastofe.parallel.post", "elastofe.parallel.meshfiles"],
    11: ["elastofe.output"],
    12: ["elastofe.studies"],
    13: ["elastofe.report"],
    14: ["elastofe.cli", "elastofe.verify", "elastofe.job", "elastofe.notebook", "elastofe.__main__", "elastofe"],
}


def layer_of(module: str) -> int:
    best, found = -1, None
    for layer, prefixes in LAYERS.items():
        for p in prefixes:
            if (module == p or module.startswith(p + ".")) and len(p) > best:
                best, found = len(p), layer
    assert found is not None, f"{module} has no layer in LAYERS; add it (and to DEVELOPERS.md)"
    return found


def test_imports_point_down_the_layer_map():
    g = graph()
    up = [f"{m} (layer {layer_of(m)}) imports {t} (layer {layer_of(t)})"
          for m, ts in sorted(g.items()) for t in sorted(ts) if layer_of(t) > layer_of(m)]
    assert not up, "imports pointing up the layer map:\n" + "\n".join(up)


def test_nothing_imports_the_public_face():
    """The package's ``__init__`` is the public API, the top of the house: no module imports it."""
    g = graph()
    bad = [m for m, ts in g.items() if "elastofe" in ts]
    assert not bad, f"modules importing the package's __init__: {bad}"


def test_no_private_names_across_modules():
    mods = modules()
    known = set(mods)
    bad = []
    for name, path in mods.items():
        for target, names, line in imports(name, path, known):
            if target == name:
                continue
            for n in names:
                if n.startswith("_") and not n.startswith("__"):
                    bad.append(f"{name}:{line} imports {target}.{n}")
    assert not bad, "private names imported across modules:\n" + "\n".join(bad)
