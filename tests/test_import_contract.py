"""The shape of the code: the import contract, no import cycles, small files, a core in tiers.

DESIGN.md ("Layers") is the source of every rule here: `analysis` never imports Qt, pyqtgraph or
`app`; each tier of the core imports only the tiers below it; each package lists its public names
in `__init__`. The contract itself is in pyproject.toml ([tool.importlinter]) and is checked by
import-linter, a general-purpose tool; grimp (the graph import-linter builds) also sees imports
inside functions, so a cycle cannot hide in one.
"""

from __future__ import annotations

import ast
import os
import shutil
import subprocess
import sys
from pathlib import Path

import grimp
import pytest

ROOT = Path(__file__).resolve().parent.parent
#: Third-party libraries that may be imported inside a function (heavy, or needed by one path only).
LAZY_THIRD_PARTY = {"h5py", "pynwb", "dask", "scipy", "pyabf", "tomli_w", "multiprocessing", "concurrent", "ctypes"}


def _lint_imports() -> str:
    exe = Path(sys.executable).with_name("lint-imports")
    return str(exe) if exe.exists() else (shutil.which("lint-imports") or "lint-imports")


def test_the_import_contract_is_kept():
    # import-linter reads the contracts of pyproject.toml; exit status 0 means every one is kept.
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    out = subprocess.run([_lint_imports(), "--no-cache"], cwd=ROOT, capture_output=True, text=True, env=env)
    assert out.returncode == 0, out.stdout[-3000:] + out.stderr[-2000:]
    assert "0 broken" in out.stdout and "3 kept" in out.stdout, out.stdout[-2000:]


def _cycles(graph) -> list[list[str]]:
    """Strongly connected components of more than one module (Tarjan's algorithm)."""
    adj = {m: sorted(graph.find_modules_directly_imported_by(m)) for m in graph.modules}
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on: set[str] = set()
    out: list[list[str]] = []
    counter = 0
    for start in sorted(adj):
        if start in index:
            continue
        work = [(start, 0)]
        while work:
            v, i = work.pop()
            if i == 0:
                index[v] = low[v] = counter
                counter += 1
                stack.append(v)
                on.add(v)
            recurse = False
            for j in range(i, len(adj[v])):
                w = adj[v][j]
                if w not in index:
                    work.append((v, j + 1))
                    work.append((w, 0))
                    recurse = True
                    break
                if w in on:
                    low[v] = min(low[v], index[w])
            if recurse:
                continue
            if low[v] == index[v]:
                comp = []
                while True:
                    w = stack.pop()
                    on.discard(w)
                    comp.append(w)
                    if w == v:
                        break
                if len(comp) > 1:
                    out.append(sorted(comp))
            if work:
                parent = work[-1][0]
                low[parent] = min(low[parent], low[v])
    return out


def test_no_import_cycle_among_the_projects_modules():
    graph = grimp.build_graph("analysis", "app", include_external_packages=False, cache_dir=None)
    assert "analysis.beats" in graph.modules and "app.cli" in graph.modules  # the whole project was read
    assert _cycles(graph) == []


class _FileGraph:
    """The project's imports read file by file, ``from X import y`` counted as importing X itself.

    Stricter than grimp, which resolves ``from analysis import pipeline`` to the submodule: here
    it is an import of the package's ``__init__``, which runs first and may import back.
    """

    def __init__(self) -> None:
        files = {}
        for folder in ("analysis", "app"):
            for path in (ROOT / folder).rglob("*.py"):
                parts = list(path.relative_to(ROOT).with_suffix("").parts)
                files[".".join(parts[:-1] if parts[-1] == "__init__" else parts)] = path
        self.modules = set(files)
        self.edges: dict[str, set[str]] = {}
        for name, path in files.items():
            package = name.split(".") if path.name == "__init__.py" else name.split(".")[:-1]
            out = set()
            for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
                if isinstance(node, ast.Import):
                    out.update(a.name for a in node.names)
                elif isinstance(node, ast.ImportFrom):
                    base = package[: len(package) - node.level + 1] if node.level else []
                    out.add(".".join(base + ([node.module] if node.module else [])))
            self.edges[name] = (out & self.modules) - {name}

    def find_modules_directly_imported_by(self, module: str) -> set[str]:
        return self.edges[module]


def test_no_import_cycle_reading_each_from_import_as_its_package():
    graph = _FileGraph()
    assert "analysis.session._session" in graph.modules and "analysis.pipeline" in graph.edges["analysis"]
    assert _cycles(graph) == []


def test_the_cycle_finder_finds_a_cycle():
    # The check above must be able to fail: a two-module loop and a three-module loop.
    class Graph:
        modules = {"a", "b", "c", "d", "e"}
        edges = {"a": {"b"}, "b": {"a"}, "c": {"d"}, "d": {"e"}, "e": {"c"}}

        def find_modules_directly_imported_by(self, m):
            return self.edges.get(m, set())

    assert sorted(_cycles(Graph())) == [["a", "b"], ["c", "d", "e"]]


def _function_level_imports(path: Path):
    tree = ast.parse(path.read_text(encoding="utf-8"))
    for fn in ast.walk(tree):
        if isinstance(fn, (ast.FunctionDef, ast.AsyncFunctionDef)):
            for node in ast.walk(fn):
                if isinstance(node, ast.Import):
                    yield node, node.names[0].name
                elif isinstance(node, ast.ImportFrom):
                    yield node, node.module or ""


def test_imports_inside_functions_only_for_heavy_or_optional_libraries_with_a_reason():
    seen = 0
    for path in sorted((ROOT / "analysis").rglob("*.py")):
        lines = path.read_text(encoding="utf-8").splitlines()
        for node, module in _function_level_imports(path):
            seen += 1
            where = f"{path.relative_to(ROOT)}:{node.lineno}"
            top = module.split(".")[0]
            lazy_session = path == ROOT / "analysis" / "__init__.py" and module == "analysis.session"
            assert top in LAZY_THIRD_PARTY or lazy_session, f"{where}: import {module} at module level"
            said = "#" in lines[node.lineno - 1] or lines[node.lineno - 2].strip().startswith("#")
            if not said:  # a statement after another lazy import shares its reason
                said = any("#" in lines[k] for k in range(max(0, node.lineno - 4), node.lineno - 1))
            assert said, f"{where}: say in a comment why {module} is imported inside the function"
    assert seen > 5  # the walk really found the lazy imports of h5py, pynwb and dask


def test_the_core_is_a_handful_of_vocabulary_modules_over_tier_packages():
    core = ROOT / "analysis"
    modules = sorted(p.name for p in core.glob("*.py"))
    packages = sorted(p.name for p in core.iterdir() if (p / "__init__.py").exists())
    assert len(modules) <= 14, modules
    assert len(packages) >= 5, packages
    for pkg in packages:
        tree = ast.parse((core / pkg / "__init__.py").read_text(encoding="utf-8"))
        names = [t.id for node in tree.body if isinstance(node, ast.Assign) for t in node.targets if isinstance(t, ast.Name)]
        assert "__all__" in names, f"analysis/{pkg}/__init__.py lists no public names"
#: The one exception: the measurements page renders these modules' docstrings, where the
#: definitions are written beside their code.
DOCSTRING_SOURCES = {
    "analysis/docs_measurements.py": {
        "analysis.beats._detect", "analysis.beats._markers", "analysis.flags._events", "analysis.signal._filters",
        "analysis.stats._variability", "analysis.stats._ensemble",
    },
}


def test_no_module_reaches_into_another_packages_private_modules():
    # DESIGN.md: each package lists its public names in __init__; the modules below are private
    # to it. Tests may reach in (to exercise a private step or patch it); the project may not.
    bad = []
    for folder in ("analysis", "app", "bench", "sample_data", "docs"):
        for path in sorted((ROOT / folder).rglob("*.py")):
            package = ".".join(path.relative_to(ROOT).parent.parts)
            for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
                names = []
                if isinstance(node, ast.ImportFrom) and not node.level:
                    names = [f"{node.module}.{a.name}" for a in node.names]
                if isinstance(node, ast.Import):
                    names = [a.name for a in node.names]
                for name in names:
                    parts = name.split(".")
                    private = [k for k, part in enumerate(parts) if part.startswith("_") and not part.startswith("__")]
                    if private and parts[0] in ("analysis", "app"):
                        owner = ".".join(parts[: private[0]])
                        allowed = DOCSTRING_SOURCES.get(str(path.relative_to(ROOT)), ())
                        if not (package == owner or package.startswith(owner + ".")) and name not in allowed:
                            bad.append(f"{path.relative_to(ROOT)}:{node.lineno}: {name}")
    assert bad == []


@pytest.mark.parametrize("folder", ["analysis", "app", "tests", "bench", "sample_data", "docs"])
def test_no_file_over_500_lines(folder):
    long = {}
    for path in (ROOT / folder).rglob("*.py"):
        n = len(path.read_text(encoding="utf-8").splitlines())
        if n > 500:
            long[str(path.relative_to(ROOT))] = n
    assert long == {}
