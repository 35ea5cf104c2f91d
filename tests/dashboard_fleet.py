"""A tiny invented fleet whose ranking is known by hand, for the dashboard tests.

Three units of one invented pump model (rated L10 1 000 h at 380 bar differential,
2 500 rpm, charge 20 bar, exponent 10/3), forty days of daily histograms:

- QA-HOT, both loops 22 h/day in the 400-450 bar band: midpoint 425 bar, 405 bar
  differential, band life 1000 * (380/405)^(10/3) = 809 h, so 40 days * 22 h = 880 h
  consume 880 / 809 = 1.09 of the life: no hours left, the most urgent unit.
- QB-CONV, 20 h/day at 350-400 bar: 355 bar differential, band life
  1000 * (380/355)^(10/3) = 1 254 h; 800 h used 0.64, about 450 h left.
- QA-MILD, 8 h/day at 100-200 bar: 130 bar differential, band life 35 700 h;
  practically nothing used. Its last upload ends three days before the as-of date.

(Band lives hand-computed from the design brief's life model v1.)
"""

from __future__ import annotations

from datetime import date, datetime, timedelta
from pathlib import Path

AS_OF = date(2026, 3, 10)
MOST_URGENT = "QA-HOT"
START = date(2026, 1, 29)
DAYS = 40

REGISTRY = """\
# invented test fleet
oils:
  - {name: test-oil-46, iso_vg: 46, viscosity_index: 100}
component_models:
  - name: TP-50
    kind: pump
    displacement_cm3: 50
    rated_dp_bar: 380
    rated_speed_rpm: 2500
    rated_l10_h: 1000
    life_exponent: 3.333
    low_side_bar: 20
    relief_bar: 420
    case_drain: {test_dp_bar: 250, test_temp_c: 50, new_lpm: 1.0, limit_factor: 2.0}
sites:
  - name: North Pit
  - name: South Mill
units:
  - tag: QA-HOT
    site: North Pit
    machine_type: track loader
    oil: test-oil-46
    components:
      - {position: left, model: TP-50}
      - {position: right, model: TP-50}
  - tag: QA-MILD
    site: North Pit
    machine_type: track loader
    oil: test-oil-46
    components:
      - {position: left, model: TP-50}
      - {position: right, model: TP-50}
  - tag: QB-CONV
    site: South Mill
    machine_type: chain conveyor
    oil: test-oil-46
    components:
      - {position: pump, model: TP-50}
"""

HEADER = (
    "unit,position,period_start,period_end,hour_meter_start,hour_meter_end,quantity,"
    "pressure_low_bar,pressure_high_bar,hours,mean_speed_rpm\n"
)
DUTY = {  # unit -> (positions, hours per day, band low, band high)
    "QA-HOT": (("left", "right"), 22.0, 400, 450),
    "QA-MILD": (("left", "right"), 8.0, 100, 200),
    "QB-CONV": (("pump",), 20.0, 350, 400),
}


def _stamp(day: date) -> str:
    return datetime(day.year, day.month, day.day).isoformat() + "Z"


def histogram_rows(unit: str, first_day: int, days: int, meter0: float) -> str:
    """CSV rows of daily histograms of one unit (one band, at 2 500 rpm)."""
    positions, per_day, lo, hi = DUTY[unit]
    rows = []
    for k in range(first_day, first_day + days):
        day = START + timedelta(days=k)
        m0, m1 = meter0 + per_day * k, meter0 + per_day * (k + 1)
        for pos in positions:
            rows.append(
                f"{unit},{pos},{_stamp(day)},{_stamp(day + timedelta(days=1))},{m0:.1f},"
                f"{m1:.1f},pressure,{lo},{hi},{per_day},2500\n"
            )
    return "".join(rows)


READINGS = """\
unit,position,taken_at,hour_meter,case_drain_lpm,test_pressure_bar,oil_temp_c,iso4406
QA-HOT,left,2026-02-02T10:00:00Z,1088.0,1.10,250,50,18/16/13
QA-HOT,left,2026-02-16T10:00:00Z,1396.0,1.35,250,50,19/17/14
QA-HOT,left,2026-03-02T10:00:00Z,1704.0,1.62,250,50,20/18/15
QA-HOT,right,2026-03-02T10:00:00Z,1704.0,1.20,250,50,20/18/15
"""

METER0 = {"QA-HOT": 1000.0, "QA-MILD": 500.0, "QB-CONV": 8000.0}
MILD_DAYS = DAYS - 3  # QA-MILD's data stops three days before the as-of date


def write_fleet(folder: Path) -> dict[str, Path]:
    """Write the registry, the histogram exports and the readings into ``folder``."""
    folder.mkdir(parents=True, exist_ok=True)
    files = {
        "registry": folder / "registry.yaml",
        "hot": folder / "qa-hot.csv",
        "mild": folder / "qa-mild.csv",
        "conv": folder / "qb-conv.csv",
        "readings": folder / "readings.csv",
    }
    files["registry"].write_text(REGISTRY, encoding="utf-8")
    files["hot"].write_text(HEADER + histogram_rows("QA-HOT", 0, DAYS, METER0["QA-HOT"]))
    files["mild"].write_text(HEADER + histogram_rows("QA-MILD", 0, MILD_DAYS, METER0["QA-MILD"]))
    files["conv"].write_text(HEADER + histogram_rows("QB-CONV", 0, DAYS, METER0["QB-CONV"]))
    files["readings"].write_text(READINGS, encoding="utf-8")
    return files


def good_upload() -> bytes:
    """QA-MILD's next two days (new data, accepted)."""
    return (HEADER + histogram_rows("QA-MILD", MILD_DAYS, 2, METER0["QA-MILD"])).encode()


def broken_upload() -> bytes:
    """Two days of QA-MILD where line 3 has negative hours (rejected whole)."""
    text = HEADER + histogram_rows("QA-MILD", MILD_DAYS, 2, METER0["QA-MILD"])
    lines = text.splitlines(keepends=True)
    lines[2] = lines[2].replace(",8.0,2500", ",-8.0,2500")
    return "".join(lines).encode()


def build_store(url: str, folder: Path) -> dict[str, Path]:
    """Create the store at ``url`` and load the fleet into it through the service."""
    from monitor import service

    files = write_fleet(folder)
    engine = service.init_db(url)
    try:
        service.import_registry(engine, files["registry"].read_bytes(), "registry.yaml")
        results = service.ingest_paths(
            engine, [files["hot"], files["mild"], files["conv"], files["readings"]]
        )
    finally:
        engine.dispose()
    bad = [r for r in results if r.status != "accepted"]
    assert not bad, [str(p) for r in bad for p in r.problems]
    return files
