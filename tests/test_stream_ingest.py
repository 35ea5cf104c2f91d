"""A large CSV read in parts (monitor/ingest/stream.py, usecases.ingest_large): the same
records, problems and stored rows as the file read whole, and the file stored whole or
not at all.

The files are small; a tiny part size (``BLOCK``) cuts them into dozens of parts, so
every rule that spans parts is exercised. Memory and time of a 1 GB file are measured by
``tests/benchmarks/bench_stream.py`` (docs/benchmarks.md), not here.
"""

from __future__ import annotations

import io
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from sqlalchemy import select

from monitor import usecases
from monitor.ingest import parse, stream
from monitor.store import db, ledger_rows
from tests import reference_paths
from tests.benchmarks.bench_ingest import make_csv, make_registry
from tests.test_service_ingest import snapshot

BLOCK = 20_000
"""Part size of the tests [bytes]: a 0.6 MB file is read in about 30 parts."""


@pytest.fixture(scope="module")
def csv_data() -> bytes:
    return make_csv(6000, seed=7)


@pytest.fixture(scope="module")
def tags(csv_data) -> list[str]:
    return sorted(pd.read_csv(io.BytesIO(csv_data), usecols=["unit"])["unit"].unique())


@pytest.fixture
def store(tmp_path, tags):
    def make(name: str = "s"):
        eng = usecases.init_db(f"sqlite:///{tmp_path / name}.db")
        usecases.import_registry(eng, make_registry(tags), "fleet.yaml")
        return eng

    return make


def write(tmp_path: Path, data: bytes, name: str = "big.csv") -> Path:
    path = tmp_path / name
    path.write_bytes(data)
    return path


def lines_of(data: bytes) -> list[bytes]:
    return data.split(b"\n")


def stored_rows(engine) -> dict:
    """Stored rows without surrogate keys: histograms, uploads, ledger, files, readings."""
    u, led, f, r = db.upload, db.ledger, db.upload_file, db.reading
    with engine.connect() as conn:
        unit_of = dict(conn.execute(select(u.c.id, u.c.unit_id)).all())
        hist = [
            (*(v for k, v in row.items() if k != "upload_id"), unit_of[row["upload_id"]])
            for row in reference_paths.stored_histogram_rows(conn)
        ]
        uploads = conn.execute(select(*[c for c in u.c if c.name not in ("id", "file_id")]))
        ledger = conn.execute(
            select(*[c for c in led.c if c.name not in ("id", "upload_id")], u.c.period_start)
            .join(u, u.c.id == led.c.upload_id)
            .order_by(led.c.component_id, led.c.period_end)
        ).all()
        files = conn.execute(select(f.c.sha256, f.c.n_histograms, f.c.n_readings)).all()
        reads = conn.execute(select(*[c for c in r.c if c.name not in ("id", "file_id")])).all()
        return {
            "histogram": sorted(map(tuple, hist), key=repr),
            "upload": sorted(map(tuple, uploads.all()), key=repr),
            "ledger": [tuple(x) for x in ledger],
            "upload_file": sorted(map(tuple, files)),
            "reading": sorted(map(tuple, reads), key=repr),
        }


def assert_same_store(a: dict, b: dict) -> None:
    for name in ("histogram", "upload", "upload_file", "reading"):
        assert a[name] == b[name], name
    assert len(a["ledger"]) == len(b["ledger"])
    for x, y in zip(a["ledger"], b["ledger"], strict=True):
        for vx, vy in zip(x, y, strict=True):
            if isinstance(vx, float):
                assert vx == pytest.approx(vy, rel=1e-12, abs=1e-15)  # running-sum order
            else:
                assert vx == vy


def moved_row(data: bytes) -> bytes:
    """The file with the last row of its first histogram moved to the end: the rows of
    one unit and period are then spread over the whole file."""
    lines = lines_of(data.rstrip(b"\n"))
    key = b",".join(lines[1].split(b",")[:4])
    last = max(i for i, line in enumerate(lines) if line.startswith(key))
    row = lines.pop(last)
    return b"\n".join([*lines, row]) + b"\n"


@pytest.mark.parametrize("variant", ["as exported", "a row moved to the end", "CR only"])
def test_parts_store_exactly_what_the_whole_file_stores(tmp_path, store, csv_data, variant):
    data = {
        "as exported": csv_data,
        "a row moved to the end": moved_row(csv_data),
        "CR only": csv_data.replace(b"\n", b"\r"),
    }[variant]
    whole, parts = store("whole"), store("parts")
    r1 = usecases.ingest_bytes(whole, data, "big.csv")
    r2 = usecases.ingest_large(parts, write(tmp_path, data), block_bytes=BLOCK)
    assert r1.status == r2.status == usecases.ACCEPTED, (r1.problems, r2.problems)
    assert (r1.histograms, r1.skipped) == (r2.histograms, r2.skipped)
    assert r2.histograms > 300
    assert_same_store(stored_rows(whole), stored_rows(parts))


def test_a_part_is_many_blocks_of_whole_lines(tmp_path, csv_data):
    """The file really is read in many parts, and their records add up to the file."""
    with write(tmp_path, csv_data).open("rb") as f:
        check = stream.check_stream(f, "big.csv", BLOCK)
        assert check.problems == []
        parts = list(stream.stream_parts(f, check))
    whole = parse.parse_file(csv_data, "big.csv")
    assert len(parts) >= 20
    assert check.content_sha256 == whole.content_sha256
    assert sum(len(p.histogram_batch()) for p in parts) == len(whole.batch) == check.n_histograms
    assert check.units == set(whole.batch.unit.tolist())


@pytest.mark.parametrize(
    "mutation",
    [
        ("hours", b"abc"),  # not a number
        ("period_start", b"2026-13-01T00:00:00Z"),  # not a timestamp
        ("hour_meter_end", b"1e308"),  # above the plausible maximum
        ("short", None),  # a row cut short
    ],
)
def test_a_bad_row_late_in_the_file_gets_the_whole_file_message(tmp_path, csv_data, mutation):
    """Row problems of a file read in parts: the same list, with the same line numbers,
    as for the file read whole."""
    lines = lines_of(csv_data)
    header = lines[0].split(b",")
    at = len(lines) - 40
    cells = lines[at].split(b",")
    column, value = mutation
    if column == "short":
        cells = cells[:-2]
    else:
        cells[header.index(column.encode())] = value
    lines[at] = b",".join(cells)
    data = b"\n".join(lines)
    whole = parse.parse_file(data, "big.csv").problems
    with write(tmp_path, data).open("rb") as f:
        parts = stream.check_stream(f, "big.csv", BLOCK).problems
    assert whole and parts == whole
    assert parts[0].line == at + 1


def _rename_last_group(data: bytes, tag: bytes) -> bytes:
    """The file with the unit of its last unit and period renamed to ``tag``."""
    lines = lines_of(data.rstrip(b"\n"))
    unit, _, start = lines[-1].split(b",")[:3]
    out = [
        tag + line[len(unit) :] if line.startswith(unit + b",") and start in line else line
        for line in lines
    ]
    return b"\n".join(out) + b"\n"


def test_a_problem_in_the_last_part_changes_nothing(tmp_path, store, csv_data, tags, monkeypatch):
    """A unit not in the registry, found by the store check of the last part after the
    earlier parts were written in the same transaction: all of it is rolled back."""
    engine = store()
    stored = usecases.ingest_bytes(engine, readings_csv(tags, 50), "reads.csv")
    assert stored.status == usecases.ACCEPTED  # a store that is not empty
    before = snapshot(engine)
    writes = []
    real = ledger_rows.write_upload
    monkeypatch.setattr(ledger_rows, "write_upload", lambda *a: writes.append(1) or real(*a))
    path = write(tmp_path, _rename_last_group(csv_data, b"ZZ-999"))
    result = usecases.ingest_large(engine, path, block_bytes=BLOCK)
    assert result.status == usecases.REJECTED
    assert "unit is not in the fleet registry" in result.problems[0].message
    assert result.problems[0].value == "ZZ-999"
    assert len(writes) >= 10  # earlier parts were written, then rolled back
    assert snapshot(engine) == before


def test_a_bad_value_in_the_last_part_changes_nothing(tmp_path, store, csv_data):
    engine = store()
    before = snapshot(engine)
    data = csv_data.rstrip(b"\n") + b"," + b"\n"  # last row: one field too many
    result = usecases.ingest_large(engine, write(tmp_path, data), block_bytes=BLOCK)
    assert result.status == usecases.REJECTED
    assert "fields but the header has" in result.problems[0].message
    assert result.problems[0].line == data.count(b"\n")
    assert snapshot(engine) == before


def _first_histogram(data: bytes) -> list[bytes]:
    lines = lines_of(data)
    key = b",".join(lines[1].split(b",")[:7])
    return [line for line in lines[1:] if line.startswith(key)]


def test_a_histogram_repeated_in_another_part_is_caught(tmp_path, store, csv_data):
    engine = store()
    before = snapshot(engine)
    copy = _first_histogram(csv_data)
    data = csv_data + b"\n".join(copy) + b"\n"
    result = usecases.ingest_large(engine, write(tmp_path, data), block_bytes=BLOCK)
    assert result.status == usecases.REJECTED
    assert "overlaps the band" in result.problems[0].message
    assert result.problems == tuple(parse.parse_file(data, "big.csv").problems)
    assert snapshot(engine) == before


def test_the_same_period_written_otherwise_in_another_part_is_caught(tmp_path, store, csv_data):
    """The same histogram with its times written with `+00:00` instead of `Z`: another
    unit and period as written, the same hours; caught by the check over the whole file."""
    engine = store()
    before = snapshot(engine)
    copy = [line for line in _first_histogram(csv_data) if b"Z," in line]
    assert copy, "the first histogram of the seeded file is in UTC"
    data = csv_data + b"\n".join(c.replace(b"Z,", b"+00:00,") for c in copy) + b"\n"
    result = usecases.ingest_large(engine, write(tmp_path, data), block_bytes=BLOCK)
    assert result.status == usecases.REJECTED
    [problem] = result.problems
    assert problem.line == csv_data.count(b"\n") + 1
    assert problem.message.startswith("period overlaps the histogram at line 2 ")
    assert snapshot(engine) == before


def test_the_same_file_twice_counts_once(tmp_path, store, csv_data):
    engine = store()
    path = write(tmp_path, csv_data)
    first = usecases.ingest_large(engine, path, block_bytes=BLOCK)
    assert first.status == usecases.ACCEPTED
    after = snapshot(engine)
    assert usecases.ingest_large(engine, path, block_bytes=BLOCK).status == usecases.DUPLICATE
    assert usecases.ingest_bytes(engine, csv_data, "copy.csv").status == usecases.DUPLICATE
    assert snapshot(engine) == after


def test_rows_spread_too_far_are_refused(tmp_path, store, csv_data, monkeypatch):
    monkeypatch.setattr(stream, "MAX_OPEN_ROWS", 10)  # the group holds ~30 rows
    engine = store()
    before = snapshot(engine)
    path = write(tmp_path, moved_row(csv_data))
    result = usecases.ingest_large(engine, path, block_bytes=BLOCK)
    assert result.status == usecases.REJECTED
    assert "are spread over more than 10 rows" in result.problems[0].message
    assert result.problems[0].line == 2
    assert snapshot(engine) == before


def test_upload_path_reads_a_large_file_in_parts(tmp_path, store, csv_data, monkeypatch):
    from monitor.usecases import telemetry

    def whole(*args, **kwargs):
        raise AssertionError("a file above the threshold must not be read whole")

    monkeypatch.setattr(telemetry, "STREAM_THRESHOLD_BYTES", 100_000)
    monkeypatch.setattr(telemetry.parse, "parse_file", whole)
    result = usecases.upload_path(store(), write(tmp_path, csv_data))
    assert result.status == usecases.ACCEPTED and result.histograms > 300


def test_a_large_json_file_is_refused_without_reading_it_whole(tmp_path, store, monkeypatch):
    monkeypatch.setattr(stream, "MAX_JSON_BYTES", 1000)
    path = write(tmp_path, b"[" + b'{"unit": "KV-401"},' * 200 + b"{}]", "big.json")
    result = usecases.ingest_large(store(), path, block_bytes=BLOCK)
    assert result.status == usecases.REJECTED
    assert "limit for JSON" in result.problems[0].message


READINGS_HEADER = b"unit,position,taken_at,hour_meter,case_drain_lpm,test_pressure_bar,oil_temp_c\n"


def readings_csv(tags: list[str], n: int) -> bytes:
    """``n`` seeded readings of the invented units, a few per component and week."""
    rng = np.random.default_rng(5)
    k = np.arange(n)
    unit = np.asarray(tags, dtype=object)[k % len(tags)]
    pos = np.where((k // len(tags)) % 2 == 0, "left", "right")
    when = pd.Timestamp("2025-06-01", tz="UTC") + pd.to_timedelta(k // (2 * len(tags)), "h")
    rows = [
        f"{u},{p},{t.isoformat()},{1000 + i / 10:.1f},{rng.uniform(1, 3):.3f},250,50\n"
        for i, (u, p, t) in enumerate(zip(unit, pos, when, strict=True))
    ]
    return READINGS_HEADER + "".join(rows).encode()


def test_readings_in_parts(tmp_path, store, tags):
    data = readings_csv(tags, 3000)
    whole, parts = store("whole"), store("parts")
    r1 = usecases.ingest_bytes(whole, data, "reads.csv")
    r2 = usecases.ingest_large(parts, write(tmp_path, data), block_bytes=BLOCK)
    assert r1.status == r2.status == usecases.ACCEPTED, (r1.problems, r2.problems)
    assert r1.readings == r2.readings == 3000
    assert_same_store(stored_rows(whole), stored_rows(parts))
    # a reading repeated far away, in another part: refused as when read whole
    again = data + data.split(b"\n")[1] + b"\n"
    engine = store("again")
    before = snapshot(engine)
    result = usecases.ingest_large(engine, write(tmp_path, again, "again.csv"), block_bytes=BLOCK)
    assert result.status == usecases.REJECTED
    assert result.problems == tuple(parse.parse_file(again, "again.csv").problems)
    assert snapshot(engine) == before


def test_an_empty_file_is_refused(tmp_path, store):
    engine = store()
    result = usecases.ingest_large(engine, write(tmp_path, b""), block_bytes=BLOCK)
    assert result.status == usecases.REJECTED
    assert result.problems[0].message.startswith("file is empty")
