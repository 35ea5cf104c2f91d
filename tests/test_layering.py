"""The data flows one way: pure model modules never reach for storage, UI, CLI or files.

Reads each module's imports with ``ast`` (no import side effects) and fails if a
pure module imports a forbidden package or calls ``open``.
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
PURE = [
    "bearings",
    "oil",
    "spectrum",
    "wear",
    "relief",
    "hydraulics",
    "lifecycle",
    "fleet",
    "fleet_wear",
    "planning",
    "planning_types",
    "planning_report",
    "ledger_metrics",
    "fleet_detail",
]
FORBIDDEN_EVERYWHERE_PURE = {"sqlalchemy", "streamlit", "click", "alembic", "psycopg"}
NO_PANDAS = {"bearings", "oil", "spectrum", "wear", "relief", "hydraulics", "lifecycle"}
INGEST = {
    p.stem: {"sqlalchemy", "streamlit", "click"}
    for p in (Path(__file__).resolve().parent.parent / "monitor").glob("ingest*.py")
}
NO_SQL = {
    **INGEST,
    "cli": {"sqlalchemy"},
    "cli_plan_demo": {"sqlalchemy"},
    "registry": {"sqlalchemy", "streamlit", "click"},
    "units": {"sqlalchemy", "streamlit", "click"},
    "service": {"streamlit", "click"},
    "service_plan": {"streamlit", "click"},
    "demo": {"streamlit", "sqlalchemy"},
    "store": {"streamlit", "click"},
}


def imported_roots(path: Path) -> set[str]:
    tree = ast.parse(path.read_text(encoding="utf-8"))
    roots: set[str] = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            roots |= {a.name.split(".")[0] for a in node.names}
        elif isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
            roots.add(node.module.split(".")[0])
    return roots


def calls_open(path: Path) -> bool:
    tree = ast.parse(path.read_text(encoding="utf-8"))
    return any(
        isinstance(n, ast.Call) and isinstance(n.func, ast.Name) and n.func.id == "open"
        for n in ast.walk(tree)
    )


def _existing(names):
    return [n for n in names if (ROOT / "monitor" / f"{n}.py").exists()]


@pytest.mark.parametrize("name", _existing(PURE))
def test_pure_modules_import_no_storage_ui_or_cli(name):
    path = ROOT / "monitor" / f"{name}.py"
    bad = imported_roots(path) & (
        FORBIDDEN_EVERYWHERE_PURE | ({"pandas"} if name in NO_PANDAS else set())
    )
    assert not bad, f"monitor/{name}.py imports {sorted(bad)}"
    assert not calls_open(path), f"monitor/{name}.py opens files"


@pytest.mark.parametrize("name", sorted(NO_SQL))
def test_outer_modules_respect_their_layer(name):
    path = ROOT / "monitor" / f"{name}.py"
    bad = imported_roots(path) & NO_SQL[name]
    assert not bad, f"monitor/{name}.py imports {sorted(bad)}"


def test_dashboards_use_no_sqlalchemy():
    for path in (ROOT / "dashboards").rglob("*.py"):
        assert "sqlalchemy" not in imported_roots(path), path


def test_the_model_modules_exist():
    missing = [n for n in PURE if not (ROOT / "monitor" / f"{n}.py").exists()]
    assert not missing, f"missing model modules: {missing}"
