"""The batched ledger paths give the ledger of the one-histogram-at-a-time reference.

Ingest and ``recompute`` build the ledger from arrays stacked per shape group and write
it with the DBAPI ``executemany``. Here the same ledger is rebuilt the slow, plain way:
one :class:`~monitor.records.Histogram` per stored row (``ledger_rows.stored_histograms``),
a pressure-by-speed matrix chosen over a plain histogram of the same upload, the oil
condition per component, ``ledger_rows.metrics_for`` per component and running totals by
``numpy.cumsum`` in period order. Both must agree on an invented demo fleet (bearing
models with ISO 4406 samples, rebuilds, several files) and on the sample files with
pressure-by-speed matrices, on SQLite and on PostgreSQL.
"""

from __future__ import annotations

from datetime import date
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from sqlalchemy import select

from monitor import fleet, usecases
from monitor.fleet import wear_status
from monitor.ingest.parse import parse_file
from monitor.ledger import batch_metrics, metrics
from monitor.models import bearings, oil
from monitor.store import checks, db, ledger_rows, queries, status_reads
from monitor.usecases.demo import build_demo
from tests import reference_paths

DATA = Path(__file__).parent / "data"
VALUE_COLUMNS = [
    "hour_meter_end",
    "meter_hours",
    "hours",
    "damage",
    "relief_hours",
    "cutoff_hours",
    "relief_heat_kwh",
    *ledger_rows.CUM_COLUMNS,
]

# One upload of LR-102 left with both a plain histogram and a pressure-by-speed matrix:
# the matrix must be the one in the ledger (invented values).
BOTH_QUANTITIES = (
    "unit,position,period_start,period_end,hour_meter_start,hour_meter_end,quantity,"
    "pressure_low_bar,pressure_high_bar,speed_low_rpm,speed_high_rpm,hours\n"
    "LR-102,left,2026-04-01T00:00:00Z,2026-04-02T00:00:00Z,900,906,pressure,0,200,,,2.0\n"
    "LR-102,left,2026-04-01T00:00:00Z,2026-04-02T00:00:00Z,900,906,pressure,200,400,,,4.0\n"
    "LR-102,left,2026-04-01T00:00:00Z,2026-04-02T00:00:00Z,900,906,pressure_speed,0,200,0,1500,1.5\n"
    "LR-102,left,2026-04-01T00:00:00Z,2026-04-02T00:00:00Z,900,906,pressure_speed,0,200,1500,3000,0.5\n"
    "LR-102,left,2026-04-01T00:00:00Z,2026-04-02T00:00:00Z,900,906,pressure_speed,200,400,0,1500,1.0\n"
    "LR-102,left,2026-04-01T00:00:00Z,2026-04-02T00:00:00Z,900,906,pressure_speed,200,400,1500,3000,3.0\n"
)


def _stored_ledger(conn) -> pd.DataFrame:  # noqa: ANN001
    t = db.ledger
    df = pd.DataFrame(conn.execute(select(t)).mappings().all())
    df["period_end"] = pd.to_datetime(df["period_end"], utc=True)
    df = df.sort_values(["component_id", "period_end", "upload_id"], ignore_index=True)
    return df[["upload_id", "component_id", "period_end", *VALUE_COLUMNS]]


def _reference_oil(hists: list, model, row: pd.Series) -> metrics.OilCondition:  # noqa: ANN001
    """The oil state per histogram, plainly: the upload's oil temperature, else the
    component's, the unit's or the model's; viscosity on the oil's D341 line; eC of the
    site's, else the oil's, else the default level."""
    fallback = next(
        (float(v) for v in (row["c_operating_temp_c"], row["u_operating_temp_c"],
                            model.operating_temp_c) if v is not None and v == v),
        None,
    )  # fmt: skip
    spec = queries.oil_spec(row)
    line = oil.oil_line_from_spec(**batch_metrics._oil_kwargs(spec))
    level = row["site_contamination_level"] or spec.contamination_level or "normal cleanliness"
    ec = bearings.contamination_factor(
        bearings.CONTAMINATION_LEVEL_NAMES[level], model.bearing_pitch_diameter_mm
    )
    nu, ecs = [], []
    for h in hists:
        t = h.oil_temp_c if h.oil_temp_c is not None else fallback
        nu.append(np.nan if t is None else float(oil.walther_viscosity_mm2s(t, *line)))
        ecs.append(np.nan if t is None else ec)
    return metrics.OilCondition(np.array(nu), np.array(ecs))


def _reference_component(conn, cid: int, row: pd.Series) -> pd.DataFrame | None:  # noqa: ANN001
    hs, uploads = reference_paths.stored_histograms(conn, [cid])
    chosen: dict[int, object] = {}
    for (h, _), up in zip(hs, uploads, strict=True):
        if up not in chosen or h.quantity == "pressure_speed":
            chosen[up] = h
    if not chosen:
        return None
    ups, hists = list(chosen), list(chosen.values())
    model = queries.model_spec(row)
    cond = _reference_oil(hists, model, row) if metrics.has_bearing_data(model) else None
    met = reference_paths.metrics_for(hists, model, cond)
    df = pd.DataFrame(
        {
            "upload_id": ups,
            "component_id": cid,
            "period_end": pd.to_datetime([h.period_end for h in hists], utc=True),
            "hour_meter_end": [h.hour_meter_end for h in hists],
            "meter_hours": [h.hour_meter_end - h.hour_meter_start for h in hists],
            **{k: getattr(met, k) for k in metrics.Metrics.__dataclass_fields__},
        }
    ).sort_values(["period_end", "upload_id"], ignore_index=True)
    for cum, col in ledger_rows.CUM_COLUMNS.items():
        df[cum] = np.cumsum(df[col].to_numpy())
    return df


def reference_ledger(engine) -> pd.DataFrame:  # noqa: ANN001
    """The ledger rebuilt one histogram object at a time (the plain, slow way)."""
    with engine.connect() as conn:
        comps = queries.components_frame(conn).set_index("component_id")
        parts = [_reference_component(conn, int(c), comps.loc[c]) for c in comps.index]
    df = pd.concat([p for p in parts if p is not None], ignore_index=True)
    df = df.sort_values(["component_id", "period_end", "upload_id"], ignore_index=True)
    return df[["upload_id", "component_id", "period_end", *VALUE_COLUMNS]]


def assert_ledger_matches_reference(engine) -> None:  # noqa: ANN001
    want = reference_ledger(engine)
    with engine.connect() as conn:
        got = _stored_ledger(conn)
    assert len(got) == len(want) > 0
    pd.testing.assert_frame_equal(got, want, check_dtype=False, rtol=1e-12)


@pytest.fixture(scope="module")
def demo_store(tmp_path_factory):
    return build_demo(
        tmp_path_factory.mktemp("demo") / "d", units_scale=0.1, years=0.5, end_date=date(2026, 6, 1)
    )


def test_demo_ledger_at_ingest_and_after_recompute_match_reference(demo_store):
    engine = db.make_engine(demo_store.db_url)
    with engine.connect() as conn:
        n_samples = conn.execute(
            select(db.reading.c.id).where(db.reading.c.iso4406.is_not(None))
        ).all()
    assert n_samples, "the demo should exercise the oil-condition factor"
    assert_ledger_matches_reference(engine)  # as written by ingest, file by file
    n = usecases.recompute(engine)
    assert_ledger_matches_reference(engine)
    with engine.connect() as conn:
        assert n == len(_stored_ledger(conn))
    engine.dispose()


def _sample_files() -> list[tuple[str, bytes]]:
    names = ["hist_pressure.csv", "hist_pressure_speed.csv", "upload.json"]
    return [(n, (DATA / n).read_bytes()) for n in names] + [("both.csv", BOTH_QUANTITIES.encode())]


def test_sample_files_with_matrices_match_reference(db_url):
    engine = usecases.init_db(db_url)
    usecases.import_registry(engine, (DATA / "fleet.yaml").read_text(), "fleet.yaml")
    for name, data in _sample_files():
        res = usecases.upload(engine, data, name)
        assert res.status == usecases.ACCEPTED, [str(p) for p in res.problems]
    with engine.connect() as conn:
        quantities = {r["quantity"] for r in reference_paths.stored_histogram_rows(conn)}
    assert quantities == {"pressure", "pressure_speed"}
    assert_ledger_matches_reference(engine)
    usecases.recompute(engine)
    assert_ledger_matches_reference(engine)
    engine.dispose()


def test_both_quantities_of_one_upload_keep_the_matrix(sqlite_url):
    engine = usecases.init_db(sqlite_url)
    usecases.import_registry(engine, (DATA / "fleet.yaml").read_text(), "fleet.yaml")
    assert usecases.upload(engine, BOTH_QUANTITIES.encode(), "both.csv").status == "accepted"
    with engine.connect() as conn:
        rows = conn.execute(select(db.ledger.c.hours, db.ledger.c.damage)).all()
    # one ledger row; 6 h in both histograms, so compare the damage with each alone
    assert len(rows) == 1 and rows[0][0] == pytest.approx(6.0)
    parsed = parse_file(BOTH_QUANTITIES.encode(), "both.csv")
    by_q = {h.quantity: h for h in parsed.histograms}
    with engine.connect() as conn:
        comps = queries.components_frame(conn)
    model = queries.model_spec(comps[comps["unit"] == "LR-102"].iloc[0])
    nan = np.full(1, np.nan)
    cond = metrics.OilCondition(nan, nan) if metrics.has_bearing_data(model) else None
    matrix = reference_paths.metrics_for([by_q["pressure_speed"]], model, cond).damage[0]
    plain = reference_paths.metrics_for([by_q["pressure"]], model, cond).damage[0]
    assert matrix != pytest.approx(plain)  # the test can tell them apart
    assert rows[0][1] == pytest.approx(matrix, rel=1e-12)
    engine.dispose()


def test_batched_histogram_hashes_equal_one_at_a_time():
    hs = []
    for name in ("hist_pressure.csv", "hist_pressure_speed.csv", "upload.json"):
        hs += parse_file((DATA / name).read_bytes(), name).histograms
    hs += parse_file(BOTH_QUANTITIES.encode(), "both.csv").histograms
    assert {h.quantity for h in hs} == {"pressure", "pressure_speed"}
    assert reference_paths.histogram_shas(hs) == [reference_paths.histogram_sha(h) for h in hs]
    assert reference_paths.histogram_shas([]) == []


def _wear_one_at_a_time(inputs: pd.DataFrame, readings: pd.DataFrame, params) -> pd.DataFrame:  # noqa: ANN001
    """The wear columns with one trend and one step fit per component (the plain way)."""
    rows = []
    for row in inputs.to_dict("records"):
        rd = readings[readings["component_id"] == row["component_id"]]
        limit = fleet.case_drain_limit_lpm(row)
        vals, step, n_off = (np.nan,) * 6, False, 0
        if not rd.empty:
            off = fleet.readings_off_reference(
                rd["test_pressure_bar"].to_numpy(float), rd["oil_temp_c"].to_numpy(float),
                row, params,
            ) & rd["case_drain_lpm"].notna().to_numpy()  # fmt: skip
            n_off = int(off.sum())
            rd = rd[~off]
        if not rd.empty:
            x = rd["hour_meter"].to_numpy(float)
            y = fleet.normalised_case_drain(
                rd["case_drain_lpm"].to_numpy(float),
                rd["test_pressure_bar"].to_numpy(float),
                rd["oil_temp_c"].to_numpy(float),
                row,
                fleet.oil_viscosity_line(row),
            )
            vals, step = wear_status._wear_one(x, y, limit, row, params)
        short = not np.isnan(vals[1]) and np.isnan(vals[5])
        rows.append((*vals[:5], len(rd), n_off, short, np.nan if limit is None else limit, step))
    cols = [
        "case_drain_level_lpm",
        "case_drain_slope_lpm_per_h",
        "remaining_wear_h",
        "remaining_wear_h_low",
        "remaining_wear_h_high",
        "n_wear_readings",
        "n_wear_readings_off",
        "wear_range_short",
        "case_drain_limit_lpm",
        "case_drain_step",
    ]
    return pd.DataFrame(rows, columns=cols, index=inputs.index)


@pytest.mark.parametrize("min_readings", [3, 6])
def test_batched_wear_trends_equal_one_at_a_time(demo_store, min_readings):
    engine = db.make_engine(demo_store.db_url)
    t = fleet.as_of_instant(demo_store.as_of)
    params = fleet.StatusParams(min_wear_readings=min_readings)
    with engine.connect() as conn:
        inputs = status_reads.status_inputs(conn, t, rate_window_h=500.0)
        readings = status_reads.readings_in_life(conn, t)
    engine.dispose()
    # a step in one series and ties in another, so both branches are compared
    readings = readings.copy()
    first = readings["component_id"].value_counts().index[0]  # the longest series
    last_of_first = readings.index[readings["component_id"] == first][-1]
    readings.loc[last_of_first, "case_drain_lpm"] *= 3.0
    second = readings.index[readings["component_id"] != first][:4]
    readings.loc[second, "hour_meter"] = readings.loc[second[0], "hour_meter"]
    # readings far from the test conditions (cold oil, low test pressure) in a third series
    third = readings.index[~readings["component_id"].isin(readings.loc[second, "component_id"])]
    third = third[readings.loc[third, "component_id"] != first][:3]
    readings.loc[third[:2], "oil_temp_c"] = -10.0
    readings.loc[third[2], "test_pressure_bar"] = 5.0
    got = fleet.wear_frame(inputs, readings, params)
    want = _wear_one_at_a_time(inputs, readings, params)
    assert got["case_drain_step"].any() and got["remaining_wear_h"].notna().any()
    assert got["n_wear_readings_off"].sum() >= 3 and got["wear_range_short"].dtype == bool
    pd.testing.assert_frame_equal(got[want.columns], want, check_dtype=False, rtol=0, atol=0)


def test_recompute_keeps_the_schema_and_rolls_back_whole(sqlite_url):
    from alembic import command

    engine = usecases.init_db(sqlite_url)
    usecases.import_registry(engine, (DATA / "fleet.yaml").read_text(), "fleet.yaml")
    for name, data in _sample_files():
        usecases.upload(engine, data, name)
    with engine.connect() as conn:
        before = _stored_ledger(conn)
    with pytest.raises(RuntimeError, match="stop"), db.transaction(engine) as conn:
        ledger_rows.recompute(
            conn, batch_metrics.batch_metrics
        )  # SQLite: the ledger table is dropped and built again
        raise RuntimeError("stop")
    with engine.connect() as conn:
        pd.testing.assert_frame_equal(_stored_ledger(conn), before)
    usecases.recompute(engine)
    command.check(db.alembic_config(sqlite_url))  # same tables and indexes as before
    engine.dispose()


def test_batch_hashes_equal_one_at_a_time_on_mixed_shapes():
    """Hashes of a whole parsed batch (plain histograms of several band counts and
    pressure-by-speed matrices, laid out once) are the digests of one record at a time."""
    import sys

    sys.path.insert(0, str(Path(__file__).parent))
    from benchmarks.bench_ingest import make_csv  # seeded invented fleet, 30 % matrices

    parsed = parse_file(make_csv(6000, speed_fraction=0.3), "mixed.csv")
    assert parsed.ok and len(set(parsed.batch.n_pressure.tolist())) > 3
    assert (parsed.batch.n_speed > 0).any() and (parsed.batch.n_speed == 0).any()
    want = [reference_paths.histogram_sha(h) for h in parsed.histograms]
    assert checks.batch_shas(parsed.batch) == want
    rows = np.arange(len(want))[::-3]
    assert checks.batch_shas(parsed.batch.take(rows)) == [want[i] for i in rows]


def test_ingest_stores_what_the_records_say(sqlite_url):
    """Every stored histogram row equals its parsed record packed one at a time: bands,
    hours, total, mean speed, period and content hash; one upload per unit and period."""
    engine = usecases.init_db(sqlite_url)
    usecases.import_registry(engine, (DATA / "fleet.yaml").read_text(), "fleet.yaml")
    later = BOTH_QUANTITIES.replace("04-02", "04-06").replace("04-01", "04-05")
    files = [*_sample_files(), ("later.csv", later.replace(",900,906,", ",910,916,").encode())]
    records = []
    for name, data in files:
        res = usecases.upload(engine, data, name)
        assert res.status == usecases.ACCEPTED
        if not res.skipped:  # upload.json repeats stored histograms
            records += parse_file(data, name).histograms
    u = db.upload
    with engine.connect() as conn:
        rows = reference_paths.stored_histogram_rows(conn)
        unit_of = dict(conn.execute(select(u.c.id, u.c.unit_id)).all())
    assert len(rows) == len(records)
    by_sha = {r["content_sha256"]: {**r, "unit_id": unit_of[r["upload_id"]]} for r in rows}
    assert len(by_sha) == len(rows)
    for h in records:
        r = by_sha[reference_paths.histogram_sha(h)]
        speed = None
        if h.speed_low_rpm is not None:
            speed = db.pack(np.r_[h.speed_low_rpm, h.speed_high_rpm])
        assert r["pressure_bands"] == db.pack(np.r_[h.pressure_low_bar, h.pressure_high_bar])
        assert (r["speed_bands"], r["hours"]) == (speed, db.pack(h.hours))
        assert r["total_hours"] == float(np.sum(np.asarray(h.hours).reshape(1, -1), axis=1)[0])
        assert r["mean_speed_rpm"] == h.mean_speed_rpm and r["quantity"] == h.quantity
        assert r["period_start"] == h.period_start and r["period_end"] == h.period_end
    uploads = {(r["upload_id"], r["unit_id"]) for r in by_sha.values()}
    assert len(uploads) == len({r["upload_id"] for r in rows})
    engine.dispose()


def test_readings_matrix_with_and_without_nulls(sqlite_url):
    # The fast path (no NULL) and the fallback (a NULL test condition) give np.array's floats.
    from sqlalchemy import text

    rows = [(1, 10.0, 1.5, 250.0, 50.0), (2, 11.0, 1.25, 240.0, 45.5)]
    q = text("SELECT a, b, c, d, e FROM t ORDER BY a")
    engine = db.make_engine(sqlite_url)
    with engine.begin() as conn:
        conn.exec_driver_sql("CREATE TABLE t (a INTEGER, b REAL, c REAL, d REAL, e REAL)")
        assert status_reads._float_matrix(conn, q, 5).shape == (0, 5)
        conn.exec_driver_sql("INSERT INTO t VALUES (?, ?, ?, ?, ?)", rows)
        got = status_reads._float_matrix(conn, q, 5)
        np.testing.assert_array_equal(got, np.array(rows, dtype=float))
        conn.exec_driver_sql("INSERT INTO t VALUES (3, 12.0, 1.75, NULL, NULL)")
        got = status_reads._float_matrix(conn, q, 5)
    rows.append((3, 12.0, 1.75, None, None))
    np.testing.assert_array_equal(got[:, :3], np.array([r[:3] for r in rows], dtype=float))
    assert np.isnan(got[2, 3:]).all() and got.shape == (3, 5)
    engine.dispose()


def test_status_reads_are_index_seeks_without_sorts(sqlite_url):
    # SQLite's plan of each status read: ledger points and last rebuilds by index seeks
    # (no temporary sort per component, no scan of the events), readings from the
    # covering index alone.
    from sqlalchemy import event

    engine = usecases.init_db(sqlite_url)
    seen: list[tuple] = []
    event.listen(engine, "before_cursor_execute", lambda *a: seen.append((a[2], a[3])))
    t = fleet.as_of_instant(date(2026, 6, 1))
    with engine.connect() as conn:
        status_reads.ledger_points(conn, t, rate_window_h=500.0)
        status_reads.readings_in_life(conn, t)
        plans = [
            [r[3] for r in conn.exec_driver_sql("EXPLAIN QUERY PLAN " + sql, params).all()]
            for sql, params in list(seen)
        ]
    engine.dispose()
    points, reads = plans
    assert not any("TEMP B-TREE" in p for p in points), points
    assert not any(p.startswith("SCAN") for p in points if "component" not in p), points
    assert any("ix_service_event_component_kind_at" in p for p in points), points
    assert any("COVERING INDEX ix_reading_component_wear" in p for p in reads), reads
