"""Storing pressure traces (monitor.usecases.traces, ``drivespan ingest-trace``): the same
ledger row as the equivalent histogram file, every rejection with the store unchanged,
duplicates counted once, the summary kept with the upload."""

from __future__ import annotations

import io
import json
from datetime import UTC, datetime, timedelta

import numpy as np
import pandas as pd
import pytest
from click.testing import CliRunner
from sqlalchemy import select

from monitor import cli, usecases
from monitor.ingest.trace import TraceSettings, read_trace
from monitor.store import db, queries
from tests.conftest import DATA

START = "2026-03-02T10:00:00Z"
HOUR_METER = 4000.0  # after LR-101 left's rebuild at 3980 h (tests/data/fleet.yaml)
LEDGER_FIELDS = (
    "meter_hours",
    "hours",
    "damage",
    "relief_hours",
    "cutoff_hours",
    "relief_heat_kwh",
    "hour_meter_end",
)


def trace_bytes(**columns) -> bytes:
    buf = io.StringIO()
    pd.DataFrame(columns).to_csv(buf, index=False)
    return buf.getvalue().encode()


@pytest.fixture(scope="module")
def loader_trace() -> bytes:
    """10 minutes at 10 Hz: a triangle between 30 and 440 bar (HX-90: cut-off 420,
    relief 450), 20 bar on the other side, speed falling to a stall at the top."""
    t = np.arange(0.0, 600.0, 0.1)
    high = 30.0 + np.abs((t / 20.0) % 2.0 - 1.0) * 410.0
    speed = np.clip(2200.0 * (440.0 - high) / 100.0, 0.0, 2200.0)
    return trace_bytes(
        time_s=t, pressure_a_bar=high, pressure_b_bar=np.full(t.size, 20.0), speed_rpm=speed
    )


def new_store(url: str):
    engine = usecases.init_db(url)
    usecases.import_registry(engine, (DATA / "fleet.yaml").read_bytes(), "fleet.yaml")
    return engine


def counts(engine) -> dict[str, int]:
    with engine.connect() as conn:
        return queries.table_counts(conn)


def ledger_row(engine) -> dict:
    with engine.connect() as conn:
        rows = conn.execute(select(db.ledger)).mappings().all()
    assert len(rows) == 1
    return dict(rows[0])


def ingest(engine, data: bytes, name: str = "trace.csv", **kw):
    args = dict(unit="LR-101", position="left", hour_meter_start=HOUR_METER, started_at=START)
    args.update(kw)
    return usecases.ingest_trace(engine, data, name, **args)


def equivalent_csv(data: bytes) -> bytes:
    """The histogram CSV of the same bands, hours, period and hour meters: the time at
    pressure and the pressure-by-speed matrix, with the trace's mean speed."""
    r = read_trace(data, "trace.csv", TraceSettings(relief_bar=450.0, cutoff_bar=420.0))
    start = datetime(2026, 3, 2, 10, tzinfo=UTC)
    head = (
        f"LR-101,left,{start.isoformat()},{(start + timedelta(seconds=r.duration_s)).isoformat()},"
        f"{HOUR_METER!r},{HOUR_METER + r.duration_s / 3600.0!r}"
    )
    lines = [
        "unit,position,period_start,period_end,hour_meter_start,hour_meter_end,quantity,"
        "pressure_low_bar,pressure_high_bar,speed_low_rpm,speed_high_rpm,hours,mean_speed_rpm"
    ]
    p, s, mean = r.pressure_edges_bar.tolist(), r.speed_edges_rpm.tolist(), r.mean_speed_rpm
    for i, h in enumerate(r.hours.tolist()):
        lines.append(f"{head},pressure,{p[i]!r},{p[i + 1]!r},,,{h!r},{mean!r}")
        for j, hs in enumerate(r.hours_by_speed[i].tolist()):
            cell = f"{p[i]!r},{p[i + 1]!r},{s[j]!r},{s[j + 1]!r},{hs!r}"
            lines.append(f"{head},pressure_speed,{cell},{mean!r}")
    return ("\n".join(lines) + "\n").encode()


def test_trace_and_equivalent_histogram_give_the_same_ledger_row(tmp_path, loader_trace):
    a = new_store(f"sqlite:///{tmp_path / 'a.db'}")
    b = new_store(f"sqlite:///{tmp_path / 'b.db'}")
    res = ingest(a, loader_trace)
    assert res.status == usecases.ACCEPTED, res.problems
    assert res.histograms == 2  # time at pressure and the pressure-by-speed matrix
    csv = usecases.upload(b, equivalent_csv(loader_trace), "equivalent.csv")
    assert csv.status == usecases.ACCEPTED, csv.problems
    row_a, row_b = ledger_row(a), ledger_row(b)
    for f in LEDGER_FIELDS:
        assert row_a[f] == pytest.approx(row_b[f], rel=1e-9, abs=1e-12), f
    assert row_a["damage"] > 0 and row_a["cutoff_hours"] > 0 and row_a["relief_hours"] > 0
    # 600 s less the last sample's 0.1 s, no gaps: the meter and the bands agree
    assert row_a["meter_hours"] == pytest.approx(599.9 / 3600)
    assert row_a["hours"] == pytest.approx(599.9 / 3600)
    # the ranking sees the trace like any upload
    status = usecases.fleet_status(a, datetime(2026, 3, 3).date())
    left = status[(status["unit"] == "LR-101") & (status["position"] == "left")].iloc[0]
    assert left["consumed_fraction"] > 0


def test_summary_is_kept_with_the_upload(tmp_path, loader_trace):
    engine = new_store(f"sqlite:///{tmp_path / 's.db'}")
    res = ingest(engine, loader_trace)
    with engine.connect() as conn:
        rows = conn.execute(select(db.trace_summary)).mappings().all()
        file_ids = conn.execute(select(db.upload_file.c.id)).scalars().all()
    assert len(rows) == 1 and rows[0]["file_id"] == file_ids[0]
    doc = json.loads(rows[0]["summary"])
    assert doc == json.loads(json.dumps(res.trace))
    assert doc["samples"] == 6000 and doc["period_start"] == "2026-03-02T10:00:00+00:00"
    # constructed: peaks of 440 bar at 0, 40, ..., 560 s and the rise at the end (599-600 s)
    assert doc["cutoff_excursions"] == len(doc["excursions"]["cutoff"]) == 16
    assert doc["excursions"]["relief"] == [] and doc["relief_excursions"] == 0
    # 600 s / 40 s = 15 cycles of 410 bar range, counted as cycles >= 50, 100 and 200 bar
    per_h = np.array(doc["cycles"]["per_hour"])
    np.testing.assert_allclose(per_h, per_h[0])
    assert doc["cycles"]["total_cycles"] == pytest.approx(15.0, abs=0.5)
    env = doc["envelope"]
    assert max(env["maximum"]["pressure_a_bar"]) == pytest.approx(440.0, abs=0.01)
    assert min(env["minimum"]["pressure_a_bar"]) == pytest.approx(30.0, abs=0.01)
    assert 1000 <= len(env["start_s"]) <= 2000
    assert sum(doc["histogram"]["hours"]) == pytest.approx(599.9 / 3600)


REJECTIONS = {
    "no time column": (
        b"pressure_a_bar,pressure_b_bar\n100,20\n110,20\n",
        {},
        "missing time column",
    ),
    "time running backwards": (
        b"time_s,pressure_a_bar,pressure_b_bar\n0,100,20\n1,110,20\n0.5,120,20\n",
        {},
        "time runs backwards",
    ),
    "unknown unit suffix": (
        b"time_s,pressure_a_atm,pressure_b_bar\n0,100,20\n1,110,20\n",
        {},
        "unknown unit `atm`",
    ),
    "non-numeric pressure": (
        b"time_s,pressure_a_bar,pressure_b_bar\n0,100,20\n1,high,20\n",
        {},
        "must be a number",
    ),
    "one sample": (b"time_s,pressure_a_bar,pressure_b_bar\n0,100,20\n", {}, "1 sample"),
    "unknown unit tag": (None, {"unit": "LR-109"}, "not in the fleet registry"),
    "unknown position": (None, {"position": "middle"}, "positions: left, right"),
    "no start time": (None, {"started_at": None}, "no timestamp column"),
    "start without offset": (None, {"started_at": "2026-03-02T10:00:00"}, "with an offset"),
    "negative hour meter": (None, {"hour_meter_start": -1.0}, "hours >= 0"),
    "hour meter backwards": (None, {"hour_meter_start": 3000.0}, "hour meter"),
}


@pytest.mark.parametrize("case", sorted(REJECTIONS))
def test_every_rejection_leaves_the_store_unchanged(tmp_path, loader_trace, case):
    engine = new_store(f"sqlite:///{tmp_path / 'r.db'}")
    # something stored first, so that a half-written rejection would show
    assert ingest(engine, loader_trace, "first.csv").status == usecases.ACCEPTED
    before = counts(engine)
    data, kw, message = REJECTIONS[case]
    if data is None:  # the trace is fine, the arguments are not: a later trace of the drive
        t = np.arange(0.0, 60.0, 0.5)
        data = trace_bytes(time_s=t, pressure_a_bar=100.0 + t, pressure_b_bar=np.full(t.size, 20))
        kw = {"hour_meter_start": HOUR_METER + 1.0, "started_at": "2026-03-02T11:00:00Z", **kw}
    res = ingest(engine, data, "bad.csv", **kw)
    assert res.status == usecases.REJECTED
    assert any(message in str(p) for p in res.problems), [str(p) for p in res.problems]
    assert counts(engine) == before


def test_duplicate_trace_counts_once(tmp_path, loader_trace):
    engine = new_store(f"sqlite:///{tmp_path / 'd.db'}")
    assert ingest(engine, loader_trace).status == usecases.ACCEPTED
    before = counts(engine)
    again = ingest(engine, loader_trace, "copy-of-trace.csv")
    assert again.status == usecases.DUPLICATE and "duplicate" in again.summary
    assert counts(engine) == before and before["trace_summary"] == 1


def run(*args: str):
    return CliRunner().invoke(cli.main, list(args))


def test_cli_options_sidecar_and_rejection(tmp_path, loader_trace):
    url = f"sqlite:///{tmp_path / 'c.db'}"
    new_store(url).dispose()
    path = tmp_path / "loader.csv"
    path.write_bytes(loader_trace)
    res = run("ingest-trace", str(path), "--unit", "LR-101", "--db", url)
    assert res.exit_code == 1 and "--position, --hour-meter-start" in res.stderr
    sidecar = {"unit": "LR-101", "position": "left", "hour_meter_start": HOUR_METER}
    (tmp_path / "loader.csv.json").write_text(json.dumps(sidecar))
    res = run("ingest-trace", str(path), "--started-at", START, "--db", url)
    assert res.exit_code == 0, res.output
    assert (
        "accepted, 2 histograms" in res.stdout
        and "note: The pump has a pressure cut-off" in res.stdout
    )
    res = run("ingest-trace", str(path), "--started-at", START, "--db", url)
    assert res.exit_code == 0 and "duplicate" in res.stdout
    bad = tmp_path / "bad.csv"
    bad.write_bytes(b"time_s,pressure_a_bar,pressure_b_bar\n0,100,20\n")
    res = run("ingest-trace", str(bad), "--unit", "LR-101", "--position", "left",
              "--hour-meter-start", "4100", "--started-at", START, "--db", url)  # fmt: skip
    assert res.exit_code == 1 and "rejected" in res.stdout and "1 sample" in res.stdout
    (tmp_path / "bad.csv.json").write_text('{"unit": "LR-101", "colour": "red"}')
    res = run("ingest-trace", str(bad), "--db", url)
    assert res.exit_code == 1 and "unknown field" in res.stderr
