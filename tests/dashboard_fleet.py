"""A tiny invented fleet whose ranking is known by hand, for the dashboard tests.

Three units of one invented pump model (rated L10 1 000 h at 380 bar differential,
2 500 rpm, charge 20 bar, exponent 10/3), forty days of daily histograms:

- AA-HOT, both loops 22 h/day in the 400-450 bar band: midpoint 425 bar, 405 bar
  differential, band life 1000 * (380/405)^(10/3) = 809 h, so 40 days * 22 h = 880 h
  consume 880 / 809 = 1.09 of the life: no hours left, the most urgent unit.
- AB-CONV, 20 h/day at 350-400 bar: 355 bar differential, band life
  1000 * (380/355)^(10/3) = 1 254 h; 800 h used 0.64, about 450 h left.
- AA-MILD, 8 h/day at 100-200 bar: 130 bar differential, band life 35 700 h;
  practically nothing used. Its last upload ends three days before the as-of date.

The tags start with "AA"/"AB" so that, mixed with the demo fleet, AA-HOT also wins
the contract's tie-break (equal remaining hours and due date: unit tag order).

(Band lives hand-computed from the design brief's life model v1.)
"""

from __future__ import annotations

from datetime import date, datetime, timedelta
from pathlib import Path

AS_OF = date(2026, 3, 10)
MOST_URGENT = "AA-HOT"
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
  - tag: AA-HOT
    site: North Pit
    machine_type: track loader
    oil: test-oil-46
    components:
      - {position: left, model: TP-50}
      - {position: right, model: TP-50}
  - tag: AA-MILD
    site: North Pit
    machine_type: track loader
    oil: test-oil-46
    components:
      - {position: left, model: TP-50}
      - {position: right, model: TP-50}
  - tag: AB-CONV
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
METER0 = {"AA-HOT": 1000.0, "AA-MILD": 500.0, "AB-CONV": 8000.0}
MILD_DAYS = DAYS - 3  # AA-MILD's data stops three days before the as-of date
DUTY = {  # unit -> (positions, hours per day, band low, band high)
    "AA-HOT": (("left", "right"), 22.0, 400, 450),
    "AA-MILD": (("left", "right"), 8.0, 100, 200),
    "AB-CONV": (("pump",), 20.0, 350, 400),
}


def _stamp(day: date) -> str:
    return datetime(day.year, day.month, day.day).isoformat() + "Z"


def histogram_rows(unit: str, first_day: int, days: int, as_of: date = AS_OF) -> str:
    """CSV rows of daily histograms of one unit (one band, at 2 500 rpm); day 0 is
    ``DAYS`` days before ``as_of``."""
    positions, per_day, lo, hi = DUTY[unit]
    meter0 = METER0[unit]
    start = as_of - timedelta(days=DAYS)
    rows = []
    for k in range(first_day, first_day + days):
        day = start + timedelta(days=k)
        m0, m1 = meter0 + per_day * k, meter0 + per_day * (k + 1)
        for pos in positions:
            rows.append(
                f"{unit},{pos},{_stamp(day)},{_stamp(day + timedelta(days=1))},{m0:.1f},"
                f"{m1:.1f},pressure,{lo},{hi},{per_day},2500\n"
            )
    return "".join(rows)


READING_HEADER = (
    "unit,position,taken_at,hour_meter,case_drain_lpm,test_pressure_bar,oil_temp_c,iso4406\n"
)
READINGS = (  # (day, position, case drain [L/min] at the reference 250 bar / 50 degC, code)
    (4, "left", 1.10, "18/16/13"),
    (18, "left", 1.35, "19/17/14"),
    (32, "left", 1.62, "20/18/15"),
    (32, "right", 1.20, "20/18/15"),
)


def readings_csv(as_of: date = AS_OF) -> str:
    """AA-HOT's service checks: a rising case drain on the left loop, oil samples."""
    start = as_of - timedelta(days=DAYS)
    rows = [
        f"AA-HOT,{pos},{(start + timedelta(days=k)).isoformat()}T10:00:00Z,"
        f"{METER0['AA-HOT'] + 22.0 * k:.1f},{q},250,50,{code}\n"
        for k, pos, q, code in READINGS
    ]
    return READING_HEADER + "".join(rows)


def write_fleet(folder: Path, as_of: date = AS_OF) -> dict[str, Path]:
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
    files["hot"].write_text(HEADER + histogram_rows("AA-HOT", 0, DAYS, as_of))
    files["mild"].write_text(HEADER + histogram_rows("AA-MILD", 0, MILD_DAYS, as_of))
    files["conv"].write_text(HEADER + histogram_rows("AB-CONV", 0, DAYS, as_of))
    files["readings"].write_text(readings_csv(as_of), encoding="utf-8")
    return files


def good_upload(as_of: date = AS_OF) -> bytes:
    """AA-MILD's next two days (new data, accepted)."""
    return (HEADER + histogram_rows("AA-MILD", MILD_DAYS, 2, as_of)).encode()


def broken_upload(as_of: date = AS_OF) -> bytes:
    """Two days of AA-MILD where line 3 has negative hours (rejected whole)."""
    text = HEADER + histogram_rows("AA-MILD", MILD_DAYS, 2, as_of)
    lines = text.splitlines(keepends=True)
    lines[2] = lines[2].replace(",8.0,2500", ",-8.0,2500")
    return "".join(lines).encode()


def build_store(url: str, folder: Path, as_of: date = AS_OF) -> dict[str, Path]:
    """Create the store at ``url`` and load the fleet into it through the service."""
    from monitor import usecases

    files = write_fleet(folder, as_of)
    engine = usecases.init_db(url)
    try:
        usecases.import_registry(engine, files["registry"].read_bytes(), "registry.yaml")
        results = usecases.ingest_paths(
            engine, [files["hot"], files["mild"], files["conv"], files["readings"]]
        )
    finally:
        engine.dispose()
    bad = [r for r in results if r.status != "accepted"]
    assert not bad, [str(p) for r in bad for p in r.problems]
    return files
