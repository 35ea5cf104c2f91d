"""Monthly service-check readings of the demo units: case drain and oil samples.

A component's "true" normalised leakage grows with a wear variable ``w`` that
accumulates with operating hours (faster after a contamination episode) and restarts
at each rebuild. A reading is that leakage taken back to the day's test conditions
with the laminar law and the oil's ASTM D341 line, plus measurement noise.
"""

from __future__ import annotations

import numpy as np

from demo_fleet.history import WEAR_EXPONENT, PositionHistory, UnitHistory
from demo_fleet.oil_samples import NOISE_SD, walther_viscosity

__all__ = ["READING_COLUMNS", "true_leakage_ratio", "unit_readings", "walther_viscosity"]

READING_COLUMNS = (
    "unit",
    "position",
    "taken_at",
    "hour_meter",
    "case_drain_lpm",
    "test_pressure_bar",
    "oil_temp_c",
    "iso4406",
)


def _life_index(hist: UnitHistory, pos: PositionHistory, day_idx: np.ndarray) -> np.ndarray:
    """Which life (0 = first) a reading taken on the morning of each day belongs to."""
    ev = np.array(sorted(e.day for e in hist.events if e.position == pos.position), dtype=int)
    return np.searchsorted(ev, day_idx, side="left"), ev


def true_leakage_ratio(hist: UnitHistory, pos: PositionHistory, day_idx: np.ndarray) -> np.ndarray:
    """Normalised leakage / catalogue new value at the start of each given day [-]."""
    life, ev = _life_index(hist, pos, day_idx)
    rate = hist.tenths / 10.0 * pos.wear_mult / pos.wear_life_h
    cum = np.concatenate(([0.0], np.cumsum(rate)))
    starts = np.concatenate(([0], ev))[life]
    w = cum[day_idx] - cum[starts]
    offsets = np.asarray(pos.offsets)[np.minimum(life, len(pos.offsets) - 1)]
    return offsets * (1.0 + w**WEAR_EXPONENT)


def unit_readings(hist: UnitHistory, rng: np.random.Generator, days: np.ndarray) -> list[tuple]:
    """Rows of the readings CSV for one unit (monthly, plus a check after each rebuild).

    The monthly visits, their oil samples and their case-drain measurement errors were
    drawn with the unit's history; the check a few days after a rebuild measures the
    case drain only (no oil sample).
    """
    visits = hist.visits
    after_rebuild = [e.check_day for e in hist.events]
    day_all = np.unique(np.concatenate((visits, np.array(after_rebuild, dtype=int))))
    day_all = day_all[day_all < days.size]
    minutes = rng.integers(0, 50, day_all.size)
    stamps = [
        f"{d}T06:{m:02d}:00Z"
        for d, m in zip(np.datetime_as_string(days[day_all]), minutes, strict=True)
    ]
    meter = hist.meter_start_tenths()[day_all] / 10.0
    code_of = dict(zip(visits.tolist(), hist.codes, strict=True))
    codes = [code_of.get(int(d), "") for d in day_all]
    rows: list[tuple] = []
    for pos in hist.positions:
        cd = pos.model["case_drain"]
        q_star = cd["new_lpm"] * true_leakage_ratio(hist, pos, day_all)
        dp = np.rint(cd["test_dp_bar"] * rng.uniform(0.85, 1.15, day_all.size))
        temp = np.round(rng.uniform(40.0, 65.0, day_all.size), 1)
        nu_ratio = walther_viscosity(cd["test_temp_c"]) / walther_viscosity(temp)
        noise = 1.0 + rng.normal(0.0, NOISE_SD, day_all.size)
        at_visit = np.isin(day_all, visits)
        noise[at_visit] = hist.visit_noise[pos.position][np.isin(visits, day_all)]
        for e in hist.events:
            if e.position == pos.position and not at_visit[day_all == e.check_day].any():
                noise[day_all == e.check_day] = e.check_noise
        q = q_star * dp / cd["test_dp_bar"] * nu_ratio * noise
        for i in range(day_all.size):
            rows.append(
                (
                    hist.plan.tag,
                    pos.position,
                    stamps[i],
                    float(meter[i]),
                    round(float(q[i]), 3),
                    float(dp[i]),
                    float(temp[i]),
                    str(codes[i]),
                )
            )
    return rows
