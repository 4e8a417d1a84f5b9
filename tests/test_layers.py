"""The package's imports follow the data: no cycle, no import from a later stage, no private
name imported across modules. Read from the source with ``ast`` (nothing is executed)."""
from __future__ import annotations

import ast
from pathlib import Path

import networkx as nx

PKG = Path(__file__).resolve().parent.parent / "derive"

# Stages in the order the data flows; a module may import its own stage and earlier ones.
STAGES = ["errors", "clock", "sheet", "circuit", "solver", "forms", "derivation", "analyses", "export",
          "pipeline", "api"]


def stage_of(mod: str) -> str:
    parts = mod.split(".")
    if len(parts) == 1 or parts[1] == "__init__":
        return "api"
    if parts[1] in ("cli", "__main__"):
        return "api"
    return parts[1]


def modules() -> dict:
    out = {}
    for f in PKG.rglob("*.py"):
        rel = f.relative_to(PKG.parent).with_suffix("")
        name = ".".join(rel.parts)
        if name.endswith(".__init__"):
            name = name[: -len(".__init__")]
        out[name] = ast.parse(f.read_text(encoding="utf-8"), str(f))
    return out


def imports(tree, name: str, known: set) -> list:
    """(imported module, imported names, line) of every derive import in ``tree``."""
    out = []
    for node in ast.walk(tree):
        if isinstance(node, ast.ImportFrom):
            if node.level:
                base = name.split(".")
                if not (PKG / Path(*name.split(".")[1:]) / "__init__.py").exists():
                    base = base[:-1]
                base = base[: len(base) - node.level + 1]
                target = ".".join(base + ([node.module] if node.module else []))
            else:
                target = node.module or ""
            if not target.startswith("derive"):
                continue
            for a in node.names:
                sub = f"{target}.{a.name}"
                if sub in known:
                    out.append((sub, [], node.lineno))
                else:
                    out.append((target, [a.name], node.lineno))
        elif isinstance(node, ast.Import):
            for a in node.names:
                if a.name.startswith("derive"):
                    out.append((a.name, [], node.lineno))
    return out


def graph():
    mods = modules()
    g = nx.DiGraph()
    edges = []
    for name, tree in mods.items():
        g.add_node(name)
        for target, names, line in imports(tree, name, set(mods)):
            g.add_edge(name, target)
            edges.append((name, target, names, line))
    return g, edges


def test_no_import_cycle():
    g, _ = graph()
    cycles = list(nx.simple_cycles(g))
    assert cycles == [], f"import cycles: {cycles[:5]}"


def test_no_import_from_a_later_stage():
    _, edges = graph()
    bad = [f"{a} (line {line}) imports {b}" for a, b, _, line in edges
           if STAGES.index(stage_of(b)) > STAGES.index(stage_of(a))]
    assert bad == [], "\n".join(bad)


def test_no_private_name_imported_across_modules():
    _, edges = graph()
    bad = [f"{a} (line {line}) imports {n} from {b}" for a, b, names, line in edges
           for n in names if n.startswith("_") and not n.startswith("__")]
    assert bad == [], "\n".join(bad)


def test_every_module_is_in_the_contributor_guide():
    """DEVELOPERS.md's module table names every module of the package (a new module that
    the guide does not describe fails here)."""
    guide = (PKG.parent / "DEVELOPERS.md").read_text(encoding="utf-8")
    missing = [str(f.relative_to(PKG)) for f in PKG.rglob("*.py")
               if f.name not in ("__init__.py", "__main__.py")
               and str(f.relative_to(PKG)) not in guide]
    assert missing == [], f"modules not in DEVELOPERS.md: {missing}"
