"""Duty spectra, life calibration and working calendars of the invented demo fleet.

The pressure spectrum of a duty is a mixture of normal distributions over the gauge
pressure, binned into 25 bar bands from 0 to 500 bar. Loaders spend much time travelling
at low pressure and dig in bursts; dozers push long and hard; conveyors run steadily in a
narrow band. Each unit's working components are stretched by a factor chosen so that its
expected bearing life under the duty equals a drawn target; the hours at relief (pumps
without a cut-off) or at cut-off are a separate, unstretched component.

Expected life uses the project's life model v1 (DESIGN.md): band midpoint, differential
pressure over the low side, ``L_i = L_R (dp_R / dp_i)^p (n_R / n_i)``, Palmgren-Miner sum.
"""

from __future__ import annotations

import numpy as np
from scipy.optimize import brentq
from scipy.special import ndtr

from demo_fleet.scenario import BAND_WIDTH_BAR, PRESSURE_TOP_BAR

EDGES_BAR = np.arange(0.0, PRESSURE_TOP_BAR + BAND_WIDTH_BAR, BAND_WIDTH_BAR)
LOW_BAR = EDGES_BAR[:-1]
HIGH_BAR = EDGES_BAR[1:]
MID_BAR = 0.5 * (LOW_BAR + HIGH_BAR)
N_BANDS = LOW_BAR.size

SPEED_EDGES_RPM = np.array([0.0, 150.0, 300.0, 450.0, 600.0])
"""Speed bands of the pressure x speed matrices logged by chain-drive motors [rpm]."""
SPEED_MID_RPM = 0.5 * (SPEED_EDGES_RPM[:-1] + SPEED_EDGES_RPM[1:])
SPEED_SHARE = np.array([0.08, 0.27, 0.42, 0.23])
"""Typical share of hours in each speed band of a chain-drive motor [-]."""

# duty -> working components (weight [-], centre [bar], standard deviation [bar]) and the
# range of the share of hours at relief / cut-off [-] (common practice, no source: the
# shapes are invented to look like each application).
DUTIES: dict[str, tuple[tuple[tuple[float, float, float], ...], tuple[float, float]]] = {
    "loader": (((0.30, 80.0, 25.0), (0.45, 190.0, 45.0), (0.25, 300.0, 40.0)), (5e-4, 3e-3)),
    "skid": (((0.35, 70.0, 20.0), (0.45, 180.0, 45.0), (0.20, 290.0, 45.0)), (5e-4, 3e-3)),
    "dozer": (((0.22, 90.0, 30.0), (0.55, 230.0, 50.0), (0.23, 320.0, 35.0)), (5e-3, 2e-2)),
    "dumper": (((0.50, 150.0, 40.0), (0.50, 260.0, 50.0)), (3e-4, 1.5e-3)),
    "trencher": (((0.75, 230.0, 40.0), (0.25, 310.0, 30.0)), (5e-4, 2e-3)),
    "conveyor": (((0.80, 250.0, 30.0), (0.20, 320.0, 35.0)), (3e-3, 1e-2)),
    "chain": (((0.65, 220.0, 35.0), (0.35, 300.0, 40.0)), (3e-4, 1.5e-3)),
}

WORKING_CAP = 0.92
"""Working pressures stay below this share of the cut-off or relief setting [-]."""

STALL_SHARE = 0.035
"""Share of hours the stalling loader spends over its cross-port relief [-]."""

SPEED_KINDS = {
    # kind -> (mean [rpm], day-to-day standard deviation [rpm])
    "engine": (2250.0, 60.0),
    "electric": (1485.0, 2.0),
    "motor": (720.0, 50.0),
}


def _limit_bar(model: dict) -> float:
    """Highest sustained pressure of a loop [bar]: the cut-off, else the relief."""
    return float(model.get("cutoff_bar", model["relief_bar"]))


def band_probabilities(
    working: tuple[tuple[float, float, float], ...],
    scale: float,
    limit_share: float,
    model: dict,
) -> np.ndarray:
    """Share of hours in each 25 bar band [-] for a duty stretched by ``scale`` [-].

    Mass of the working components below 0 bar goes to the first band; they are cut off
    at ``WORKING_CAP`` of the loop's limit (cut-off or relief). The limit component
    sits just above the relief (cross-port relief with override) or just below the cut-off.
    """
    cap = WORKING_CAP * _limit_bar(model)
    edges = np.minimum(EDGES_BAR, cap)
    edges[0] = -np.inf
    working_p = np.zeros(N_BANDS)
    for weight, centre, sd in working:
        working_p += weight * np.diff(ndtr((edges - centre * scale) / (sd * scale)))
    probs = (1.0 - limit_share) * working_p / working_p.sum()
    if "cutoff_bar" in model:
        centre, sd = model["cutoff_bar"] - 4.0, 6.0
    else:
        centre, sd = model["relief_bar"] + 3.0, 8.0
    cdf = ndtr((np.r_[-np.inf, EDGES_BAR[1:-1], np.inf] - centre) / sd)
    probs += limit_share * np.diff(cdf)
    return probs / probs.sum()


def damage_per_hour(
    model: dict, speed_ratio: np.ndarray | float, inverse_factor: np.ndarray | float = 1.0
) -> np.ndarray:
    """Miner damage of one hour in each band [1/h] at speed ``n / n_R`` [-].

    ``inverse_factor`` is 1 / a_oil per band (or per day and band) [-], see
    :mod:`demo_fleet.oil_samples`; 1 leaves the oil condition out.

    Notes
    -----
    ``dp_i = max(0, p_mid_i - p_L)``; ``1 / L_i = (dp_i / dp_R)^p (n_i / n_R) / (a_oil L_R)``
    (life model v1, DESIGN.md; ISO 281 with bearing load proportional to pressure).
    """
    dp = np.maximum(0.0, MID_BAR - model["low_side_bar"])
    rel = (dp / model["rated_dp_bar"]) ** model["life_exponent"]
    per_hour = np.multiply.outer(np.asarray(speed_ratio, dtype=float), rel) / model["rated_l10_h"]
    return per_hour * inverse_factor


def calibrate_scale(
    working: tuple[tuple[float, float, float], ...],
    limit_share: float,
    model: dict,
    speed_ratio: float,
    target_life_h: float,
    inverse_factor: np.ndarray | float = 1.0,
) -> float:
    """Stretch factor of the working pressures [-] that gives ``target_life_h`` [h].

    ``inverse_factor`` is the expected 1 / a_oil per band [-] (1: oil left out).
    Solved with Brent's method on the expected Miner damage rate; clamped to 0.4-1.6
    when the target cannot be reached inside that range.
    """
    weights = damage_per_hour(model, speed_ratio, inverse_factor)

    def excess(scale: float) -> float:
        rate = band_probabilities(working, scale, limit_share, model) @ weights
        return np.log(rate * target_life_h)

    lo, hi = 0.4, 1.6
    if excess(lo) > 0:
        return lo
    if excess(hi) < 0:
        return hi
    return float(brentq(excess, lo, hi, xtol=1e-6))


def daily_band_hours(
    rng: np.random.Generator, probs: np.ndarray, ticks: np.ndarray, spread: float = 200.0
) -> np.ndarray:
    """Integer ticks (0.01 h) in each band for each day, summing exactly to ``ticks``.

    Each day's spectrum is the base spectrum ``probs`` (shape (..., K)) perturbed by a
    Dirichlet draw with concentration ``spread`` [-]; the day's ticks are then split by a
    multinomial draw. Returns an int array of shape (days, K).
    """
    shape = spread * np.broadcast_to(probs, (ticks.size,) + probs.shape[-1:])
    day_p = rng.gamma(shape)
    sums = day_p.sum(axis=1, keepdims=True)
    day_p = np.where(sums > 0, day_p / np.where(sums > 0, sums, 1.0), probs)
    return rng.multinomial(ticks, day_p).astype(np.int64)


def daily_speed(rng: np.random.Generator, kind: str, days: int) -> np.ndarray:
    """Mean speed of each day [rpm] for a speed kind (engine, electric, motor)."""
    mean, sd = SPEED_KINDS[kind]
    return np.rint(rng.normal(mean, sd, days))


# --- working calendars -------------------------------------------------------------


def _month_day(days: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    months = days.astype("datetime64[M]")
    month = months.astype(np.int64) % 12 + 1
    dom = (days - months.astype("datetime64[D]")).astype(np.int64) + 1
    return month, dom


def _closed(days: np.ndarray, calendar: str) -> np.ndarray:
    """True on site shutdown days (year end for all, a summer fortnight at the mill)."""
    month, dom = _month_day(days)
    shut = ((month == 12) & (dom >= 22)) | ((month == 1) & (dom <= 2))
    if calendar == "mill":
        shut |= (month == 7) & (dom >= 14) & (dom <= 27)
    if calendar == "quarry":
        shut |= (month == 8) & (dom >= 5) & (dom <= 11)
    return shut


def site_saturdays(rng: np.random.Generator, days: np.ndarray, calendar: str) -> np.ndarray:
    """Which Saturdays the site works (drawn once per site) [bool per day]."""
    chance = {"quarry": 0.25, "mill": 0.4, "hire": 0.3}[calendar]
    weekday = (days.astype(np.int64) + 3) % 7
    return (weekday == 5) & (rng.random(days.size) < chance)


def _hire_mask(rng: np.random.Generator, n: int) -> np.ndarray:
    """On-hire days of a hire machine: alternating on/off spells (mean 25 / 7 days).

    Off-hire spells last at most 9 days: the yard hires out idle machines quickly.
    """
    mask = np.zeros(n, dtype=bool)
    pos, on = 0, bool(rng.random() < 0.6)
    while pos < n:
        length = int(rng.geometric(1 / 25.0)) if on else min(9, int(rng.geometric(1 / 7.0)))
        mask[pos : pos + length] = on
        pos, on = pos + length, not on
    return mask


def unit_daily_tenths(
    rng: np.random.Generator,
    days: np.ndarray,
    calendar: str,
    saturdays: np.ndarray,
    hours_factor: float = 1.0,
) -> np.ndarray:
    """Engine hours of each day in tenths of an hour [0.1 h] for one unit.

    Weekdays work, the site's working Saturdays work shorter, shutdowns and breakdown
    spells (about 1 % chance per day of a 2-7 day stop) are idle; the quarry works
    shorter days in winter; hire machines work only while on hire.
    """
    n = days.size
    weekday = (days.astype(np.int64) + 3) % 7
    month, _ = _month_day(days)
    working = (weekday < 5) | saturdays
    working &= ~_closed(days, calendar)
    working &= rng.random(n) > 0.04  # odd idle days
    for start in np.flatnonzero(rng.random(n) < 0.01):
        working[start : start + int(rng.integers(2, 8))] = False
    mean = {"quarry": 7.5, "mill": 15.5, "hire": 6.5}[calendar]
    sd = {"quarry": 1.5, "mill": 1.2, "hire": 2.0}[calendar]
    hours = rng.normal(mean, sd, n)
    hours = np.where(weekday == 5, hours * 0.5, hours)
    if calendar == "quarry":
        hours = np.where((month <= 2) | (month == 12), hours * 0.8, hours)
    if calendar == "hire":
        working &= _hire_mask(rng, n)
    hours = np.clip(hours * hours_factor, 0.5, 22.0)
    return np.where(working, np.rint(hours * 10.0), 0).astype(np.int64)
