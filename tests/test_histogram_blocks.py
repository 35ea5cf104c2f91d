"""Histograms stored in blocks (revision 0007): the conversion of an existing store, and
the same ledger, ranking and duplicate detection before and after it.

- A store at revision 0006 made by the code before the blocks (tests/data/store_0006: a
  small demo fleet built then, gzip-compressed, with the rank and unit reports that code
  printed) is upgraded: every histogram is kept, the printed outputs are the same, a
  recompute writes the same ledger, a stored export is a duplicate and a changed one is
  refused as before.
- On SQLite and PostgreSQL, a store with pressure histograms and pressure-by-speed
  matrices, band edges shared and not, mean speeds and oil temperatures given and not,
  goes down to 0006 (one row per histogram again) and back up: the rows at 0006 are the
  ones the histograms' records give, and histograms, ledger, ranking and duplicate
  detection are identical at the end.
"""

from __future__ import annotations

import gzip
import json
import sqlite3
from datetime import date
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from alembic import command
from click.testing import CliRunner
from sqlalchemy import inspect, select, text

from monitor import usecases
from monitor.cli import main
from monitor.store import db, queries
from tests import reference_paths
from tests.test_golden_outputs import assert_same_output

DATA = Path(__file__).parent / "data"
OLD = DATA / "store_0006"
OLD_AS_OF = "2026-07-01"


def _cli(url: str, *args: str) -> str:
    result = CliRunner().invoke(main, [*args, "--as-of", OLD_AS_OF, "--db", url])
    assert result.exit_code == 0, result.output
    return result.stdout


def _ledger(conn) -> pd.DataFrame:  # noqa: ANN001
    """The ledger without row ids, in ledger order."""
    df = pd.read_sql_query(
        text("SELECT * FROM ledger ORDER BY component_id, period_end, upload_id"), conn
    )
    return df.drop(columns=["id"]).reset_index(drop=True)


def test_a_store_made_before_the_blocks_upgrades_with_the_same_outputs(tmp_path):
    path = tmp_path / "demo.db"
    path.write_bytes(gzip.decompress((OLD / "demo.db.gz").read_bytes()))
    url = f"sqlite:///{path}"
    with sqlite3.connect(path) as con:
        n_before = con.execute("SELECT count(*) FROM histogram").fetchone()[0]
        shas_before = sorted(r[0] for r in con.execute("SELECT content_sha256 FROM histogram"))
    engine = db.make_engine(url)
    with engine.connect() as conn:
        ledger_before = _ledger(conn)
    usecases.init_db(url).dispose()  # upgrade to the newest revision
    with engine.connect() as conn:
        tables = set(inspect(conn).get_table_names())
        assert "histogram" not in tables and "histogram_block" in tables
        rows = reference_paths.stored_histogram_rows(conn)
        assert queries.table_counts(conn)["histogram"] == len(rows) == n_before > 900
        assert sorted(r["content_sha256"] for r in rows) == shas_before
        pd.testing.assert_frame_equal(_ledger(conn), ledger_before)
        # each histogram's stored hash is still the hash of what it holds
        again = reference_paths.stored_histograms(conn, sorted({r["component_id"] for r in rows}))
        hs = [h for h, _ in again[0]]
        assert sorted(reference_paths.histogram_shas(hs)) == shas_before
    for name, args in {
        "rank.json": ["rank", "--format", "json"],
        **{f"unit_{t}.json": ["unit", t, "--format", "json"] for t in ("SW-03", "GQ-05", "TH-27")},
    }.items():
        assert_same_output(_cli(url, *args), (OLD / name).read_text(encoding="utf-8"))
    usecases.recompute(engine)
    with engine.connect() as conn:
        pd.testing.assert_frame_equal(_ledger(conn), ledger_before)
    export = (OLD / "2026-06_tenterhook-hire-yard.csv").read_bytes()
    assert usecases.upload(engine, export, "again.csv").status == usecases.DUPLICATE
    # the same histograms in another file: each one skipped, nothing stored twice
    res = usecases.upload(engine, export + b"\n", "copy.csv")
    assert (res.status, res.histograms, res.skipped) == (usecases.ACCEPTED, 0, res.skipped)
    assert res.skipped > 0
    # a changed histogram of a stored period: refused, naming the stored file
    lines = export.decode().splitlines()
    head, first = lines[0], lines[1].split(",")
    col = head.split(",").index("hours")
    first[col] = f"{float(first[col]) + 0.01:g}"
    changed = "\n".join([head, ",".join(first), *lines[2:]]) + "\n"
    res = usecases.upload(engine, changed.encode(), "changed.csv")
    assert res.status == usecases.REJECTED
    assert "overlaps stored upload" in str(res.problems[0])
    assert "2026-06_tenterhook-hire-yard.csv" in str(res.problems[0])
    with engine.connect() as conn:
        assert queries.table_counts(conn)["histogram"] == n_before
        pd.testing.assert_frame_equal(_ledger(conn), ledger_before)
    engine.dispose()


HEADER = (
    "unit,position,period_start,period_end,hour_meter_start,hour_meter_end,quantity,"
    "pressure_low_bar,pressure_high_bar,hours,mean_speed_rpm,oil_temp_c"
)


def _varied_csv() -> bytes:
    """Five days of LR-102: both loops, the left loop's bands change on day 3, oil
    temperature given on some days, mean speed left out on one."""
    rows = [HEADER]
    meter = 7000.0
    for day in range(5):
        t0, t1 = f"2026-05-{day + 10:02d}T00:00:00Z", f"2026-05-{day + 11:02d}T00:00:00Z"
        temp = "" if day % 2 else f"{48 + day}"
        speed = "" if day == 4 else "2100"
        for pos in ("left", "right"):
            edges = [0, 100, 200, 350] if (pos == "left" and day == 3) else [0, 50, 150, 300]
            hours = [2.0 + day / 4, 3.0, 1.5]
            for lo, hi, h in zip(edges[:-1], edges[1:], hours, strict=True):
                rows.append(
                    f"LR-102,{pos},{t0},{t1},{meter},{meter + sum(hours)},pressure,"
                    f"{lo},{hi},{h},{speed},{temp}"
                )
        meter += sum(hours)
    return ("\n".join(rows) + "\n").encode()


FILES = ["hist_pressure.csv", "hist_pressure_speed.csv", "upload.json"]


def _snapshot(engine) -> dict:  # noqa: ANN001
    with engine.connect() as conn:
        rows = reference_paths.stored_histogram_rows(conn)
        key = lambda r: (r["component_id"], r["quantity"], r["period_start"])  # noqa: E731
        return {
            "histograms": sorted(
                ({k: v for k, v in r.items() if k != "upload_id"} for r in rows), key=key
            ),
            "ledger": _ledger(conn),
            "rank": usecases.rank_records(usecases.fleet_status(engine, date(2026, 6, 1))),
        }


def _assert_same(a: dict, b: dict) -> None:
    assert a["histograms"] == b["histograms"]
    pd.testing.assert_frame_equal(a["ledger"], b["ledger"])
    assert json.dumps(a["rank"], default=str) == json.dumps(b["rank"], default=str)


def test_down_to_one_row_per_histogram_and_back_keeps_everything(db_url):
    engine = usecases.init_db(db_url)
    usecases.import_registry(engine, (DATA / "fleet.yaml").read_bytes(), "fleet.yaml")
    files = [(n, (DATA / n).read_bytes()) for n in FILES] + [("varied.csv", _varied_csv())]
    for name, data in files:
        assert usecases.upload(engine, data, name).status == usecases.ACCEPTED, name
    before = _snapshot(engine)
    hists = before["histograms"]
    assert {h["quantity"] for h in hists} == {"pressure", "pressure_speed"}
    assert any(h["oil_temp_c"] is not None for h in hists)
    assert any(h["oil_temp_c"] is None for h in hists)
    assert any(h["mean_speed_rpm"] is None for h in hists)
    with engine.connect() as conn:
        t = db.histogram_block
        shared = set(conn.execute(select(t.c.bands_shared)).scalars())
    assert shared == {True, False}  # the left loop's changed bands: a block of its own kind
    engine.dispose()

    command.downgrade(db.alembic_config(db_url), "0006")
    engine = db.make_engine(db_url)
    with engine.connect() as conn:
        old = conn.execute(text("SELECT * FROM histogram ORDER BY id")).mappings().all()
        assert len(old) == len(hists)
        by_sha = {r["content_sha256"]: r for r in old}
        for h in hists:
            r = by_sha[h["content_sha256"]]
            for k in ("pressure_bands", "speed_bands", "hours", "quantity", "n_pressure"):
                assert (bytes(r[k]) if isinstance(r[k], memoryview) else r[k]) == h[k], k
            assert r["total_hours"] == pytest.approx(h["total_hours"], rel=1e-15)
            assert (r["mean_speed_rpm"], r["oil_temp_c"]) == (h["mean_speed_rpm"], h["oil_temp_c"])
    engine.dispose()

    engine = usecases.init_db(db_url)  # back to the newest revision
    after = _snapshot(engine)
    _assert_same(before, after)
    usecases.recompute(engine)
    _assert_same(before, _snapshot(engine))
    for name, data in files:
        res = usecases.upload(engine, data, name)
        assert res.status == usecases.DUPLICATE, name
    res = usecases.upload(engine, _varied_csv() + b"\n", "varied-copy.csv")
    assert (res.status, res.histograms, res.skipped) == (usecases.ACCEPTED, 0, 10)
    _assert_same(before, _snapshot(engine))
    engine.dispose()


def test_blocks_keep_shared_band_edges_once(sqlite_url):
    engine = usecases.init_db(sqlite_url)
    usecases.import_registry(engine, (DATA / "fleet.yaml").read_bytes(), "fleet.yaml")
    assert usecases.upload(engine, _varied_csv(), "varied.csv").status == usecases.ACCEPTED
    with engine.connect() as conn:
        t = db.histogram_block
        rows = conn.execute(
            select(t.c.n_histograms, t.c.bands_shared, t.c.pressure_low_bar, t.c.hours)
        ).all()
    # one block per loop: the right loop's five days share their edges, the left's not
    assert sorted((n, shared) for n, shared, _, _ in rows) == [(5, False), (5, True)]
    for n, shared, low, hours in rows:
        assert len(np.frombuffer(low, "<f8")) == (3 if shared else 3 * n)
        assert len(np.frombuffer(hours, "<f8")) == 3 * n
    engine.dispose()
