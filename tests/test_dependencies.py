"""Every module derive imports at run time is the standard library, derive itself, or provided
by a distribution declared in pyproject's [project] dependencies; a missing one is an install
hint, not an internal error."""
from __future__ import annotations

import ast
import importlib.metadata
import os
import re
import subprocess
import sys
from pathlib import Path

import pytest

from derive import cli

ROOT = Path(__file__).resolve().parent.parent
PACKAGE = ROOT / "derive"


def _normal(name: str) -> str:
    """PEP 503 normalized distribution name."""
    return re.sub(r"[-_.]+", "-", name).lower()


def declared_dependencies() -> set:
    text = (ROOT / "pyproject.toml").read_text(encoding="utf-8")
    try:
        import tomllib
        deps = tomllib.loads(text)["project"]["dependencies"]
    except ImportError:          # Python 3.10: the [project] dependencies array by hand
        block = re.search(r"(?ms)^\[project\].*?^dependencies\s*=\s*\[(.*?)\]", text).group(1)
        deps = re.findall(r"\"([^\"]+)\"", block)
    return {_normal(re.match(r"[A-Za-z0-9._-]+", d).group(0)) for d in deps}


def runtime_imports() -> dict:
    """Top-level module -> [file:line] of every absolute import in derive/ (also inside
    functions) and of importlib.import_module("literal") calls."""
    found = {}
    for path in sorted(PACKAGE.rglob("*.py")):
        tree = ast.parse(path.read_text(encoding="utf-8"), str(path))
        for node in ast.walk(tree):
            names = []
            if isinstance(node, ast.Import):
                names = [a.name for a in node.names]
            elif isinstance(node, ast.ImportFrom) and node.level == 0 and node.module:
                names = [node.module]
            elif (isinstance(node, ast.Call) and getattr(node.func, "attr", None) ==
                  "import_module" and node.args and isinstance(node.args[0], ast.Constant)
                  and isinstance(node.args[0].value, str)):
                names = [node.args[0].value]
            for n in names:
                found.setdefault(n.split(".")[0], []).append(
                    f"{path.relative_to(ROOT)}:{node.lineno}")
    return found


def third_party(found: dict) -> dict:
    return {m: w for m, w in found.items()
            if m != "derive" and m not in sys.stdlib_module_names and m != "__future__"}


def test_the_scan_sees_imports_inside_functions():
    found = runtime_imports()
    # tolerance.py imports scipy inside the interior search only (a lazy import)
    assert any(w.startswith(os.path.join("derive", "analyses", "tolerance.py")) for w in found["scipy"])
    assert {"sympy", "flint", "lark", "jinja2", "pylatex", "numpy", "matplotlib"} <= \
        set(third_party(found))


def test_every_runtime_import_is_a_declared_dependency():
    declared = declared_dependencies()
    installed = importlib.metadata.packages_distributions()   # what this environment says
    missing = {}
    for module, where in third_party(runtime_imports()).items():
        dists = {_normal(d) for d in installed.get(module, [])} or \
            {_normal(cli.DISTRIBUTIONS.get(module, module))}
        if not dists & declared:
            missing[module] = (sorted(dists), where[:3])
    assert not missing, f"imported at run time but not in [project] dependencies: {missing}"


def test_install_hint_names_match_the_installed_distributions():
    installed = importlib.metadata.packages_distributions()
    for module, dist in cli.DISTRIBUTIONS.items():
        if module in installed:
            assert _normal(dist) in {_normal(d) for d in installed[module]}, module


SHEET = ("voltage source V between a and gnd = 10 V\nresistor R1 between a and b = 1 kohm\n"
         "resistor R2 between b and gnd = 4 kohm\nport out between b and gnd\n"
         "find thevenin at out\n")


def _run_without(module: str, tmp_path, *args):
    """``derive record`` in a fresh interpreter in which ``module`` cannot be imported."""
    (tmp_path / "d.eqv").write_text(SHEET, encoding="utf-8")
    code = (f"import sys; sys.modules[{module!r}] = None\n"
            "from derive.cli import main\n"
            f"sys.exit(main(['record', 'd.eqv', *{list(args)!r}]))\n")
    return subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                          cwd=tmp_path, env={**os.environ, "PYTHONPATH": str(ROOT)},
                          timeout=300)


@pytest.mark.parametrize("module,dist,args", [
    ("flint", "python-flint", ["--format", "json"]),
    ("flint", "python-flint", ["--format", "json", "--timeout", "300"]),   # the worker path
    ("pylatex", "pylatex", ["--format", "tex"]),    # behind the exporter's ImportError guard
    ("jinja2", "jinja2", ["--format", "md"]),
])
def test_a_missing_package_is_an_install_hint(tmp_path, module, dist, args):
    p = _run_without(module, tmp_path, *args)
    assert p.returncode == 2, p.stderr
    assert p.stderr.startswith(f"derive: error: derive needs the package {dist}"), p.stderr
    assert f"pip install {dist}" in p.stderr
    assert "internal error" not in p.stderr and "Traceback" not in p.stderr
    assert p.stdout == ""
