"""Issue 12, oil side: the assumptions that move the bearing answer, each against a value
worked by hand here from the published formula.

Sources: ISO 281:2007 (rated viscosity nu1, clause 6.3.3; aISO for radial roller bearings,
clause 6.3.2, Eqs. (6)-(9); eC guide values, from memory); ASTM D341-20 (the viscosity
line ``log10(log10(nu + 0.7)) = A - B log10(T)``). All names and values are invented.
"""

from __future__ import annotations

import math
from datetime import date

import pytest
from sqlalchemy import select

from monitor import usecases
from monitor.store import db

# An invented fleet: one roller-bearing pump (dp_R 400 bar, n_R 2000 rpm, L10 4000 h, no
# charge pressure), an oil given by two points, one unit with one drive.
REGISTRY = """
oils:
  - {{name: test-oil, nu40_mm2s: 46, nu100_mm2s: 6.76{oil_level}}}
component_models:
  - name: OT-60
    kind: pump
    displacement_cm3: 60
    rated_dp_bar: 400
    rated_speed_rpm: 2000
    rated_l10_h: 4000
    relief_bar: 450
    bearing: {{type: roller, pitch_diameter_mm: 50, dynamic_load_kn: 100,
               fatigue_limit_kn: 10, load_at_rated_kn: 20}}
{model_extra}
sites:
  - {{name: Fernhollow Pit{site_level}}}
units:
  - tag: FH-1
    site: Fernhollow Pit
    machine_type: wheel loader
    oil: test-oil
{unit_extra}
    components:
      - {{position: drive, model: OT-60{comp_extra}}}
"""

HEADER = (
    "unit,position,period_start,period_end,hour_meter_start,hour_meter_end,quantity,"
    "pressure_low_bar,pressure_high_bar,hours,mean_speed_rpm{temp_col}\n"
)


def registry(**kw: str) -> str:
    keys = ("oil_level", "model_extra", "site_level", "unit_extra", "comp_extra")
    return REGISTRY.format(**{k: kw.get(k, "") for k in keys})


def day_rows(day: int, meter0: float, *, lo=390, hi=410, speed=2000, temp=None, unit="c") -> str:
    """One day's upload: one band ``lo``-``hi`` bar for 10 h at ``speed`` rpm."""
    start, end = f"2026-03-{day:02d}T00:00:00Z", f"2026-03-{day + 1:02d}T00:00:00Z"
    row = f"FH-1,drive,{start},{end},{meter0},{meter0 + 10},pressure,{lo},{hi},10,{speed}"
    return row + ("" if temp is None else f",{temp}") + "\n"


def csv(rows: list[str], temp_unit: str | None = None) -> bytes:
    col = "" if temp_unit is None else f",oil_temp_{temp_unit}"
    return (HEADER.format(temp_col=col) + "".join(rows)).encode()


def store(url: str, reg: str, files: list[bytes]):  # noqa: ANN201
    engine = usecases.init_db(url)
    usecases.import_registry(engine, reg, "fleet.yaml")
    for i, data in enumerate(files):
        res = usecases.upload(engine, data, f"f{i}.csv")
        assert res.status == "accepted", res.problems
    return engine


def ledger(engine) -> list[dict]:  # noqa: ANN001
    t = db.ledger
    cols = [t.c.damage, t.c.oil_temp_c, t.c.oil_factor_source, t.c.kappa_floor_hours]
    with engine.connect() as conn:
        return [dict(r) for r in conn.execute(select(*cols).order_by(t.c.period_end)).mappings()]


# --- hand calculation from the published formulas -----------------------------------------


def d341_viscosity(temp_c: float) -> float:
    """ASTM D341-20: the line through (40 degC, 46) and (100 degC, 6.76 mm2/s)."""
    w = [math.log10(math.log10(nu + 0.7)) for nu in (46.0, 6.76)]
    t = [math.log10(tc + 273.15) for tc in (40.0, 100.0)]
    b = (w[0] - w[1]) / (t[1] - t[0])
    a = w[0] + b * t[0]
    return 10 ** (10 ** (a - b * math.log10(temp_c + 273.15))) - 0.7


def nu1(n_rpm: float, dm: float = 50.0) -> float:
    """ISO 281:2007 rated viscosity [mm2/s]: n < 1000 and n >= 1000 rpm forms."""
    if n_rpm < 1000:
        return 45000 * n_rpm**-0.83 * dm**-0.5
    return 4500 * n_rpm**-0.5 * dm**-0.5


def aiso_roller(kappa: float, x: float) -> float:
    """ISO 281:2007 aISO, radial roller bearings, Eqs. (6)-(9)."""
    k, e = (1.3993, 0.054381) if kappa < 0.4 else (1.2348, 0.19087 if kappa < 1 else 0.071739)
    return 0.1 * (1 - max(1.5859 - k / kappa**e, 0.0) * x**0.4) ** -9.185


EC_NORMAL = 0.55  # ISO 281:2007 guide, normal cleanliness, dm < 100 mm: 0.5-0.6, middle
X_REF = EC_NORMAL * 10 / 20  # eC Cu / P at the rated point


def a_oil(temp_c: float, n_rpm: float = 2000, ec: float = EC_NORMAL) -> float:
    kappa = min(d341_viscosity(temp_c) / nu1(n_rpm), 4.0)
    return aiso_roller(kappa, ec * 10 / 20) / aiso_roller(1.0, X_REF)


AS_OF = date(2026, 5, 1)


# --- 1. operating oil temperature ------------------------------------------------------------


def test_upload_oil_temperature_sets_the_oil_factor(sqlite_url):
    # 60 degC given as 140 degF (the conversion is exact); band at the rated point, 10 h
    engine = store(sqlite_url, registry(), [csv([day_rows(1, 100, temp=140)], "f")])
    (row,) = ledger(engine)
    assert row["oil_temp_c"] == pytest.approx(60.0)
    assert row["oil_factor_source"] == "upload"
    want = 10 / (4000 * a_oil(60.0))  # L = L_R at the rated point, divided by a_oil
    assert row["damage"] == pytest.approx(want, rel=1e-9)
    assert a_oil(60.0) > 1  # kappa about 1.45: better than the reference kappa = 1


@pytest.mark.parametrize(
    ("extra", "source", "temp"),
    [
        ({"model_extra": "    operating_temp_c: 80"}, "model", 80.0),
        ({"model_extra": "    operating_temp_c: 80", "unit_extra": "    operating_temp_c: 70"},
         "unit", 70.0),
        ({"unit_extra": "    operating_temp_c: 70", "comp_extra": ", operating_temp_c: 65"},
         "unit", 65.0),
    ],
)  # fmt: skip
def test_registry_operating_temperature_when_the_upload_gives_none(sqlite_url, extra, source, temp):
    engine = store(sqlite_url, registry(**extra), [csv([day_rows(1, 100)])])
    (row,) = ledger(engine)
    assert (row["oil_factor_source"], row["oil_temp_c"]) == (source, temp)
    assert row["damage"] == pytest.approx(10 / (4000 * a_oil(temp)), rel=1e-9)


def test_upload_temperature_wins_over_the_registry(sqlite_url):
    reg = registry(model_extra="    operating_temp_c: 80")
    engine = store(sqlite_url, reg, [csv([day_rows(1, 100, temp=55)], "c")])
    (row,) = ledger(engine)
    assert (row["oil_factor_source"], row["oil_temp_c"]) == ("upload", 55.0)


def test_no_temperature_means_no_oil_factor_and_a_flag(sqlite_url):
    engine = store(sqlite_url, registry(), [csv([day_rows(1, 100)])])
    (row,) = ledger(engine)
    assert row["oil_factor_source"] == "none" and row["oil_temp_c"] is None
    assert row["damage"] == pytest.approx(10 / 4000, rel=1e-12)  # a_oil = 1
    status = usecases.fleet_status(engine, AS_OF)
    assert "oil_factor_not_applied" in status["flags"].iloc[0]
    rep = usecases.unit_report(engine, "FH-1", AS_OF)
    assert rep.assumptions["oil_factor_source"].tolist() == ["none"]
    assert any("oil factor not applied" in line for line in rep.summary)


def test_case_drain_test_temperature_is_never_used(sqlite_url):
    reg = registry(model_extra="    case_drain: {test_dp_bar: 250, test_temp_c: 50, new_lpm: 1.5, "
                   "limit_factor: 2}")  # fmt: skip
    engine = store(sqlite_url, reg, [csv([day_rows(1, 100)])])
    assert ledger(engine)[0]["oil_factor_source"] == "none"


def test_oil_temperature_outside_the_oils_range_is_refused(sqlite_url):
    engine = store(sqlite_url, registry(), [])
    # -25 degC is within the plausible -30..150 degC but this oil would be far above
    # 1000 mm2/s there (ASTM D341 line: about 5 000 mm2/s)
    assert d341_viscosity(-25.0) > 1000
    res = usecases.upload(engine, csv([day_rows(1, 100, temp=-25)], "c"), "cold.csv")
    assert res.status == "rejected"
    (p,) = res.problems
    assert "oil test-oil would be" in p.message and "between" in p.message
    with engine.connect() as conn:
        assert conn.execute(select(db.upload.c.id)).first() is None  # nothing stored


# --- 2. band pressure rule -------------------------------------------------------------------


def test_band_rule_upper_edge_against_hand_value(sqlite_url):
    # band 300-400 bar, no charge pressure: midpoint 350 bar, upper edge 400 bar; no oil
    # factor. Damage ratio (400 / 350)^(10/3) (ISO 281 life ~ P^-p, p = 10/3 default)
    rows = [day_rows(1, 100, lo=300, hi=400)]
    engine = store(sqlite_url, registry(), [csv(rows)])
    mid = ledger(engine)[0]["damage"]
    assert mid == pytest.approx(10 / (4000 * (400 / 350) ** (10 / 3)), rel=1e-9)
    usecases.save_settings(engine, {"band_pressure": "upper"})
    assert usecases.ledger_stale(engine)
    usecases.recompute(engine)
    assert not usecases.ledger_stale(engine)
    assert ledger(engine)[0]["damage"] / mid == pytest.approx((400 / 350) ** (10 / 3), rel=1e-9)


def test_recompute_after_changing_the_rule_equals_ingest_with_it(tmp_path):
    reg = registry(model_extra="    operating_temp_c: 60")
    files = [
        csv([day_rows(d, 100 + 10 * d, lo=200 + 10 * d, hi=300 + 10 * d) for d in range(1, 8)]),
        csv([day_rows(d, 100 + 10 * d, temp=50 + d) for d in range(9, 14)], "c"),
    ]
    changed = store(f"sqlite:///{tmp_path / 'a.db'}", reg, files)
    usecases.save_settings(changed, {"band_pressure": "upper"})
    usecases.recompute(changed)
    fresh = usecases.init_db(f"sqlite:///{tmp_path / 'b.db'}")
    usecases.save_settings(fresh, {"band_pressure": "upper"})
    usecases.import_registry(fresh, reg, "fleet.yaml")
    for i, data in enumerate(files):
        assert usecases.upload(fresh, data, f"f{i}.csv").status == "accepted"
    assert not usecases.ledger_stale(fresh)  # set before any ledger row: nothing to redo
    a, b = ledger(changed), ledger(fresh)
    assert len(a) == 12 and a == b


def test_bad_band_rule_is_refused(sqlite_url):
    engine = usecases.init_db(sqlite_url)
    with pytest.raises(usecases.DomainError, match="band_pressure must be one of midpoint, upper"):
        usecases.save_settings(engine, {"band_pressure": "top"})


# --- 3. contamination level ------------------------------------------------------------------


def test_site_level_wins_and_the_sample_only_suggests(sqlite_url):
    reg = registry(
        oil_level=", contamination_level: high cleanliness",
        site_level=", contamination_level: slight contamination",
        model_extra="    operating_temp_c: 60",
    )
    sample = (
        b"unit,position,taken_at,hour_meter,iso4406\nFH-1,drive,2026-03-01T12:00:00Z,105,21/19/17\n"
    )
    engine = store(sqlite_url, reg, [csv([day_rows(1, 100)]), sample])
    ec = 0.4  # ISO 281:2007 guide, slight contamination, dm < 100 mm: 0.3-0.5, middle
    assert ledger(engine)[0]["damage"] == pytest.approx(10 / (4000 * a_oil(60.0, ec=ec)))
    rep = usecases.unit_report(engine, "FH-1", AS_OF)
    row = rep.assumptions.iloc[0]
    assert row["contamination_level"] == "slight contamination"
    assert row["contamination_ec"] == pytest.approx(ec)
    # >= 14 um scale number 17 -> severe contamination (ISO4406_CLEANLINESS_MAP, from memory)
    assert row["suggested_level"] == "severe contamination"


def test_default_level_is_the_reference(sqlite_url):
    engine = store(sqlite_url, registry(model_extra="    operating_temp_c: 60"),
                   [csv([day_rows(1, 100)])])  # fmt: skip
    rep = usecases.unit_report(engine, "FH-1", AS_OF)
    assert rep.assumptions["contamination_level"].tolist() == ["normal cleanliness"]
    assert rep.assumptions["contamination_ec"].tolist() == [pytest.approx(EC_NORMAL)]


def test_unknown_level_is_refused():
    from monitor.ingest.registry import load_registry

    reg, problems = load_registry(registry(site_level=", contamination_level: clean"), "f.yaml")
    assert reg is None
    assert "expected one of extreme cleanliness, high cleanliness" in problems[0].message


# --- 4. kappa below 0.1 ----------------------------------------------------------------------


def test_kappa_below_range_takes_the_floor_and_flags(sqlite_url):
    # 20 rpm and 150 degC: nu1 = 45000 * 20^-0.83 / sqrt(50) (ISO 281, n < 1000 rpm),
    # kappa = nu(150) / nu1 < 0.1: aISO takes the table's floor 0.1
    kappa = d341_viscosity(150.0) / nu1(20.0)
    assert kappa < 0.1
    engine = store(sqlite_url, registry(), [csv([day_rows(1, 100, speed=20, temp=150)], "c")])
    (row,) = ledger(engine)
    floor = 0.1 / aiso_roller(1.0, X_REF)
    want = 10 * (20 / 2000) / (4000 * floor)  # life in hours ~ 1 / speed
    assert row["damage"] == pytest.approx(want, rel=1e-9)
    assert row["kappa_floor_hours"] == pytest.approx(10.0)
    status = usecases.fleet_status(engine, AS_OF)
    assert "kappa_below_range" in status["flags"].iloc[0]


# --- 5. life before the first upload ---------------------------------------------------------

DAYS = [day_rows(d, 5400 + 10 * (d - 1), temp=60) for d in range(1, 29)]
DAY_DAMAGE = 10 / (4000 * a_oil(60.0))


def _consumed(sqlite_url: str, comp_extra: str = "") -> tuple[float, float, str, list]:
    engine = store(sqlite_url, registry(comp_extra=comp_extra), [csv(DAYS, "c")])
    r = usecases.fleet_status(engine, AS_OF).iloc[0]
    return r["consumed_fraction"], r["hours_since_rebuild"], r["life_before_data"], r["flags"]


def test_first_upload_at_a_high_hour_meter_is_flagged(sqlite_url):
    consumed, hours, how, flags = _consumed(sqlite_url)
    assert how == "unknown" and "life_before_data_unknown" in flags
    assert consumed == pytest.approx(28 * DAY_DAMAGE) and hours == pytest.approx(280)


def test_consumed_fraction_from_the_registry(sqlite_url):
    consumed, _, how, flags = _consumed(sqlite_url, ", consumed_at_first_upload: 0.3")
    assert how == "consumed_at_first_upload" and "life_before_data_unknown" not in flags
    assert consumed == pytest.approx(0.3 + 28 * DAY_DAMAGE)


def test_last_rebuild_hours_charged_at_the_early_rate(sqlite_url):
    # 400 h from the rebuild at 5000 h to the first upload at 5400 h, charged at the rate
    # of the first 30 logged days: DAY_DAMAGE per 10 hour-meter hours
    consumed, hours, how, _ = _consumed(sqlite_url, ", last_rebuild_hour_meter: 5000")
    assert how == "last_rebuild_hour_meter"
    assert consumed == pytest.approx(400 * DAY_DAMAGE / 10 + 28 * DAY_DAMAGE)
    assert hours == pytest.approx(400 + 280)


def test_both_life_before_fields_are_refused():
    from monitor.ingest.registry import load_registry

    extra = ", consumed_at_first_upload: 0.2, last_rebuild_hour_meter: 10"
    reg, problems = load_registry(registry(comp_extra=extra), "f.yaml")
    assert reg is None and "at most one of" in problems[0].message


def test_new_drive_is_not_flagged(sqlite_url):
    rows = [day_rows(d, 10 * (d - 1), temp=60) for d in range(1, 5)]
    engine = store(sqlite_url, registry(), [csv(rows, "c")])
    r = usecases.fleet_status(engine, AS_OF).iloc[0]
    assert r["life_before_data"] == "new_at_first_upload"
    assert "life_before_data_unknown" not in r["flags"]


# --- the oil_temp column at ingest (no store) -------------------------------------------------


def _hist_json(**fields: object) -> bytes:
    import json

    hist = {"position": "drive", "quantity": "pressure", "pressure_unit": "bar",
            "pressure_edges": [0, 200, 400], "hours": [4, 6], **fields}  # fmt: skip
    doc = {"unit": "FH-1", "period_start": "2026-03-01T00:00:00Z",
           "period_end": "2026-03-02T00:00:00Z", "hour_meter_start": 100,
           "hour_meter_end": 110, "histograms": [hist]}  # fmt: skip
    return json.dumps(doc).encode()


@pytest.mark.parametrize(("value", "unit", "want_c"), [(60, "c", 60.0), (140, "f", 60.0)])
def test_csv_oil_temp_in_c_and_f(value, unit, want_c):
    from monitor.ingest.parse import parse_file

    parsed = parse_file(csv([day_rows(1, 100, temp=value)], unit), "t.csv")
    assert not parsed.problems
    assert parsed.histogram_batch().oil_temp_c.tolist() == [pytest.approx(want_c)]


@pytest.mark.parametrize(("value", "unit", "want_c"), [(60, "degC", 60.0), (140, "°F", 60.0)])
def test_json_oil_temp_in_c_and_f(value, unit, want_c):
    from monitor.ingest.parse import parse_file

    parsed = parse_file(_hist_json(oil_temp=value, oil_temp_unit=unit), "t.json")
    assert not parsed.problems
    assert parsed.histogram_batch().oil_temp_c.tolist() == [pytest.approx(want_c)]


@pytest.mark.parametrize(
    ("data", "name", "column", "message"),
    [
        (csv([day_rows(1, 100, temp=350)], "f"), "t.csv", "oil_temp_f",
         "350 f is 176.7 degC, outside the plausible range -30 to 150 degC"),
        (csv([day_rows(1, 100, temp=60)], "k"), "t.csv", None, "oil_temp_k"),
        (_hist_json(oil_temp=-40, oil_temp_unit="F"), "t.json", "histograms[0].oil_temp",
         "-40 f is -40.0 degC, outside the plausible range"),
        (_hist_json(oil_temp=60), "t.json", "histograms[0].oil_temp_unit",
         "`oil_temp` needs its unit: add `oil_temp_unit` (c or f)"),
        (_hist_json(oil_temp=60, oil_temp_unit="K"), "t.json", "histograms[0].oil_temp_unit",
         "unknown temperature unit"),
    ],
)  # fmt: skip
def test_oil_temp_rejections(data, name, column, message):
    from monitor.ingest.parse import parse_file

    problems = parse_file(data, name).problems
    assert problems, "expected a refusal"
    assert any(message in p.message or message in str(p) for p in problems), problems
    if column is not None:
        assert column in {p.column for p in problems}


def test_differing_oil_temp_in_one_histogram_is_refused():
    from monitor.ingest.parse import parse_file

    rows = [day_rows(1, 100, lo=0, hi=200, temp=60), day_rows(1, 100, lo=200, hi=400, temp=70)]
    rows[0] = rows[0].replace(",10,2000,", ",4,2000,")
    rows[1] = rows[1].replace(",10,2000,", ",6,2000,")
    problems = parse_file(csv(rows, "c"), "t.csv").problems
    assert [p.line for p in problems] == [3]
    assert "differs from the 60 that the other rows" in problems[0].message


def test_upgrading_a_store_with_a_ledger_marks_it_stale(sqlite_url):
    from alembic import command

    engine = store(sqlite_url, registry(), [csv([day_rows(1, 100)])])
    assert not usecases.ledger_stale(engine)
    engine.dispose()
    command.downgrade(db.alembic_config(sqlite_url), "0005")
    engine = usecases.init_db(sqlite_url)  # upgrade head: rows written the old way
    assert usecases.ledger_stale(engine)
    usecases.recompute(engine)
    assert not usecases.ledger_stale(engine)
    assert ledger(engine)[0]["oil_factor_source"] == "none"
