"""Hostile and broken files are refused quickly, with a message that points at the cause.

The small files ``tests/data/hostile_*`` are kept as they are; the large JSON is made
here. Time bounds are loose (a slow, shared machine must pass): they catch run times
that grow without bound, not a few per cent. Speed itself is measured in the
benchmarks, not here.
"""

from __future__ import annotations

import time
from pathlib import Path

import pytest

from monitor import usecases
from monitor.ingest.limits import (
    MAX_ECHO_CHARS,
    MAX_HOUR_METER_H,
    MAX_JSON_BYTES,
    MAX_JSON_DEPTH,
)
from monitor.ingest.parse import parse_file
from monitor.ingest.registry import load_registry
from tests.benchmarks.bench_json import site_json as big_json

DATA = Path(__file__).parent / "data"
HIST = (DATA / "hist_pressure.csv").read_bytes()
READ = (DATA / "readings.csv").read_bytes()
JSON = (DATA / "upload.json").read_bytes()


def problems(data: bytes, name: str = "f.csv") -> list:
    parsed = parse_file(data, name)
    assert parsed.problems and not parsed.histograms and not parsed.readings
    return parsed.problems


def only(data: bytes, fragment: str, name: str = "f.csv"):
    """The single problem of a file, which must contain ``fragment``."""
    (p,) = problems(data, name)
    assert fragment in p.message, str(p)
    return p


def timed(fn, *args):  # noqa: ANN001, ANN002, ANN202
    t0 = time.perf_counter()
    out = fn(*args)
    return out, time.perf_counter() - t0


# --- the files under tests/data --------------------------------------------------------


def test_yaml_alias_bomb_is_refused_at_once():
    text = (DATA / "hostile_alias_bomb.yaml").read_text()
    (reg, probs), seconds = timed(load_registry, text, "bomb.yaml")
    assert reg is None and seconds < 2.0
    (p,) = probs
    assert "aliases (`*name`) are not allowed" in p.message
    assert (p.line, p.column) == (4, "column 10")  # the first alias, *l0 on line 4


def test_yaml_alias_bomb_upload_leaves_the_store_as_it_was(sqlite_url):
    engine = usecases.init_db(sqlite_url)
    data = (DATA / "hostile_alias_bomb.yaml").read_bytes()
    res, seconds = timed(usecases.upload, engine, data, "bomb.yaml")
    assert res.status == usecases.REJECTED and res.kind == "registry" and seconds < 5.0
    assert not usecases.has_registry(engine)
    engine.dispose()


def test_deeply_nested_json_is_refused_with_line_and_column():
    data = (DATA / "hostile_deep.json").read_bytes()
    p, seconds = timed(only, data, f"nested more than {MAX_JSON_DEPTH} levels", "deep.json")
    assert seconds < 2.0
    # the 17th level opens at the 16th "[" after `"readings": ` (the document is level 1)
    before = len('{"unit": "LR-101", "readings": ')
    assert p.line == 1 and p.column == f"column {before + 16}"


def test_out_of_range_dates_are_refused_not_wrapped():
    probs = problems((DATA / "hostile_dates.csv").read_bytes())
    assert [(p.line, p.value) for p in probs] == [
        (2, "9999-03-02T11:20:00Z"),
        (3, "0001-03-02T11:40:00Z"),
        (4, "1969-12-31T23:00:00Z"),
    ]
    assert all("outside the plausible range 1970-01-01 to 2100-01-01" in p.message for p in probs)


# --- a large JSON: linear time -----------------------------------------------------------


def test_json_of_40000_bands_parses_within_seconds():
    data = big_json(40_000)
    parsed, seconds = timed(parse_file, data, "site.json")
    assert parsed.ok, parsed.problems[:3]
    assert len(parsed.histograms) == 4_000 and parsed.histogram_batch().hours.size == 40_000
    assert seconds < 5.0, seconds  # was about a minute when each band copied a list


def test_json_over_the_size_limit_is_refused_before_parsing(monkeypatch):
    import monitor.ingest.json_text as jt

    monkeypatch.setattr(jt, "MAX_JSON_BYTES", 1000)
    p = only(big_json(100), "larger than the 0 MiB limit", "big.json")
    assert "export CSV" in p.message and MAX_JSON_BYTES == 16 * 2**20


# --- numbers ----------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("new", "fragment", "shown"),
    [
        (b"true", "`hours` is true, a boolean", "true"),
        (b"NaN", "`hours` is `NaN`, which JSON does not allow", "NaN"),
        (b"-Infinity", "`hours` is `-Infinity`, which JSON does not allow", "-Infinity"),
        (b"1e400", "beyond the range of a float", "inf"),
        (b"1" + b"0" * 400, "beyond the range of a float", "1" + "0" * 58 + "\u2026"),
        (b'"2.5"', "`hours` is text: expected a number", "2.5"),
    ],
)
def test_json_numbers_that_are_not_numbers(new, fragment, shown):
    p = only(JSON.replace(b"2.5", new, 1), fragment, "u.json")
    assert (p.column, p.value) == ("[0].histograms[0].hours[0]", shown)


@pytest.mark.parametrize("cell", [b"nan", b"NaN", b"inf", b"-inf", b"1e400", b"Infinity"])
def test_csv_nan_inf_and_overflow_text_is_refused(cell):
    p = only(READ.replace(b"0.5,", cell + b",", 1), "must be a number", "r.csv")
    assert (p.line, p.column) == (2, "case_drain_gpm")


def test_hour_meter_above_the_plausible_maximum():
    p = only(READ.replace(b"4213.2", b"1e308"), "above the plausible maximum", "r.csv")
    assert p.line == 2 and f"{MAX_HOUR_METER_H:.0f} h" in p.message
    probs = problems(HIST.replace(b"4218.5", b"2e6"))
    assert {p.column for p in probs} == {"hour_meter_end"}  # no follow-on hour sums


# --- CSV structure -------------------------------------------------------------------------


def test_row_cut_short_is_refused_not_padded():
    lines = READ.splitlines(keepends=True)
    p = only(lines[0] + lines[1] + lines[2][:40] + b"\n", "cut short")
    assert p.line == 3 and "has 4 fields but the header has 8" in p.message


def test_blank_last_cells_are_not_short_rows():
    lines = READ.splitlines(keepends=True)
    row = b",".join(lines[1].split(b",")[:7]) + b",\n"  # iso4406 left empty, comma kept
    assert parse_file(lines[0] + row, "r.csv").ok


def test_cr_only_and_mixed_line_ends_are_read():
    for data in (HIST.replace(b"\n", b"\r"), HIST.replace(b"\n", b"\r", 2)):
        assert parse_file(data, "h.csv").ok
    p = only(HIST.replace(b"\n", b"\r").replace(b"4218.5", b"4281.5", 1), "differs")
    assert p.line == 2  # lines counted as an editor shows them


def test_unbalanced_quote_names_line_and_column():
    p = only(HIST.replace(b",left,", b',"left,', 1), "never closed")
    assert (p.line, p.column) == (2, "position")


@pytest.mark.parametrize(
    ("encoding", "fragment"),
    [("utf-16", "UTF-16"), ("utf-16-le", "UTF-16"), ("utf-32", "UTF-16 (or UTF-32)")],
)
def test_utf16_is_refused_with_a_clear_message(encoding, fragment):
    only(HIST.decode().encode(encoding), fragment)


def test_latin1_is_named():
    p = only(READ.replace(b"LR-101", "LR-1\u00e901".encode("latin-1"), 1), "Latin-1")
    assert p.line == 2 and "Save as -> CSV UTF-8" in p.message


def test_the_same_reading_twice_is_refused_before_the_store(sqlite_url):
    lines = READ.splitlines(keepends=True)
    data = READ + lines[1]
    p = only(data, "the same unit, position and time as the reading at line 2")
    assert p.line == len(lines) + 1
    engine = usecases.init_db(sqlite_url)
    usecases.upload(engine, (DATA / "fleet.yaml").read_bytes(), "fleet.yaml")
    res = usecases.upload(engine, data, "r.csv")
    assert res.status == usecases.REJECTED  # not an IntegrityError from the store
    engine.dispose()


# --- messages ------------------------------------------------------------------------------


def test_one_bad_timestamp_gives_one_problem():
    lines = (DATA / "hist_pressure.csv").read_bytes().splitlines(keepends=True)
    lines[2] = lines[2].replace(b"2026-03-02T06:00:00Z", b"2026-03-02T06:00:0Z")
    p = only(b"".join(lines), "is not a valid ISO 8601 timestamp")
    assert (p.line, p.column) == (3, "period_start")


def test_a_bad_hours_value_gives_no_hour_sum_problem():
    p = only(HIST.replace(b",2.5,", b",2.5h,", 1), "must be a number")
    assert (p.line, p.column, p.value) == (2, "hours", "2.5h")


def test_a_huge_cell_is_echoed_short():
    (p,) = problems(HIST.replace(b"LR-101", b"X" * 2_000_000, 1))
    assert len(p.value) == MAX_ECHO_CHARS and p.value.endswith("\u2026")
    assert len(p.message) < 300 and "longer than 80 characters" in p.message
    (p,) = problems(HIST.replace(b",2.5,", b",two and a half" + b"!" * 100_000 + b",", 1))
    assert len(str(p)) < 300


# --- the same bounds at the command line ---------------------------------------------------


def test_service_add_refuses_implausible_times_and_hour_meters(sqlite_url):
    from click.testing import CliRunner

    from monitor import cli

    engine = usecases.init_db(sqlite_url)
    usecases.upload(engine, (DATA / "fleet.yaml").read_bytes(), "fleet.yaml")
    engine.dispose()
    base = ["service", "add", "LR-101", "--position", "left", "--kind", "rebuild", "--db"]
    for at, hm, fragment in (
        ("9999-01-01T00:00:00Z", "5000", "outside the plausible range 1970-01-01"),
        ("2026-05-01T00:00:00Z", "1e308", "from 0 to 1000000 h"),
        ("2026-05-01T00:00:00Z", "nan", "from 0 to 1000000 h"),
    ):
        res = CliRunner().invoke(cli.main, [*base, sqlite_url, "--at", at, "--hour-meter", hm])
        assert res.exit_code == 1 and fragment in res.output, res.output


def test_fleet_import_of_utf16_is_one_clear_refusal(sqlite_url, tmp_path):
    from click.testing import CliRunner

    from monitor import cli

    f = tmp_path / "fleet.yaml"
    f.write_bytes((DATA / "fleet.yaml").read_text().encode("utf-16"))
    CliRunner().invoke(cli.main, ["init", "--db", sqlite_url])
    res = CliRunner().invoke(cli.main, ["fleet", "import", str(f), "--db", sqlite_url])
    assert res.exit_code == 1 and "not UTF-8" in res.output and "Traceback" not in res.output
    assert not isinstance(res.exception, UnicodeDecodeError)


def test_text_limits_are_the_store_column_sizes():
    from monitor.ingest.limits import MAX_TEXT_CHARS
    from monitor.store import db

    columns = {
        "tag": db.unit.c.tag,
        "unit": db.unit.c.tag,
        "serial": db.component.c.serial,
        "position": db.component.c.position,
        "name": db.site.c.name,
        "site": db.site.c.name,
        "oil": db.oil.c.name,
        "model": db.component_model.c.name,
        "machine_type": db.unit.c.machine_type,
    }
    assert {k: c.type.length for k, c in columns.items()} == MAX_TEXT_CHARS
