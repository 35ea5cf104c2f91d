"""End to end: registry + CSV exports -> ingest -> ledger -> ``drivespan rank``.

An invented two-loop loader "PX-1" at the invented "Hollow Fen Yard" is given 60 days
of daily histograms and three case-drain readings per loop. Its remaining hours are
worked out below by hand from the design brief's life model v1 and compared with what
``drivespan rank --format json`` prints, on SQLite and on PostgreSQL.
"""

from __future__ import annotations

import json
import math
from datetime import UTC, date, datetime, timedelta

import pandas as pd
import pytest
from click.testing import CliRunner
from sqlalchemy import select

from monitor import cli, usecases
from monitor.store import db

AS_OF = "2026-03-02"
START = datetime(2026, 1, 1, tzinfo=UTC)
DAYS = 60

REGISTRY = """
oils:
  - name: fen-oil-46
    nu40_mm2s: 46
    nu100_mm2s: 6.7604
component_models:
  - name: KV-60
    kind: pump
    displacement_cm3: 60
    rated_dp_bar: 400
    rated_speed_rpm: 2000
    rated_l10_h: 4000
    life_exponent: 3
    low_side_bar: 0
    relief_bar: 450
    case_drain:
      test_dp_bar: 250
      test_temp_c: 40
      new_lpm: 1.3
      limit_factor: 2.0
      flushing_lpm: 0.2
sites:
  - name: Hollow Fen Yard
units:
  - tag: PX-1
    site: Hollow Fen Yard
    machine_type: wheel loader
    oil: fen-oil-46
    components:
      - {position: left, model: KV-60}
      - {position: right, model: KV-60}
"""

HIST_HEADER = (
    "unit,position,period_start,period_end,hour_meter_start,hour_meter_end,quantity,"
    "pressure_low_bar,pressure_high_bar,hours,mean_speed_rpm\n"
)
# left: 10 h/day at 190-210 bar; right: 9.8 h at 190-210 bar and 0.2 h at 430-470 bar
BANDS = {"left": [(190, 210, 10.0)], "right": [(190, 210, 9.8), (430, 470, 0.2)]}
READ_HEADER = "unit,position,taken_at,hour_meter,case_drain_lpm,test_pressure_bar,oil_temp_c\n"
# (day, hour meter, raw flow [L/min]); left at 250 bar / 40 degC, right at 200 bar / 60 degC
READINGS = {
    "left": [(10, 1100, 1.7), (30, 1300, 1.9), (50, 1500, 2.1)],
    "right": [(10, 1100, 1.2), (30, 1300, 1.22), (50, 1500, 1.24)],
}
CONDITIONS = {"left": (250, 40), "right": (200, 60)}


def _iso(t: datetime) -> str:
    return t.strftime("%Y-%m-%dT%H:%M:%SZ")


def hist_csv(days: range, bands: dict = BANDS, unit: str = "PX-1") -> bytes:
    """Daily histograms (midnight to midnight, 10 h on the meter per day)."""
    lines = [HIST_HEADER]
    for k in days:
        t0, t1 = START + timedelta(days=k), START + timedelta(days=k + 1)
        for pos, rows in bands.items():
            for lo, hi, h in rows:
                lines.append(
                    f"{unit},{pos},{_iso(t0)},{_iso(t1)},{1000 + 10 * k},"
                    f"{1000 + 10 * (k + 1)},pressure,{lo},{hi},{h},2000\n"
                )
    return "".join(lines).encode()


def readings_csv(readings: dict = READINGS, unit: str = "PX-1") -> bytes:
    lines = [READ_HEADER]
    for pos, rows in readings.items():
        dp, temp = CONDITIONS[pos]
        for day, hm, q in rows:
            lines.append(f"{unit},{pos},{_iso(START + timedelta(days=day))},{hm},{q},{dp},{temp}\n")
    return "".join(lines).encode()


def build(url: str, files: list[tuple[str, bytes]]) -> None:
    engine = usecases.init_db(url)
    usecases.import_registry(engine, REGISTRY, "px.yaml")
    for name, data in files:
        res = usecases.upload(engine, data, name)
        assert res.status in (usecases.ACCEPTED, usecases.DUPLICATE), [str(p) for p in res.problems]
    engine.dispose()


def standard_files() -> list[tuple[str, bytes]]:
    return [
        ("jan.csv", hist_csv(range(0, 31))),
        ("feb.csv", hist_csv(range(31, DAYS))),
        ("checks.csv", readings_csv()),
    ]


def rank_json(url: str, *args: str) -> list[dict]:
    res = CliRunner().invoke(
        cli.main, ["rank", "--as-of", AS_OF, "--format", "json", "--db", url, *args]
    )
    assert res.exit_code == 0, res.output
    return json.loads(res.stdout)


# --- the hand calculation (design brief, "Life model v1") ---------------------------
# Band life L_i = L_R (dp_R / dp_i)^p (n_R / n_i), p_L = 0 so dp_i = band midpoint:
L200 = 4000 * (400 / 200) ** 3 * (2000 / 2000)  # = 32 000 h
L450 = 4000 * (400 / 450) ** 3  # = 2 809.33 h
D_LEFT = 10 / L200  # damage per day, left: 3.125e-4
D_RIGHT = 9.8 / L200 + 0.2 / L450  # right: 3.0625e-4 + 7.119e-5 = 3.7744e-4
# 60 uploads ending at or before 2026-03-02 00:00 count; no rebuild.
CONSUMED_LEFT = 60 * D_LEFT  # 0.01875
CONSUMED_RIGHT = 60 * D_RIGHT  # 0.022647
# Rate window 500 h = the last 50 daily uploads of 10 h each.
RATE_LEFT = 50 * D_LEFT / 500  # 3.125e-5 /h
RATE_RIGHT = 50 * D_RIGHT / 500  # 3.7744e-5 /h
BEARING_LEFT = (1 - CONSUMED_LEFT) / RATE_LEFT  # 31 400 h
BEARING_RIGHT = (1 - CONSUMED_RIGHT) / RATE_RIGHT  # about 25 894 h
# Case drain, Q* = (Q - 0.2) (250 / dp_t) (nu(T) / nu(40 degC)).
# Left at reference conditions: Q* = 1.5, 1.7, 1.9 at 1100, 1300, 1500 h: every pairwise
# slope is 0.2 / 200 = 0.001 L/min/h; level at 1600 h = 1.5 + 0.001 * 500 = 2.0 L/min.
LIMIT = 2.0 * 1.3  # limit_factor * new_lpm = 2.6 L/min
WEAR_LEFT = (LIMIT - 2.0) / 0.001  # 600 h
# Right at 200 bar, 60 degC. The oil line runs through (40 degC, 46) and (100 degC,
# 6.7604 mm2/s): nu60 = 20.562 mm2/s (ASTM D341-20, Walther equation, computed
# +-0.5 %; hence the 2e-3 tolerance). Factor k = 1.25 * 20.562 / 46.
K_RIGHT = 1.25 * 20.562 / 46
SLOPE_RIGHT = K_RIGHT * 0.02 / 200  # Q - 0.2 = 1.0, 1.02, 1.04
LEVEL_RIGHT = K_RIGHT * (1.0 + 0.0001 * 500)
WEAR_RIGHT = (LIMIT - LEVEL_RIGHT) / SLOPE_RIGHT  # about 36 000 h > bearing
# Utilisation: uploads ending in (2026-01-31, 2026-03-02]: 30 days x 10 h -> 10 h/day.
DUE_LEFT = date(2026, 3, 2) + timedelta(days=math.floor(WEAR_LEFT / 10))  # 2026-05-01
DUE_RIGHT = date(2026, 3, 2) + timedelta(days=math.floor(BEARING_RIGHT / 10))
# Relief (right): bands with midpoint >= 0.95 * 450 bar; 50 days x 0.2 h = 10 h in the
# window; no cut-off: heat = t * Q_stall * dp / 600 with Q_stall = 60 * 2000 / 1000 =
# 120 L/min and dp = 450 bar -> 90 kW -> 900 kWh; 10 / 500 = 2 % > 1 % -> heavy_relief.


def _by_position(rows: list[dict]) -> dict[str, dict]:
    return {r["position"]: r for r in rows}


def test_rank_matches_hand_calculation(db_url):
    build(db_url, standard_files())
    rows = rank_json(db_url)
    assert [r["position"] for r in rows] == ["left", "right"]  # 600 h before 25 894 h
    assert all(list(r) == list(cli_keys()) for r in rows)
    left, right = _by_position(rows)["left"], _by_position(rows)["right"]
    assert left["consumed_fraction"] == pytest.approx(CONSUMED_LEFT, rel=1e-6)
    assert left["damage_rate_per_h"] == pytest.approx(RATE_LEFT, rel=1e-6)
    assert left["remaining_bearing_h"] == pytest.approx(BEARING_LEFT, rel=1e-6)
    assert left["remaining_wear_h"] == pytest.approx(WEAR_LEFT, rel=1e-6)
    # three readings: the exact slope interval cannot reach 95 % (1 - 2/3! = 67 %,
    # Sen 1968), so no range is claimed and few_wear_readings is raised
    assert left["remaining_wear_h_low"] is None and left["remaining_wear_h_high"] is None
    assert left["remaining_h"] == pytest.approx(WEAR_LEFT, rel=1e-6)
    assert left["limiting"] == "wear"
    assert left["status"] == "plan ahead"  # 250 < 600 <= 1000 h
    assert left["due_date"] == DUE_LEFT.isoformat() == "2026-05-01"
    # no rebuild recorded and the first upload starts at 1000 h on the hour meter
    assert left["flags"] == ["few_wear_readings", "life_before_data_unknown"]
    assert right["consumed_fraction"] == pytest.approx(CONSUMED_RIGHT, rel=1e-6)
    assert right["remaining_bearing_h"] == pytest.approx(BEARING_RIGHT, rel=1e-6)
    assert right["remaining_wear_h"] == pytest.approx(WEAR_RIGHT, rel=2e-3)
    assert right["remaining_h"] == pytest.approx(BEARING_RIGHT, rel=1e-6)
    assert right["limiting"] == "bearing"
    assert right["due_date"] == DUE_RIGHT.isoformat()
    assert right["relief_hours"] == pytest.approx(10.0, rel=1e-9)
    assert right["relief_heat_kwh"] == pytest.approx(900.0, rel=1e-9)
    assert right["flags"] == ["heavy_relief", "few_wear_readings", "life_before_data_unknown"]
    for r in rows:
        assert r["hour_meter"] == pytest.approx(1600.0)
        assert r["hours_since_rebuild"] == pytest.approx(600.0)
        assert r["utilisation_h_per_day"] == pytest.approx(10.0)
        assert r["data_age_days"] == pytest.approx(0.0)
        assert r["last_upload_at"].startswith("2026-03-02T00:00:00")
        assert r["unit"] == "PX-1" and r["site"] == "Hollow Fen Yard"
        assert r["component_model"] == "KV-60"


def cli_keys() -> tuple[str, ...]:
    # the stable JSON keys of the README, written out rather than imported
    return (
        "unit",
        "site",
        "position",
        "component_model",
        "hour_meter",
        "hours_since_rebuild",
        "consumed_fraction",
        "damage_rate_per_h",
        "remaining_bearing_h",
        "remaining_wear_h",
        "remaining_wear_h_low",
        "remaining_wear_h_high",
        "remaining_h",
        "limiting",
        "utilisation_h_per_day",
        "due_date",
        "status",
        "relief_hours",
        "relief_heat_kwh",
        "last_upload_at",
        "data_age_days",
        "flags",
    )


def test_planning_reliability_divides_by_a1(sqlite_url):
    build(sqlite_url, standard_files())
    left = _by_position(rank_json(sqlite_url, "--reliability", "95"))["left"]
    a1 = 0.64  # ISO 281:2007 table of a1, printed value at 95 % (used as printed)
    closed = 0.95 * (math.log(100 / 95) / math.log(100 / 90)) ** (2 / 3) + 0.05
    assert closed == pytest.approx(a1, abs=0.005)  # the closed form rounds to it
    assert left["consumed_fraction"] == pytest.approx(CONSUMED_LEFT / a1, rel=1e-6)
    assert left["remaining_bearing_h"] == pytest.approx(
        (1 - CONSUMED_LEFT / a1) / (RATE_LEFT / a1), rel=1e-6
    )


def test_as_of_cuts_data_at_the_start_of_the_day(sqlite_url):
    build(sqlite_url, standard_files())
    # as of 2026-02-01: uploads ending up to 2026-02-01 00:00 count -> 31 days, 310 h
    left = _by_position(rank_json(sqlite_url, "--as-of", "2026-02-01"))["left"]
    assert left["hour_meter"] == pytest.approx(1310.0)
    assert left["consumed_fraction"] == pytest.approx(31 * D_LEFT, rel=1e-6)
    # readings before 2026-02-01: days 10 and 30 only -> two readings, no trend
    assert left["remaining_wear_h"] is None
    assert left["flags"] == ["few_wear_readings", "life_before_data_unknown"]  # from 1000 h


def _ledger(url: str) -> pd.DataFrame:
    engine = db.make_engine(url)
    t = db.ledger
    with engine.connect() as conn:
        df = pd.DataFrame(conn.execute(select(t)).mappings().all())
    engine.dispose()
    df = df.drop(columns=["id"]).sort_values(["component_id", "period_end"])
    return df.reset_index(drop=True)


def test_ledger_written_at_ingest_equals_recompute(sqlite_url):
    build(sqlite_url, list(reversed(standard_files())))
    before = _ledger(sqlite_url)
    assert len(before) == 2 * DAYS
    engine = db.make_engine(sqlite_url)
    assert usecases.recompute(engine) == 2 * DAYS
    engine.dispose()
    pd.testing.assert_frame_equal(before, _ledger(sqlite_url), rtol=1e-12)


def test_order_and_duplicates_do_not_change_the_ranking(tmp_path):
    a, b = (f"sqlite:///{tmp_path / n}" for n in ("a.db", "b.db"))
    build(a, standard_files())
    files = list(reversed(standard_files()))
    # the same file twice, and a new file repeating five stored days with equal content
    files += [("feb.csv", hist_csv(range(31, DAYS))), ("late.csv", hist_csv(range(55, DAYS)))]
    build(b, files)
    assert rank_json(a) == rank_json(b)
    engine = db.make_engine(b)
    res = usecases.upload(engine, hist_csv(range(54, DAYS)), "late-again.csv")
    engine.dispose()
    # 6 stored days x 2 loops, all with equal content: accepted, nothing new written
    assert res.status == usecases.ACCEPTED and res.skipped == 12 and res.histograms == 0
    assert rank_json(a) == rank_json(b)


def test_rebuild_resets_consumed_fraction_and_wear_trend(sqlite_url):
    build(sqlite_url, standard_files())
    res = CliRunner().invoke(
        cli.main,
        [
            "service",
            "add",
            "PX-1",
            "--position",
            "left",
            "--kind",
            "rebuild",
            "--at",
            "2026-02-10T00:00:00Z",
            "--hour-meter",
            "1400",
            "--db",
            sqlite_url,
        ],
    )
    assert res.exit_code == 0, res.output
    rows = _by_position(rank_json(sqlite_url))
    left = rows["left"]
    # uploads ending after 2026-02-10 00:00: days 40..59 -> 20 uploads, 200 h
    assert left["hours_since_rebuild"] == pytest.approx(200.0)
    assert left["consumed_fraction"] == pytest.approx(20 * D_LEFT, rel=1e-6)
    # fewer hours than the window: rate over all 20 uploads = 1 / 32 000 per h
    assert left["remaining_bearing_h"] == pytest.approx((1 - 20 * D_LEFT) * L200, rel=1e-6)
    # one reading (day 50) since the rebuild: no trend, flagged
    assert left["remaining_wear_h"] is None and left["limiting"] == "bearing"
    assert left["flags"] == ["few_wear_readings"]
    # the other loop is untouched
    assert rows["right"]["consumed_fraction"] == pytest.approx(CONSUMED_RIGHT, rel=1e-6)
    engine = db.make_engine(sqlite_url)
    rep = usecases.unit_report(engine, "PX-1", date(2026, 3, 2))
    engine.dispose()
    cd = rep.components["left"].case_drain
    assert cd["used"].tolist() == [False, False, True]
    assert rep.components["left"].trend is None
    assert rep.service_history["kind"].tolist() == ["rebuild"]


def test_unit_report_details(sqlite_url):
    build(sqlite_url, standard_files())
    engine = db.make_engine(sqlite_url)
    rep = usecases.unit_report(engine, "PX-1", date(2026, 3, 2))
    engine.dispose()
    assert rep.unit == {
        "tag": "PX-1",
        "site": "Hollow Fen Yard",
        "machine_type": "wheel loader",
        "oil": "fen-oil-46",
    }
    right = rep.components["right"]
    # spectrum over the 500 h window: 50 days x 9.8 h and x 0.2 h
    assert right.spectrum["hours"].tolist() == pytest.approx([490.0, 10.0])
    assert right.life["consumed_fraction"].iloc[-1] == pytest.approx(CONSUMED_RIGHT, rel=1e-9)
    assert right.projection["hour_meter"].iloc[-1] == pytest.approx(1600 + BEARING_RIGHT)
    left = rep.components["left"]
    assert left.trend.slope == pytest.approx(0.001, rel=1e-9)
    assert left.case_drain["normalised_lpm"].tolist() == pytest.approx([1.5, 1.7, 1.9])
    assert right.relief_monthly["relief_hours"].sum() == pytest.approx(60 * 0.2)
    assert len(rep.uploads) == 20 and rep.uploads["file"].iloc[0] == "feb.csv"
    assert any("limited by case-drain wear" in s for s in rep.summary)
    assert any("estimates" in s and "dangerous" in s for s in rep.summary)
