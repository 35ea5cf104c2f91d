"""Ingest against the store: the rules that need the stored history, on SQLite and PostgreSQL.

Every rejection asserts the message and that the database is exactly as it was
(row counts and the content of every table).
"""

from __future__ import annotations

from pathlib import Path

import pytest
from sqlalchemy import select

from monitor import usecases
from monitor.store import db, queries
from tests import reference_paths

DATA = Path(__file__).parent / "data"
HEADER = (
    "unit,position,period_start,period_end,hour_meter_start,hour_meter_end,quantity,"
    "pressure_low_bar,pressure_high_bar,hours\n"
)


def day_csv(
    unit: str,
    position: str,
    day: int,
    hm0: float,
    hm1: float,
    bands=((0, 100), (100, 200), (200, 300)),
    split=(0.5, 0.3, 0.2),
) -> bytes:
    """One daily 1-D histogram of an invented unit as histogram-CSV bytes."""
    start, end = f"2026-04-{day:02d}T00:00:00Z", f"2026-04-{day + 1:02d}T00:00:00Z"
    total = hm1 - hm0
    rows = [
        f"{unit},{position},{start},{end},{hm0},{hm1},pressure,{lo},{hi},{total * f:.6f}\n"
        for (lo, hi), f in zip(bands, split, strict=True)
    ]
    return (HEADER + "".join(rows)).encode()


def snapshot(engine) -> dict:
    """Every row of every table, for an exact before/after comparison."""
    out = {}
    with engine.connect() as conn:
        for name, table in db.metadata.tables.items():
            out[name] = sorted(map(tuple, conn.execute(select(table)).all()), key=repr)
    return out


@pytest.fixture
def engine(db_url):
    eng = usecases.init_db(db_url)
    usecases.import_registry(eng, (DATA / "fleet.yaml").read_bytes(), "fleet.yaml")
    yield eng
    eng.dispose()


def assert_rejected_unchanged(engine, data: bytes, name: str, *fragments: str):
    before = snapshot(engine)
    res = usecases.upload(engine, data, name)
    assert res.status == usecases.REJECTED, res
    text = " | ".join(str(p) for p in res.problems)
    for frag in fragments:
        assert frag in text, text
    assert snapshot(engine) == before
    return res


def test_good_files_are_stored_with_ledger_rows(engine):
    for name in ("hist_pressure.csv", "hist_pressure_speed.csv", "readings.csv"):
        res = usecases.upload(engine, (DATA / name).read_bytes(), name)
        assert res.status == usecases.ACCEPTED, res.problems
    with engine.connect() as conn:
        counts = queries.table_counts(conn)
    assert counts["histogram"] == 4 and counts["reading"] == 3
    assert counts["ledger"] == 4  # one per upload and component
    assert counts["upload_file"] == 3


def test_same_file_twice_counts_once(engine):
    data = (DATA / "hist_pressure.csv").read_bytes()
    assert usecases.upload(engine, data, "hist_pressure.csv").status == usecases.ACCEPTED
    before = snapshot(engine)
    again = usecases.upload(engine, data, "renamed-copy.csv")
    assert again.status == usecases.DUPLICATE
    assert snapshot(engine) == before


def test_unknown_unit_is_rejected_with_a_hint(engine):
    assert_rejected_unchanged(
        engine,
        day_csv("ZZ-999", "left", 1, 10, 14),
        "x.csv",
        "ZZ-999",
        "not in the fleet registry",
        "fleet import",
    )


def test_unknown_position_names_the_registered_ones(engine):
    assert_rejected_unchanged(
        engine, day_csv("LR-101", "middle", 1, 10, 14), "x.csv", "middle", "left, right"
    )


def test_overlap_with_stored_upload_of_different_content_names_it(engine):
    first = day_csv("LR-101", "left", 1, 5000, 5008)
    assert usecases.upload(engine, first, "day1.csv").status == usecases.ACCEPTED
    changed = day_csv("LR-101", "left", 1, 5000, 5008, split=(0.2, 0.3, 0.5))
    assert_rejected_unchanged(
        engine, changed, "day1-again.csv", "overlaps stored upload", "day1.csv"
    )


def test_identical_histogram_in_another_file_is_skipped_not_counted_twice(engine):
    day1 = day_csv("LR-101", "left", 1, 5000, 5008)
    day2 = day_csv("LR-101", "left", 2, 5008, 5015)
    assert usecases.upload(engine, day1, "day1.csv").status == usecases.ACCEPTED
    both = day1 + day2[len(HEADER) :]
    res = usecases.upload(engine, both, "days1-2.csv")
    assert res.status == usecases.ACCEPTED and res.skipped == 1 and res.histograms == 1
    with engine.connect() as conn:
        assert queries.table_counts(conn)["ledger"] == 2


def shifted_csv(unit: str, position: str, start: str, end: str, hm0: float, hm1: float) -> bytes:
    """One 1-D histogram of an invented unit over any period, all hours in one band."""
    row = f"{unit},{position},{start},{end},{hm0},{hm1},pressure,0,100,{hm1 - hm0:.6f}\n"
    return (HEADER + row).encode()


@pytest.mark.parametrize(
    ("start", "end", "hm", "status"),
    [
        # starts exactly where the last stored period ends: no overlap
        ("2026-04-05T00:00:00Z", "2026-04-06T00:00:00Z", (5015, 5020), usecases.ACCEPTED),
        # starts before the last stored period ends and runs past it
        ("2026-04-04T12:00:00Z", "2026-04-05T12:00:00Z", (5015, 5020), usecases.REJECTED),
        # inside the first stored day, ends before the last stored one starts
        ("2026-04-03T06:00:00Z", "2026-04-03T12:00:00Z", (5009, 5010), usecases.REJECTED),
        # before everything stored
        ("2026-04-01T00:00:00Z", "2026-04-02T00:00:00Z", (4990, 4995), usecases.ACCEPTED),
    ],
)
def test_overlap_against_the_last_stored_period(engine, start, end, hm, status):
    for day, hm0, hm1 in ((3, 5000, 5008), (4, 5008, 5015)):
        ok = usecases.upload(engine, day_csv("LR-101", "left", day, hm0, hm1), f"d{day}.csv")
        assert ok.status == usecases.ACCEPTED
    data = shifted_csv("LR-101", "left", start, end, *hm)
    if status == usecases.REJECTED:
        assert_rejected_unchanged(engine, data, "x.csv", "overlaps stored upload")
    else:
        assert usecases.upload(engine, data, "x.csv").status == usecases.ACCEPTED


def test_other_loop_of_a_stored_period_in_a_later_file(engine):
    # Both loops of one unit share its hour meter. The right loop's day, sent after the
    # left loop's day was stored, is one more upload of the same period and meter
    # readings, not the meter running backwards (5015 h, then 5008 h).
    for pos in ("left", "right"):
        res = usecases.upload(engine, day_csv("LR-101", pos, 4, 5008, 5015), f"{pos}.csv")
        assert res.status == usecases.ACCEPTED, [str(p) for p in res.problems]


def test_other_loop_of_a_stored_period_with_other_meter_readings_is_refused(engine):
    assert usecases.upload(engine, day_csv("LR-101", "left", 4, 5008, 5015), "l.csv").status == (
        usecases.ACCEPTED
    )
    assert_rejected_unchanged(
        engine,
        day_csv("LR-101", "right", 4, 5009, 5016),
        "r.csv",
        "same period",
        "5008-5015 h",
        "5009-5016 h",
        "must match",
    )


def test_hour_meter_running_backwards_against_stored_history(engine):
    assert (
        usecases.upload(engine, day_csv("LR-101", "left", 5, 5000, 5008), "d5.csv").status
        == usecases.ACCEPTED
    )
    later_but_lower = day_csv("LR-101", "left", 6, 4990, 4998)
    assert_rejected_unchanged(
        engine, later_but_lower, "d6.csv", "hour meter runs backwards", "hour_meter_change"
    )


@pytest.mark.parametrize(("early_end", "status"), [(4990, "accepted"), (5005, "rejected")])
def test_hour_meters_of_a_file_around_the_stored_history(engine, early_end, status):
    # stored: day 5 (5000-5008 h); the file: day 3 before it and day 7 after it. A day 3
    # that ends at 5005 h is followed by the stored day 5 starting at 5000 h.
    first = usecases.upload(engine, day_csv("LR-101", "left", 5, 5000, 5008), "d5.csv")
    assert first.status == usecases.ACCEPTED
    both = day_csv("LR-101", "left", 3, early_end - 8, early_end)
    both += day_csv("LR-101", "left", 7, 5010, 5018)[len(HEADER) :]
    if status == "rejected":
        res = assert_rejected_unchanged(engine, both, "d3-d7.csv", "5005 h at")
        assert [p.line for p in res.problems] == [None]  # the stored upload runs backwards
    else:
        assert usecases.upload(engine, both, "d3-d7.csv").status == usecases.ACCEPTED


def test_hour_meter_change_event_allows_a_reset(engine):
    # LR-102 has an hour_meter_change recorded on 2025-11-03 (tests/data/fleet.yaml)
    def nov(day, hm0, hm1):
        text = day_csv("LR-102", "left", day, hm0, hm1).decode()
        return text.replace("2026-04-", "2025-11-").encode()

    assert usecases.upload(engine, nov(1, 2200, 2208), "before.csv").status == usecases.ACCEPTED
    res = usecases.upload(engine, nov(4, 10, 18), "after.csv")
    assert res.status == usecases.ACCEPTED, res.problems


def test_dry_run_validates_and_stores_nothing(engine):
    before = snapshot(engine)
    res = usecases.upload(engine, (DATA / "hist_pressure.csv").read_bytes(), "h.csv", dry_run=True)
    assert res.status == usecases.VALID and res.histograms == 3
    assert snapshot(engine) == before


@pytest.mark.parametrize("bad", sorted(p.name for p in DATA.glob("bad_*")))
def test_every_broken_sample_is_rejected_and_changes_nothing(engine, bad):
    res = assert_rejected_unchanged(engine, (DATA / bad).read_bytes(), bad)
    assert all(p.message for p in res.problems)


def test_csv_semicolon_and_json_store_identical_histograms(tmp_path):
    blobs = []
    for i, name in enumerate(("hist_pressure.csv", "hist_pressure_semicolon.csv")):
        eng = usecases.init_db(f"sqlite:///{tmp_path / f'{i}.db'}")
        usecases.import_registry(eng, (DATA / "fleet.yaml").read_bytes(), "fleet.yaml")
        assert usecases.upload(eng, (DATA / name).read_bytes(), name).status == "accepted"
        with eng.connect() as conn:
            rows = sorted(
                reference_paths.stored_histogram_rows(conn), key=lambda r: r["component_id"]
            )
            blobs.append([(r["pressure_bands"], r["hours"], r["content_sha256"]) for r in rows])
        eng.dispose()
    assert blobs[0] == blobs[1]


def test_registry_import_is_idempotent_and_bad_registry_changes_nothing(engine):
    before = snapshot(engine)
    counts = usecases.import_registry(engine, (DATA / "fleet.yaml").read_bytes(), "fleet.yaml")
    assert counts.created == 0 and counts.updated == 0
    assert snapshot(engine) == before
    bad = (DATA / "fleet.yaml").read_text().replace("rated_dp_bar: 400", "rated_dp_bar: -4")
    with pytest.raises(usecases.DomainError) as err:
        usecases.import_registry(engine, bad, "bad.yaml")
    assert any("rated_dp_bar" in str(p) for p in err.value.problems)
    assert snapshot(engine) == before
