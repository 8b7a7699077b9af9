"""The package's import structure: the layer contract, no cycles, no hidden imports.

The contract itself is written once, in ``pyproject.toml`` (``[tool.importlinter]``),
and checked here with import-linter (Seddon, import-linter documentation, "Layers"
and "Acyclic siblings" contract types), whose graph (grimp) includes imports made
inside functions, so a function-local import cannot dodge a layer.  On top of that
this file checks, over the source text:

* no module imports a module of the package inside a function, except the command
  modules (``renderer/commands``), which defer the library to the moment a command
  runs so that ``magretina --help`` starts without numba; every such deferral, and
  every function-local import of anything else, carries a ``# deferred:`` comment
  saying why (common practice: lazy imports only for start-up cost or optional
  dependencies, and said so);
* the import graph has no cycle at all (depth-first search over grimp's graph);
* ``import renderer.field`` and building the CLI parser do not import numba, the
  kernels or matplotlib (checked in a fresh interpreter, so nothing else of the test
  session leaks in).
"""

from __future__ import annotations

import ast
import os
import subprocess
import sys
from pathlib import Path

import grimp
import pytest

ROOT = Path(__file__).resolve().parents[1]
PACKAGE = ROOT / "renderer"

#: The part of the package where deferring a library import is the point.
DEFERRING = ("renderer.commands",)


def _module_name(path: Path) -> str:
    rel = path.relative_to(ROOT).with_suffix("")
    parts = list(rel.parts)
    if parts[-1] == "__init__":
        parts.pop()
    return ".".join(parts)


def _sources():
    for p in sorted(PACKAGE.rglob("*.py")):
        yield _module_name(p), p


def _resolve(module: str, is_package: bool, node) -> list[str]:
    """Absolute names a (possibly relative) import statement refers to."""
    if isinstance(node, ast.Import):
        return [a.name for a in node.names]
    if node.level == 0:
        return [node.module or ""]
    base = module.split(".")
    if not is_package:
        base = base[:-1]
    base = base[: len(base) - (node.level - 1)]
    target = ".".join(base + ([node.module] if node.module else []))
    if node.module:
        return [target]
    return [f"{target}.{a.name}" for a in node.names]


def _function_imports():
    """(module, path, line, imported names, has a '# deferred:' comment) for every import
    statement inside a function body of the package."""
    out = []
    for module, path in _sources():
        text = path.read_text(encoding="utf-8")
        lines = text.splitlines()
        tree = ast.parse(text)
        is_package = path.name == "__init__.py"
        for fn in ast.walk(tree):
            if not isinstance(fn, (ast.FunctionDef, ast.AsyncFunctionDef)):
                continue
            for node in ast.walk(fn):
                if isinstance(node, (ast.Import, ast.ImportFrom)):
                    span = lines[fn.lineno - 1: node.lineno]
                    noted = any("# deferred:" in ln for ln in span)
                    out.append((module, path, node.lineno, _resolve(module, is_package, node),
                                noted))
    return out


def test_import_contract_holds():
    """The layers, study-stage and acyclic-siblings contracts of pyproject.toml are kept
    (import-linter run in a fresh interpreter on this checkout, without its cache)."""
    r = _fresh("from importlinter.cli import lint_imports; raise SystemExit(lint_imports("
               "config_filename='pyproject.toml', no_cache=True, no_logo=True))")
    assert r.returncode == 0, "import contract broken:\n" + r.stdout[-4000:] + r.stderr[-2000:]


def test_contract_covers_every_top_level_module():
    """Every top-level module or subpackage of renderer is placed in a layer (the contract
    is exhaustive), so a new module cannot sit outside the order unnoticed."""
    import tomllib

    cfg = tomllib.loads((ROOT / "pyproject.toml").read_text(encoding="utf-8"))
    layers = next(c for c in cfg["tool"]["importlinter"]["contracts"] if c["id"] == "layers")
    assert layers["exhaustive"] is True
    named = {m.strip(" ()") for layer in layers["layers"] for m in layer.split("|")}
    present = {p.stem if p.is_file() else p.name for p in PACKAGE.iterdir()
               if (p.suffix == ".py" and p.stem != "__init__") or (p / "__init__.py").is_file()}
    assert present <= named, f"modules outside the layer contract: {sorted(present - named)}"


def test_no_function_local_imports_of_the_package():
    """A module of the package is imported at module level, never inside a function
    (outside the command modules, whose deferral is deliberate and commented)."""
    bad = []
    for module, path, line, names, noted in _function_imports():
        own = [n for n in names if n == "renderer" or n.startswith("renderer.")]
        if not own:
            continue
        if module.startswith(DEFERRING) and noted:
            continue
        bad.append(f"{path.relative_to(ROOT)}:{line} imports {', '.join(own)}")
    assert not bad, "function-local imports of the package (move the code to the right " \
                    "layer, or import at module level):\n" + "\n".join(bad)


def test_every_deferred_import_says_why():
    """Any import inside a function (an optional or slow dependency) has a '# deferred:'
    comment in that function, before or on the import line."""
    bad = [f"{path.relative_to(ROOT)}:{line} imports {', '.join(names)}"
           for module, path, line, names, noted in _function_imports()
           if not noted]
    assert not bad, "function-local imports without a '# deferred: why' comment:\n" + \
        "\n".join(bad)


def test_the_detector_sees_a_function_local_import():
    """The source scan finds a function-local relative import and resolves it (guards the
    checks above against passing because they see nothing)."""
    found = [r for r in _function_imports() if r[0].startswith(DEFERRING)]
    assert any(any(n.startswith("renderer.") for n in r[3]) for r in found)
    tree = ast.parse("def f():\n    from ..pipeline import render\n")
    node = tree.body[0].body[0]
    assert _resolve("renderer.study.metrics", False, node) == ["renderer.pipeline"]
    assert _resolve("renderer.study", True, ast.parse("from . import config").body[0]) == \
        ["renderer.study.config"]


def test_import_graph_has_no_cycle():
    """Depth-first search over every module's direct imports (grimp, function-local ones
    included) finds no back edge."""
    g = grimp.build_graph("renderer", cache_dir=None)
    adj = {m: sorted(g.find_modules_directly_imported_by(m)) for m in g.modules}
    state, cycles = {}, []

    def visit(v, path):
        state[v] = 1
        path.append(v)
        for w in adj.get(v, ()):
            if state.get(w) == 1:
                cycles.append(path[path.index(w):] + [w])
            elif w not in state:
                visit(w, path)
        path.pop()
        state[v] = 2

    sys.setrecursionlimit(max(sys.getrecursionlimit(), 10000))
    for m in sorted(adj):
        if m not in state:
            visit(m, [])
    assert not cycles, "import cycles:\n" + "\n".join(" -> ".join(c) for c in cycles)


def _fresh(code: str) -> subprocess.CompletedProcess:
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    return subprocess.run([sys.executable, "-c", code], cwd=ROOT, env=env, capture_output=True,
                          text=True, timeout=120)


@pytest.mark.parametrize("code", [
    "import renderer.field, sys; heavy = [m for m in ('numba', 'renderer.kernels', "
    "'renderer.pipeline', 'matplotlib') if m in sys.modules]; assert not heavy, heavy",
    "import renderer, sys; assert 'numba' not in sys.modules and renderer.__version__",
    "from renderer.cli import build_parser; import sys; p = build_parser(); "
    "p.parse_args(['field', '--lat', '1', '--lon', '2']); heavy = [m for m in ('numba', "
    "'renderer.kernels', 'renderer.pipeline', 'matplotlib', 'ppigrf', 'pandas') "
    "if m in sys.modules]; assert not heavy, heavy",
])
def test_light_imports_stay_light(code):
    """The field models, the package root and the command-line parser (all subcommands
    registered) load without numba, the kernels, matplotlib, or (for the parser) the
    IGRF coefficients' pandas."""
    r = _fresh(code)
    assert r.returncode == 0, r.stderr


def test_lazy_root_attributes_resolve():
    """renderer.render and friends still resolve (lazily) to the pipeline's functions."""
    r = _fresh("import renderer, renderer.pipeline as p; "
               "assert all(getattr(renderer, n) is getattr(p, n) for n in "
               "('render', 'render_pattern', 'render_signal', 'visual_field_mean')); "
               "assert 'render' in dir(renderer)")
    assert r.returncode == 0, r.stderr
