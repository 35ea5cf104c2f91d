"""The ``drivespan`` command: exit codes, one-line errors, help examples, README coverage."""

from __future__ import annotations

import json
import re
from pathlib import Path

import click
import pytest
from click.testing import CliRunner

from monitor import cli
from tests.test_engine_e2e import AS_OF, build, standard_files

ROOT = Path(__file__).resolve().parent.parent


def run(*args: str):
    return CliRunner().invoke(cli.main, list(args))


def all_commands(
    group: click.Group = cli.main, prefix: str = ""
) -> list[tuple[str, click.Command]]:
    out = []
    for name, cmd in group.commands.items():
        full = f"{prefix}{name}"
        out.append((full, cmd))
        if isinstance(cmd, click.Group):
            out += all_commands(cmd, full + " ")
    return out


@pytest.fixture
def fleet_db(sqlite_url) -> str:
    build(sqlite_url, standard_files())
    return sqlite_url


def test_every_command_help_ends_with_an_example():
    for name, cmd in all_commands():
        if isinstance(cmd, click.Group):
            continue
        res = run(*name.split(), "--help")
        assert res.exit_code == 0, name
        text = res.output.split("Options:")[0].strip()
        last_paragraph = " ".join(text.split("\n\n")[-1].split())
        assert last_paragraph.startswith("Example: drivespan "), name


def test_every_command_is_documented_in_readme():
    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    missing = [
        n
        for n, c in all_commands()
        if not isinstance(c, click.Group) and f"drivespan {n}" not in readme
    ]
    assert not missing, f"README.md does not show: {missing}"


def test_rank_table_csv_and_json(fleet_db):
    table = run("rank", "--as-of", AS_OF, "--db", fleet_db)
    assert table.exit_code == 0 and "PX-1" in table.stdout
    assert "estimates" in table.stderr and "dangerous" in table.stderr
    rows = json.loads(run("rank", "--as-of", AS_OF, "--format", "json", "--db", fleet_db).stdout)
    assert [r["position"] for r in rows] == ["left", "right"]
    csv = run("rank", "--as-of", AS_OF, "--format", "csv", "--db", fleet_db)
    assert csv.exit_code == 0, csv.output
    assert csv.stdout.splitlines()[0].startswith("unit,site,position,component_model")


def test_rank_site_filter(fleet_db):
    ok = run(
        "rank", "--as-of", AS_OF, "--site", "Hollow Fen Yard", "--format", "json", "--db", fleet_db
    )
    assert len(json.loads(ok.stdout)) == 2
    bad = run("rank", "--site", "Nowhere", "--db", fleet_db)
    assert bad.exit_code == 1
    assert bad.stderr.strip().splitlines()[0] == (
        "error: site 'Nowhere' is not in the fleet registry; known sites: Hollow Fen Yard"
    )


@pytest.mark.parametrize("date", ["2026-13-01", "yesterday", "01/03/2026"])
def test_bad_date_is_one_clear_line(fleet_db, date):
    res = run("rank", "--as-of", date, "--db", fleet_db)
    assert res.exit_code == 1
    assert res.stderr.strip() == (
        f"error: --as-of {date!r} is not a date: write it as YYYY-MM-DD, e.g. 2026-12-01"
    )


def test_reliability_out_of_range(fleet_db):
    res = run("rank", "--reliability", "80", "--db", fleet_db)
    assert res.exit_code == 1 and "between 90 and 99.95 %" in res.stderr


def test_no_registry(sqlite_url):
    assert run("init", "--db", sqlite_url).exit_code == 0
    res = run("rank", "--db", sqlite_url)
    assert res.exit_code == 1
    assert "no fleet registry imported yet" in res.stderr
    res = run("unit", "PX-1", "--db", sqlite_url)
    assert res.exit_code == 1 and "no fleet registry imported yet" in res.stderr


def test_unknown_unit_suggests_close_tags(fleet_db):
    res = run("unit", "PX-2", "--db", fleet_db)
    assert res.exit_code == 1
    assert (
        res.stderr.strip() == "error: unit 'PX-2' is not in the fleet registry; did you mean PX-1?"
    )
    res = run(
        "service",
        "add",
        "PX-7",
        "--position",
        "left",
        "--kind",
        "rebuild",
        "--at",
        "2026-02-01T00:00:00Z",
        "--hour-meter",
        "1300",
        "--db",
        fleet_db,
    )
    assert res.exit_code == 1 and "did you mean PX-1" in res.stderr


def test_unit_table_and_json(fleet_db):
    res = run("unit", "PX-1", "--as-of", AS_OF, "--db", fleet_db)
    assert res.exit_code == 0, res.output
    assert "wheel loader at Hollow Fen Yard" in res.stdout and "recent uploads:" not in res.stdout
    assert "rebuild limit: case drain" in res.stdout and "Remaining [h]" in res.stdout
    res = run("unit", "PX-1", "--as-of", AS_OF, "--all", "--db", fleet_db)
    assert "recent uploads:" in res.stdout and "case-drain readings, left:" in res.stdout
    data = json.loads(
        run("unit", "PX-1", "--as-of", AS_OF, "--format", "json", "--db", fleet_db).stdout
    )
    assert data["unit"]["tag"] == "PX-1" and len(data["status"]) == 2
    assert len(data["case_drain_readings"]["left"]) == 3


def test_service_add_errors_and_duplicate(fleet_db):
    base = ["service", "add", "PX-1", "--kind", "rebuild", "--hour-meter", "1300", "--db", fleet_db]
    res = run(*base, "--position", "middle", "--at", "2026-02-01T00:00:00Z")
    assert res.exit_code == 1
    assert "no component at position 'middle' (registered positions: left, right)" in res.stderr
    res = run(*base, "--position", "left", "--at", "1 Feb 2026")
    assert res.exit_code == 1 and "is not an ISO 8601 time" in res.stderr
    res = run(*base, "--position", "left", "--at", "2026-02-01T00:00:00")
    assert res.exit_code == 1 and "needs a UTC offset" in res.stderr
    res = run(*base, "--at", "2026-02-01T00:00:00Z")
    assert res.exit_code == 1 and "give its --position" in res.stderr
    ok = run(*base, "--position", "left", "--at", "2026-02-01T00:00:00Z", "--note", "new rotor")
    assert ok.exit_code == 0 and "recorded rebuild of PX-1 left" in ok.stdout
    again = run(*base, "--position", "left", "--at", "2026-02-01T00:00:00Z")
    assert again.exit_code == 1 and "already recorded" in again.stderr
    meter = run(
        "service",
        "add",
        "PX-1",
        "--kind",
        "hour_meter_change",
        "--at",
        "2026-02-15T00:00:00Z",
        "--hour-meter",
        "1450",
        "--db",
        fleet_db,
    )
    assert meter.exit_code == 1 and "--new-hour-meter" in meter.stderr


def test_help_mentions_the_example_verbatim():
    # the examples are real invocations: each starts with a known command path
    names = {n for n, _ in all_commands()}
    for name, cmd in all_commands():
        m = re.search(r"Example: drivespan ([a-z ]+?)(?: [A-Z\-]|\s--|$| [a-z]+\.)", cmd.help or "")
        if m and not isinstance(cmd, click.Group):
            assert any(m.group(1).strip().startswith(n) for n in names), name
