"""The package layout: one subpackage per pipeline stage, and no import circles.

The import graph is built from the source with ``ast`` (nothing is imported), so a
circle introduced by a lazy import inside a function is caught as well. Importing
``a.b.c`` runs the ``__init__`` of ``a.b`` first, so it counts as an edge to both.
"""

from __future__ import annotations

import ast
import graphlib
from pathlib import Path

PACKAGE_ROOT = Path(__file__).resolve().parents[1] / "src" / "redoxfront"
TOP_LEVEL_MODULES = {"__init__", "campaign", "cli", "columns", "csv_tables", "errors", "figure_style", "outputs",
                     "pipeline", "processes", "units"}
STAGE_PACKAGES = {"candidates", "engine", "compute", "descriptors", "fade", "statistics", "ranking", "report"}


def _module_name(path: Path) -> str:
    parts = list(path.relative_to(PACKAGE_ROOT.parent).with_suffix("").parts)
    if parts[-1] == "__init__":
        parts.pop()
    return ".".join(parts)


def _imported(tree: ast.AST, module: str, is_package: bool, known: set[str]) -> set[str]:
    """Project modules that ``module`` imports (each with the packages that hold them)."""
    targets: set[str] = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            names = [a.name for a in node.names]
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                base = module.split(".")[: len(module.split(".")) - node.level + (1 if is_package else 0)]
                prefix = ".".join(base + ([node.module] if node.module else []))
            else:
                prefix = node.module or ""
            names = [prefix] + [f"{prefix}.{a.name}" for a in node.names]
        else:
            continue
        for name in names:
            if not name.startswith("redoxfront"):
                continue
            parts = name.split(".")
            for k in range(1, len(parts) + 1):
                candidate = ".".join(parts[:k])
                if candidate in known:
                    targets.add(candidate)
    targets.discard(module)
    return targets


def import_graph() -> dict[str, set[str]]:
    """Module -> the project modules it imports, for every module of the package."""
    files = sorted(PACKAGE_ROOT.rglob("*.py"))
    known = {_module_name(f) for f in files}
    graph: dict[str, set[str]] = {}
    for f in files:
        mod = _module_name(f)
        graph[mod] = set()
        tree = ast.parse(f.read_text(encoding="utf-8"))
        for target in _imported(tree, mod, f.name == "__init__.py", known):
            # a package's own __init__ importing its modules is how packages work; the
            # reverse edge (module -> its package) is implied by Python and not a circle
            if mod.startswith(target + "."):
                continue
            graph[mod].add(target)
    return graph


def _reachable(graph: dict[str, set[str]], start: str) -> set[str]:
    seen: set[str] = set()
    todo = [start]
    while todo:
        for nxt in graph[todo.pop()] - seen:
            seen.add(nxt)
            todo.append(nxt)
    return seen


def test_no_module_imports_a_module_that_imports_it_back() -> None:
    try:
        tuple(graphlib.TopologicalSorter(import_graph()).static_order())
    except graphlib.CycleError as exc:
        raise AssertionError(f"import circle: {' -> '.join(exc.args[1])}") from None


def test_the_graph_sees_lazy_imports_inside_functions() -> None:
    # the pipeline imports every step inside its function; the graph must see those edges
    graph = import_graph()
    assert {"redoxfront.compute.step", "redoxfront.compute"} <= graph["redoxfront.pipeline"]
    assert "redoxfront.ranking.step" in graph["redoxfront.cli"]


def test_top_level_holds_only_cross_cutting_modules_and_stage_packages() -> None:
    modules = {p.stem for p in PACKAGE_ROOT.glob("*.py")}
    packages = {p.name for p in PACKAGE_ROOT.iterdir() if (p / "__init__.py").exists()}
    assert modules == TOP_LEVEL_MODULES
    assert packages == STAGE_PACKAGES


def test_figures_never_import_their_step() -> None:
    graph = import_graph()
    for stage in ("fade", "statistics", "ranking"):
        assert f"redoxfront.{stage}.step" not in _reachable(graph, f"redoxfront.{stage}.figures"), stage


def test_every_figure_module_uses_the_shared_style() -> None:
    graph = import_graph()
    figure_modules = [m for m in graph if m.endswith(".figures")]
    assert len(figure_modules) == 4  # fade, statistics, ranking, report (the funnel's tier line)
    for m in figure_modules:
        assert "redoxfront.figure_style" in graph[m], m


def test_links_and_file_names_in_the_docs_exist() -> None:
    # every relative markdown link, every `src/...`/`benchmarks/...` path and every
    # test_*.py named in README, DEVELOPERS and docs/ points at a file that exists
    import re

    top = PACKAGE_ROOT.parents[1]
    pages = [top / "README.md", top / "DEVELOPERS.md", *sorted((top / "docs").glob("*.md"))]
    missing = []
    for page in pages:
        text = page.read_text(encoding="utf-8")
        for link in re.findall(r"\]\(([\w./-]+\.(?:md|png|svg|html|csv|toml|py))(?:#[^)]*)?\)", text):
            if "://" not in link and not (page.parent / link).exists():
                missing.append(f"{page.name}: {link}")
        for path in re.findall(r"`((?:src|benchmarks|examples|tests|docs)/[\w./-]+\.\w+)`", text):
            if not (top / path).exists():
                missing.append(f"{page.name}: {path}")
        for name in re.findall(r"\b(test_\w+\.py)\b", text):
            if not (top / "tests" / name).exists():
                missing.append(f"{page.name}: {name}")
    assert missing == []


def test_store_and_compute_modules_load_without_pandas_or_scipy_optimize() -> None:
    # measured with python -X importtime (issue 14): pandas about 2 s and scipy.optimize about
    # 1.9 s of every command's start; the compute step, `status` and the fast tier need neither
    import subprocess
    import sys

    code = ("import sys, redoxfront.cli, redoxfront.compute.step, redoxfront.compute.status, "
            "redoxfront.compute.fast_tier, redoxfront.candidates; "
            "print(sorted(m for m in ('pandas', 'scipy.optimize', 'scipy.spatial', 'rdkit.Chem.Descriptors') "
            "if m in sys.modules))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout
    assert out.strip() == "[]"  # common practice, no source: nothing loaded that is not used
