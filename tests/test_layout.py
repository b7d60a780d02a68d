"""The package's layout tells the flow, and imports point one way (DESIGN.md, DEVELOPERS.md).

cli -> run -> store; analysis <- store; report <- analysis. The three numeric packages
(methods, datasets, metrics) know nothing of running, analysing or reporting, and the analysis
and the report never ask the live registries: what they need is in the store.
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

PACKAGE = Path(__file__).resolve().parents[1] / "src" / "lowdim"

# For each package: the lowdim packages it must not import.
FORBIDDEN = {
    "methods": {"cli", "run", "analysis", "report", "datasets", "metrics"},
    "datasets": {"cli", "run", "analysis", "report", "methods", "metrics"},
    "metrics": {"cli", "run", "analysis", "report", "methods", "datasets"},
    "run": {"cli", "analysis", "report"},
    "analysis": {"cli", "report", "methods", "datasets", "metrics"},
    "report": {"cli", "methods", "datasets", "metrics"},
}
# What analysis and report may read of run/: the store and the settings record it holds.
ALLOWED_FROM_RUN = {"lowdim.run.store", "lowdim.run.settings"}


def _imports(path: Path) -> set[str]:
    tree = ast.parse(path.read_text(encoding="utf-8"))
    names = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            names.update(alias.name for alias in node.names)
        elif isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
            names.add(node.module)
            names.update(f"{node.module}.{alias.name}" for alias in node.names)
    return {n for n in names if n == "lowdim" or n.startswith("lowdim.")}


def _modules(package: str) -> list[Path]:
    return sorted((PACKAGE / package).rglob("*.py"))


@pytest.mark.parametrize("package", sorted(FORBIDDEN))
def test_imports_point_one_way(package: str) -> None:
    wrong = []
    for path in _modules(package):
        for name in _imports(path):
            parts = name.split(".")
            target = parts[1] if len(parts) > 1 else ""
            if target not in FORBIDDEN[package]:
                continue
            if target == "run" and package in {"analysis", "report"}:
                if any(name == a or name.startswith(a + ".") for a in ALLOWED_FROM_RUN):
                    continue
                if name == "lowdim.run":
                    continue
            wrong.append(f"{path.relative_to(PACKAGE)} imports {name}")
    assert not wrong, wrong


def test_the_top_level_keeps_a_handful_of_modules() -> None:
    top = sorted(p.name for p in PACKAGE.glob("*.py"))
    assert len(top) <= 6, top
    folders = {p.name for p in PACKAGE.iterdir() if p.is_dir() and (p / "__init__.py").exists()}
    assert {"cli", "run", "analysis", "report", "methods", "datasets", "metrics"} <= folders


def test_the_report_comes_from_templates_shipped_with_the_package() -> None:
    templates = PACKAGE / "report" / "templates"
    assert (templates / "report.html.j2").is_file() and (templates / "report.css").is_file()
    html = (PACKAGE / "report" / "html.py").read_text(encoding="utf-8")
    assert "<table" not in html and "<section" not in html  # no markup built in Python
