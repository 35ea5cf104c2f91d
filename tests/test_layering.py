"""The layers hold: import-linter's contracts (pyproject.toml) pass, cover every
sub-package, and no module grows past the size a reader can hold."""

from __future__ import annotations

import pkgutil
import subprocess
import sys
import tomllib
from pathlib import Path

import monitor

ROOT = Path(__file__).resolve().parents[1]
MAX_LINES = 600


def _contracts() -> list[dict]:
    config = tomllib.loads((ROOT / "pyproject.toml").read_text())
    return config["tool"]["importlinter"]["contracts"]


def test_import_linter_contracts_are_kept():
    run = subprocess.run(
        [
            sys.executable,
            "-c",
            "from importlinter.cli import lint_imports_command; lint_imports_command()",
        ],
        cwd=ROOT,
        capture_output=True,
        text=True,
        timeout=300,
    )
    assert run.returncode == 0, run.stdout[-4000:] + run.stderr[-2000:]
    assert "0 broken" in run.stdout


def test_every_sub_package_sits_in_a_layer():
    layers = next(c for c in _contracts() if c["type"] == "layers")["layers"]
    named = {m.strip() for layer in layers for m in layer.replace(":", "|").split("|")}
    subs = {
        f"monitor.{m.name}"
        for m in pkgutil.iter_modules(monitor.__path__)
        if m.name != "migrations"
    }
    assert subs - named == set(), "add these to the layers contract in pyproject.toml"


def test_the_command_line_imports_nothing_heavy():
    # `drivespan --help` must answer fast: no scipy, pandas, SQLAlchemy, Streamlit or plotly.
    code = (
        "import sys, monitor.cli; heavy = {'scipy', 'pandas', 'sqlalchemy', 'streamlit', "
        "'plotly'} & {m.split('.')[0] for m in sys.modules}; print(sorted(heavy))"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, cwd=ROOT)
    assert out.stdout.strip() == "[]", out.stdout + out.stderr


def test_no_module_is_longer_than_a_reader_can_hold():
    long = {
        str(p.relative_to(ROOT)): n
        for folder in ("monitor", "dashboards", "demo_fleet")
        for p in (ROOT / folder).rglob("*.py")
        if (n := len(p.read_text(encoding="utf-8").splitlines())) > MAX_LINES
    }
    assert not long, f"split these modules (over {MAX_LINES} lines): {long}"
