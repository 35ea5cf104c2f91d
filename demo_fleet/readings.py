"""Monthly service-check readings of the demo units: case drain and oil samples.

A component's "true" normalised leakage grows with a wear variable ``w`` that
accumulates with operating hours (faster after a contamination episode) and restarts
at each rebuild. A reading is that leakage taken back to the day's test conditions
with the laminar law and the oil's ASTM D341 line, plus measurement noise.
"""

from __future__ import annotations

import numpy as np

from demo_fleet.history import WEAR_EXPONENT, PositionHistory, UnitHistory
from demo_fleet.scenario import OIL_NU40_MM2S, OIL_NU100_MM2S

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

NOISE_SD = 0.03
"""Relative standard deviation of a case-drain measurement [-] (common practice, no source)."""
CLEAN_CODE = (18, 16, 13)
"""ISO 4406 code of the fleet oil in normal service (common practice, no source)."""
DIRTY_CODE = (22, 20, 17)
"""ISO 4406 code during the contamination episode (invented)."""


def walther_viscosity(
    temp_c: np.ndarray | float,
    nu_a: float = OIL_NU40_MM2S,
    nu_b: float = OIL_NU100_MM2S,
    t_a_c: float = 40.0,
    t_b_c: float = 100.0,
) -> np.ndarray:
    """Kinematic viscosity [mm2/s] at ``temp_c`` [degC] on the two-point ASTM D341 line.

    Parameters
    ----------
    temp_c : array_like
        Oil temperature [degC].
    nu_a, nu_b : float
        Viscosities at the two reference temperatures [mm2/s].
    t_a_c, t_b_c : float
        The two reference temperatures [degC].

    Returns
    -------
    numpy.ndarray
        Kinematic viscosity [mm2/s].

    Notes
    -----
    ``log10(log10(nu + 0.7)) = A - B log10(T)``, T in kelvin (ASTM D341, Walther).
    """
    t_a, t_b = t_a_c + 273.15, t_b_c + 273.15
    y_a, y_b = np.log10(np.log10(nu_a + 0.7)), np.log10(np.log10(nu_b + 0.7))
    slope = (y_a - y_b) / (np.log10(t_b) - np.log10(t_a))
    intercept = y_a + slope * np.log10(t_a)
    y = intercept - slope * np.log10(np.asarray(temp_c, dtype=float) + 273.15)
    return 10.0 ** (10.0**y) - 0.7


def visit_days(rng: np.random.Generator, days: np.ndarray) -> np.ndarray:
    """Index of one weekday service visit per calendar month of the window."""
    months = np.unique(days.astype("datetime64[M]"))
    offset = int(rng.integers(0, 20))
    first = months.astype("datetime64[D]") + offset
    weekday = (first.astype(np.int64) + 3) % 7
    first = first + np.where(weekday >= 5, 7 - weekday, 0)
    idx = (first - days[0]).astype(np.int64)
    return idx[(idx >= 0) & (idx < days.size)]


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


def _iso_codes(hist: UnitHistory, rng: np.random.Generator, day_idx: np.ndarray) -> np.ndarray:
    """ISO 4406 code of each visit's oil sample (one sample serves both loops)."""
    base = np.tile(np.array(CLEAN_CODE), (day_idx.size, 1))
    if hist.contamination is not None:
        on, off = hist.contamination
        dirty = (day_idx >= on) & (day_idx < off)
        after = (day_idx >= off) & (day_idx < off + 60)
        base[dirty] = DIRTY_CODE
        base[after] = np.array(DIRTY_CODE) - 2
    codes = base + rng.choice([-1, 0, 0, 0, 1], size=(day_idx.size, 1))
    return np.array([f"{a}/{b}/{c}" for a, b, c in codes])


def unit_readings(hist: UnitHistory, rng: np.random.Generator, days: np.ndarray) -> list[tuple]:
    """Rows of the readings CSV for one unit (monthly, plus a check after each rebuild)."""
    visits = visit_days(rng, days)
    after_rebuild = [e.day + int(rng.integers(2, 6)) for e in hist.events]
    day_all = np.unique(np.concatenate((visits, np.array(after_rebuild, dtype=int))))
    day_all = day_all[day_all < days.size]
    minutes = rng.integers(0, 50, day_all.size)
    stamps = [
        f"{d}T06:{m:02d}:00Z"
        for d, m in zip(np.datetime_as_string(days[day_all]), minutes, strict=True)
    ]
    meter = hist.meter_start_tenths()[day_all] / 10.0
    codes = _iso_codes(hist, rng, day_all)
    rows: list[tuple] = []
    for pos in hist.positions:
        cd = pos.model["case_drain"]
        q_star = cd["new_lpm"] * true_leakage_ratio(hist, pos, day_all)
        dp = np.rint(cd["test_dp_bar"] * rng.uniform(0.85, 1.15, day_all.size))
        temp = np.round(rng.uniform(40.0, 65.0, day_all.size), 1)
        nu_ratio = walther_viscosity(cd["test_temp_c"]) / walther_viscosity(temp)
        noise = 1.0 + rng.normal(0.0, NOISE_SD, day_all.size)
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
