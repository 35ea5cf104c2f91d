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


def test_ingesting_a_file_in_canonical_units_loads_no_pint(tmp_path):
    # pint's import and unit definitions cost about a second per process; a file whose
    # columns are already in bar, L/min, degC and rpm needs no conversion, so no pint.
    code = (
        "import sys; from monitor.ingest import parse; "
        "p = parse.parse_file(open(sys.argv[1], 'rb').read(), 'x.csv'); "
        "assert not p.problems, p.problems; "
        "print(len(p.histograms), 'pint' in sys.modules)"
    )
    csv = tmp_path / "x.csv"
    csv.write_text(
        "unit,position,period_start,period_end,hour_meter_start,hour_meter_end,quantity,"
        "pressure_low_bar,pressure_high_bar,hours\n"
        "QX-1,left,2026-01-01T00:00Z,2026-01-02T00:00Z,10,12,pressure,0,100,1.5\n"
        "QX-1,left,2026-01-01T00:00Z,2026-01-02T00:00Z,10,12,pressure,100,200,0.5\n"
    )
    out = subprocess.run(
        [sys.executable, "-c", code, str(csv)], capture_output=True, text=True, cwd=ROOT
    )
    assert out.stdout.split() == ["1", "False"], out.stdout + out.stderr
