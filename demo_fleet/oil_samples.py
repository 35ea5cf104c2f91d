"""Oil of the demo fleet: service visits, ISO 4406 samples and their effect on bearing life.

The monthly visits and their oil samples are drawn with a unit's history. The shop's
damage figures (and drivespan's ledger, which the demo is read with) apply the ISO 281
oil-condition factor a_oil at the loops' operating temperature and at the contamination
level the registry chooses for the fleet oil; the samples only suggest a level (a dirty
episode shows as a suggestion of a worse level next to the chosen one).
"""

from __future__ import annotations

import numpy as np

from demo_fleet.duty import MID_BAR
from demo_fleet.scenario import OIL, OIL_NU40_MM2S, OIL_NU100_MM2S, OPERATING_TEMP_C
from monitor.models.bearings import CONTAMINATION_LEVEL_NAMES, contamination_factor
from monitor.models.bearings import oil_life_factor as _iso281_oil_factor

CLEAN_CODE = (18, 16, 13)
"""ISO 4406 code of the fleet oil in normal service (common practice, no source)."""
DIRTY_CODE = (22, 20, 17)
"""ISO 4406 code during the contamination episode (invented)."""
CODE_SHIFTS = (-1, 0, 0, 0, 1)
"""Equally likely shifts of all three scale numbers of a sample from its base code [-]."""
RECOVERY_DAYS = 60
"""Days after a contamination episode during which samples read two numbers cleaner than
the episode (filters catching up) [d]."""
NOISE_SD = 0.03
"""Relative standard deviation of a case-drain measurement [-] (common practice, no source)."""


def level_ec(pitch_diameter_mm: float) -> float:
    """ISO 281 contamination factor eC of the fleet oil's chosen level [-]."""
    key = CONTAMINATION_LEVEL_NAMES[OIL["contamination_level"]]
    return contamination_factor(key, pitch_diameter_mm)


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


def sample_codes(
    rng: np.random.Generator, visits: np.ndarray, contamination: tuple[int, int] | None
) -> list[str]:
    """ISO 4406 code of each visit's oil sample (one sample serves every loop of a unit)."""
    base = np.tile(np.array(CLEAN_CODE), (visits.size, 1))
    if contamination is not None:
        on, off = contamination
        base[(visits >= on) & (visits < off)] = DIRTY_CODE
        base[(visits >= off) & (visits < off + RECOVERY_DAYS)] = np.array(DIRTY_CODE) - 2
    codes = base + rng.choice(CODE_SHIFTS, size=(visits.size, 1))
    return [f"{a}/{b}/{c}" for a, b, c in codes]


def oil_life_factor(model: dict, speed_rpm: np.ndarray, ec: np.ndarray) -> np.ndarray:
    """ISO 281 oil-condition factor a_oil per day and pressure band [-], shape (days, K).

    ``speed_rpm`` and ``ec`` are per day; a_oil is 1 where ``ec`` is nan and for
    models without bearing data; where ISO 281 has no value (kappa < 0.1)
    the factor at its floor is used, as drivespan's ledger does.

    Notes
    -----
    ``a_oil = aISO(kappa_i, eC Cu / P_i) / aISO(1, eC_ref Cu / P_R)`` with
    ``P_i = P_R dp_i / dp_R`` (ISO 281:2007 clause 6.3, relative to the rated
    condition; computed with :func:`monitor.models.bearings.oil_life_factor`).
    """
    speed = np.asarray(speed_rpm, dtype=float).reshape(-1, 1)
    ec = np.asarray(ec, dtype=float).reshape(-1, 1)
    bearing = model.get("bearing")
    if bearing is None:
        return np.ones((speed.shape[0], MID_BAR.size))
    dp = np.maximum(0.0, MID_BAR - model["low_side_bar"])
    kw = dict(
        bearing_type=bearing["type"],
        pitch_diameter_mm=bearing["pitch_diameter_mm"],
        fatigue_limit_kn=bearing["fatigue_limit_kn"],
        load_at_rated_kn=bearing["load_at_rated_kn"],
        rated_dp_bar=model["rated_dp_bar"],
        viscosity_mm2s=float(walther_viscosity(OPERATING_TEMP_C)),
    )
    known = np.isfinite(ec)
    with np.errstate(divide="ignore", invalid="ignore"):
        a = _iso281_oil_factor(dp, speed, contamination_ec=np.where(known, ec, 1.0), **kw)
        floor = _iso281_oil_factor(
            np.array([model["rated_dp_bar"]]),
            np.array([model["rated_speed_rpm"]]),
            contamination_ec=0.0,
            **{**kw, "viscosity_mm2s": 1e9},
        )[0]
    a = np.where(np.isnan(a), floor, a)
    return np.where(np.broadcast_to(known, a.shape), a, 1.0)


def expected_inverse_factor(model: dict, speed_rpm: float) -> np.ndarray:
    """1 / a_oil per pressure band at the fleet oil's level [-], (K,).

    Used to calibrate a unit's duty so its expected bearing life, as the ledger
    computes it with the oil factor, equals the drawn target.
    """
    bearing = model.get("bearing")
    ec = 1.0 if bearing is None else level_ec(bearing["pitch_diameter_mm"])
    return 1.0 / oil_life_factor(model, np.array([speed_rpm]), np.array([ec]))[0]
