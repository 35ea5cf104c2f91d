"""The `plan` and `demo` commands end to end, through click's runner on real SQLite files."""

from __future__ import annotations

import json
from pathlib import Path

import icalendar
import openpyxl
import pytest
from click.testing import CliRunner

from monitor.cli import main
from monitor.usecases import demo

DATA = Path(__file__).parent / "data"


@pytest.fixture
def fleet_db(tmp_path) -> str:
    """The small sample fleet with one day of histograms (tests/data)."""
    url = f"sqlite:///{tmp_path / 'fleet.db'}"
    runner = CliRunner()
    assert runner.invoke(main, ["init", "--db", url]).exit_code == 0
    assert (
        runner.invoke(main, ["fleet", "import", str(DATA / "fleet.yaml"), "--db", url]).exit_code
        == 0
    )
    res = runner.invoke(main, ["ingest", str(DATA / "hist_pressure.csv"), "--db", url])
    assert res.exit_code == 0, res.output
    return url


def test_plan_table_json_and_files(fleet_db, tmp_path):
    runner = CliRunner()
    args = ["plan", "--db", fleet_db, "--as-of", "2026-03-04", "--weeks", "8"]
    table = runner.invoke(main, args)
    assert table.exit_code == 0, table.output
    assert "estimates" in table.output  # the plan summary ends with the caution
    as_json = runner.invoke(main, [*args, "--format", "json"])
    assert as_json.exit_code == 0
    plan = json.loads(as_json.output)
    assert set(plan) >= {"as_of", "first_week_start", "rebuilds", "not_placed"}
    assert plan["first_week_start"] == "2026-03-02"  # the Monday of 2026-03-04 (ISO 8601)
    assert "2026-W10 (Mon 2026-03-02)" in table.output  # weeks named by ISO week and Monday

    ics_path = tmp_path / "plan.ics"
    res = runner.invoke(main, [*args, "--format", "ics", "--output", str(ics_path)])
    assert res.exit_code == 0, res.output
    cal = icalendar.Calendar.from_ical(ics_path.read_bytes())
    assert cal.name == "VCALENDAR"

    xlsx_path = tmp_path / "plan.xlsx"
    res = runner.invoke(main, [*args, "--format", "xlsx", "--output", str(xlsx_path)])
    assert res.exit_code == 0, res.output
    assert "rebuilds" in openpyxl.load_workbook(xlsx_path).sheetnames


def test_plan_file_formats_need_an_output(fleet_db):
    res = CliRunner().invoke(main, ["plan", "--db", fleet_db, "--format", "xlsx"])
    assert res.exit_code == 1
    assert "--output" in res.output


def test_plan_rejects_a_negative_capacity_in_one_line(fleet_db):
    res = CliRunner().invoke(main, ["plan", "--db", fleet_db, "--capacity", "-2"])
    assert res.exit_code == 1
    assert "--capacity must be a whole number >= 0" in res.output
    assert "capacity_per_week" not in res.output and "Traceback" not in res.output


def test_plan_save_stores_the_shop_settings(fleet_db):
    from monitor import usecases
    from monitor.usecases import plan as service_plan

    res = CliRunner().invoke(
        main,
        [
            "plan",
            "--db",
            fleet_db,
            "--weeks",
            "6",
            "--capacity",
            "2",
            "--save",
            "--as-of",
            "2026-03-04",
        ],
    )
    assert res.exit_code == 0, res.output
    stored = service_plan.get_plan_settings(usecases.init_db(fleet_db))
    assert stored["horizon_weeks"] == 6 and stored["capacity_per_week"] == 2


def test_demo_runs_end_to_end_without_dashboard(tmp_path):
    """The command at its smallest scale (the story units only); the stories themselves are
    checked on the full demo in tests/test_demo_stories.py."""
    folder = tmp_path / "demo"
    res = CliRunner().invoke(
        main, ["demo", "--no-dashboard", "--folder", str(folder), "--scale", "0"]
    )
    assert res.exit_code == 0, res.output
    assert "ranking as of" in res.output
    assert "broken_export.csv: rejected" in res.output  # the faulty export is shown refused
    assert (folder / demo.MARKER).exists() and (folder / "demo.db").exists()
    # a second run replaces its own folder without asking
    again = CliRunner().invoke(
        main, ["demo", "--no-dashboard", "--folder", str(folder), "--scale", "0"]
    )
    assert again.exit_code == 0, again.output


def test_demo_never_replaces_a_folder_it_did_not_make(tmp_path):
    mine = tmp_path / "mine"
    mine.mkdir()
    (mine / "drivespan.db").write_text("the user's own data")
    res = CliRunner().invoke(main, ["demo", "--no-dashboard", "--folder", str(mine)])
    assert res.exit_code == 1
    assert "not made by drivespan demo" in res.output
    assert (mine / "drivespan.db").read_text() == "the user's own data"
