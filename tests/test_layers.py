"""The dependency rules of the layout, read from the source (ast, nothing imported).

The rules (DEVELOPERS.md, "Architecture"):

1. ``ledger/stats/`` is pure: its modules import only each other, ``ledger.errors`` (the error
   hierarchy, which imports nothing of the project) and outside libraries.
2. ``ledger`` never imports ``reports`` at module level. Only a command of ``ledger/cli/`` may
   import ``reports``, inside the function of the command that renders (so ``import ledger``
   never loads matplotlib or jinja2); anywhere else in ``ledger/`` even that is refused.
3. No module imports another module's private name: no ``from m import _name``, no
   ``import m as _alias`` / ``from p import m as _alias``, no ``m._name`` on an imported module.
4. No cycle among module-level imports (those under ``if TYPE_CHECKING:`` are not run and do
   not count; imports inside functions run late and do not count either).
5. Outside ``ledger/stats/``, no module of ``ledger`` imports pandas or pyarrow at module level:
   it takes the stand-ins of ``ledger.lazy``, so that a command's start-up loads neither until
   it uses them (``import pandas`` alone is about 0.45 s of CPU).

Each checker is first shown to catch an invented violation, so a rule cannot pass by finding
nothing to look at.
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
PACKAGES = ("ledger", "reports")
PURE = "ledger.stats"
PURE_MAY_IMPORT = ("ledger.stats", "ledger.errors")
ABOVE_PURE = ("ledger.findings", "ledger.scoring", "ledger.intake", "ledger.methods", "ledger.cli", "reports")


# ---------------------------------------------------------------------------------------------
# reading the imports


def module_name(path: Path, root: Path) -> str:
    parts = list(path.relative_to(root).with_suffix("").parts)
    return ".".join(parts[:-1] if parts[-1] == "__init__" else parts)


def sources(root: Path) -> dict[str, tuple[Path, ast.Module]]:
    """Every module of the packages under ``root``: dotted name -> (path, parsed tree)."""
    out = {}
    for package in PACKAGES:
        for path in sorted((root / package).rglob("*.py")):
            out[module_name(path, root)] = (path, ast.parse(path.read_text(encoding="utf-8"), str(path)))
    return out


def _is_type_checking(test: ast.expr) -> bool:
    return (isinstance(test, ast.Name) and test.id == "TYPE_CHECKING") or (
        isinstance(test, ast.Attribute) and test.attr == "TYPE_CHECKING")


def _walk(body: list[ast.stmt], in_function: bool):
    """(import statement, inside a function?) for every import that can run."""
    for node in body:
        if isinstance(node, (ast.Import, ast.ImportFrom)):
            yield node, in_function
        elif isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef)):
            yield from _walk(node.body, True)
        elif isinstance(node, ast.If) and _is_type_checking(node.test):
            yield from _walk(node.orelse, in_function)
        else:
            for field in ("body", "orelse", "finalbody", "handlers", "cases"):
                inner = getattr(node, field, None)
                if isinstance(inner, list):
                    stmts = [s for s in inner if isinstance(s, ast.stmt)]
                    stmts += [s for h in inner if isinstance(h, (ast.ExceptHandler, ast.match_case)) for s in h.body]
                    yield from _walk(stmts, in_function)


def _base(module: str, is_package: bool, node: ast.ImportFrom) -> str:
    if not node.level:
        return node.module or ""
    parts = module.split(".") if is_package else module.split(".")[:-1]
    parts = parts[: len(parts) - (node.level - 1)]
    return ".".join(parts + ([node.module] if node.module else []))


def imports(module: str, path: Path, tree: ast.Module, known: set[str]):
    """(target module, [names], alias names, line, inside a function?) of each import of ``module``.

    ``from p import m`` names module ``p.m`` when that is a module of the project.
    """
    is_package = path.name == "__init__.py"
    for node, in_function in _walk(tree.body, False):
        if isinstance(node, ast.Import):
            for a in node.names:
                yield a.name, [], [a.asname] if a.asname else [], node.lineno, in_function
            continue
        base = _base(module, is_package, node)
        if base == "__future__":
            continue
        plain = []
        for a in node.names:
            sub = f"{base}.{a.name}"
            if sub in known:
                yield sub, [], [a.asname] if a.asname else [], node.lineno, in_function
            else:
                plain.append(a)
        if plain:
            yield (base, [a.name for a in plain], [a.asname for a in plain if a.asname], node.lineno,
                   in_function)


def _within(target: str, prefix: str) -> bool:
    return target == prefix or target.startswith(prefix + ".")


def _private(name: str) -> bool:
    return name.startswith("_") and not name.startswith("__")


# ---------------------------------------------------------------------------------------------
# the rules


def impure_imports(mods) -> list[str]:
    known = set(mods)
    bad = []
    for module, (path, tree) in mods.items():
        if not _within(module, PURE):
            continue
        for target, _, _, line, _ in imports(module, path, tree, known):
            project = target.split(".")[0] in PACKAGES
            if project and not any(_within(target, ok) for ok in PURE_MAY_IMPORT):
                bad.append(f"{path.relative_to(ROOT) if path.is_relative_to(ROOT) else path}:{line} imports {target}")
    return bad


def report_imports(mods) -> list[str]:
    known = set(mods)
    bad = []
    for module, (path, tree) in mods.items():
        if not _within(module, "ledger"):
            continue
        for target, _, _, line, in_function in imports(module, path, tree, known):
            if not _within(target, "reports"):
                continue
            if not in_function:
                bad.append(f"{module}:{line} imports {target} at module level")
            elif not _within(module, "ledger.cli"):
                bad.append(f"{module}:{line} imports {target} (only a CLI command may, inside its function)")
    return bad


def private_imports(mods) -> list[str]:
    known = set(mods)
    bad = []
    for module, (path, tree) in mods.items():
        modules_here = set()
        for target, names, aliases, line, _ in imports(module, path, tree, known):
            bad += [f"{module}:{line} imports {n} from {target}" for n in names if _private(n)]
            # a module under a private alias reads as this module's own (`intervals as _calibration`)
            bad += [f"{module}:{line} imports {target} as {a}" for a in aliases if _private(a) and not names]
            if not names:
                modules_here |= set(aliases) or {target.split(".")[-1]}
        for node in ast.walk(tree):
            if (isinstance(node, ast.Attribute) and isinstance(node.value, ast.Name)
                    and node.value.id in modules_here and _private(node.attr)):
                bad.append(f"{module}:{node.lineno} uses {node.value.id}.{node.attr}")
    return bad


HEAVY = ("pandas", "pyarrow")


def eager_heavy_imports(mods) -> list[str]:
    known = set(mods)
    bad = []
    for module, (path, tree) in mods.items():
        if not _within(module, "ledger") or _within(module, PURE):
            continue
        for target, _, _, line, in_function in imports(module, path, tree, known):
            if not in_function and any(_within(target, h) for h in HEAVY):
                bad.append(f"{module}:{line} imports {target} at module level")
    return bad


def import_graph(mods) -> dict[str, set[str]]:
    """Module-level imports between the project's own modules."""
    known = set(mods)
    graph: dict[str, set[str]] = {m: set() for m in mods}
    for module, (path, tree) in mods.items():
        for target, _, _, _, in_function in imports(module, path, tree, known):
            if not in_function and target in known and target != module:
                graph[module].add(target)
    return graph


def cycles(graph: dict[str, set[str]]) -> list[list[str]]:
    """Strongly connected components with more than one module (Tarjan 1972), each sorted."""
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on_stack: set[str] = set()
    found: list[list[str]] = []

    def visit(v: str) -> None:
        index[v] = low[v] = len(index)
        stack.append(v)
        on_stack.add(v)
        for w in sorted(graph[v]):
            if w not in index:
                visit(w)
                low[v] = min(low[v], low[w])
            elif w in on_stack:
                low[v] = min(low[v], index[w])
        if low[v] == index[v]:
            component = []
            while True:
                w = stack.pop()
                on_stack.discard(w)
                component.append(w)
                if w == v:
                    break
            if len(component) > 1:
                found.append(sorted(component))

    for v in sorted(graph):
        if v not in index:
            visit(v)
    return found


# ---------------------------------------------------------------------------------------------
# each checker catches an invented violation


def _tree(tmp_path: Path, files: dict[str, str]):
    for rel, text in files.items():
        path = tmp_path / rel
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_text(text)
    for package in PACKAGES:
        (tmp_path / package).mkdir(exist_ok=True)
    return sources(tmp_path)


def test_checkers_catch_invented_violations(tmp_path):
    mods = _tree(tmp_path, {
        "ledger/__init__.py": "",
        "ledger/errors.py": "",
        "ledger/stats/__init__.py": "",
        "ledger/stats/good.py": "from ..errors import InputError\nfrom .other import f\nimport numpy\n",
        "ledger/stats/other.py": "from typing import TYPE_CHECKING\nif TYPE_CHECKING:\n    from ..scoring import cells\n",
        "ledger/stats/bad.py": "from ..findings.base import Finding\n",
        "ledger/scoring/__init__.py": "",
        "ledger/scoring/a.py": "from . import b\nfrom .b import _hidden, shown\nfrom ..stats import good as _good\nx = b._secret\n",
        "ledger/scoring/b.py": "from .a import y\n",
        "ledger/cli/__init__.py": "",
        "ledger/cli/report.py": "def report():\n    from reports import render\n",
        "ledger/api.py": "import reports\ndef later():\n    from reports import x\n",
        "ledger/store.py": "import pyarrow.compute as pc\nfrom pandas import DataFrame\ndef f():\n    import pandas\n",
        "reports/__init__.py": "",
    })
    assert impure_imports(mods) == [f"{tmp_path / 'ledger/stats/bad.py'}:1 imports ledger.findings.base"]
    assert report_imports(mods) == ["ledger.api:1 imports reports at module level",
                                    "ledger.api:3 imports reports (only a CLI command may, inside its function)"]
    assert private_imports(mods) == ["ledger.scoring.a:2 imports _hidden from ledger.scoring.b",
                                     "ledger.scoring.a:3 imports ledger.stats.good as _good",
                                     "ledger.scoring.a:4 uses b._secret"]
    assert cycles(import_graph(mods)) == [["ledger.scoring.a", "ledger.scoring.b"]]
    assert eager_heavy_imports(mods) == ["ledger.store:1 imports pyarrow.compute at module level",
                                         "ledger.store:2 imports pandas at module level"]


# ---------------------------------------------------------------------------------------------
# the package keeps the rules


@pytest.fixture(scope="module")
def package():
    mods = sources(ROOT)
    assert "ledger.stats.metrics" in mods and "reports.site" in mods  # the walk found the tree
    return mods


def test_stats_imports_nothing_above_it(package):
    assert impure_imports(package) == []


def test_ledger_imports_reports_only_inside_cli_commands(package):
    assert report_imports(package) == []
    lazy = [(m, t) for m, (p, tree) in package.items() if _within(m, "ledger.cli")
            for t, _, _, _, inside in imports(m, p, tree, set(package)) if _within(t, "reports") and inside]
    assert lazy, "the report and demo commands import reports inside their functions"


def test_no_module_imports_another_modules_private_names(package):
    assert private_imports(package) == []


def test_no_import_cycle(package):
    graph = import_graph(package)
    assert sum(len(v) for v in graph.values()) > 100   # the graph was read, not empty
    assert cycles(graph) == []


def test_ledger_takes_pandas_and_pyarrow_through_the_lazy_stand_ins(package):
    assert eager_heavy_imports(package) == []
