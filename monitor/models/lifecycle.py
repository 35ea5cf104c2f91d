"""Remaining life, utilisation, due dates and status bands of one component.

Works on arrays of per-upload damage and hours (sorted by time, since the last
rebuild) produced by :mod:`monitor.models.spectrum`. Every number is an estimate for planning;
the maker's service limits and qualified technicians decide when a unit is rebuilt.
"""

from __future__ import annotations

from datetime import UTC, date, datetime, time

import numpy as np

RATE_WINDOW_H = 500.0
"""Operating hours over which the recent damage rate is taken [h] (design brief)."""

UTILISATION_WINDOW_DAYS = 30
"""Calendar days over which utilisation is taken [d] (design brief)."""

from monitor.domain.vocabulary import NO_ESTIMATE, STATUS_BANDS  # noqa: E402, F401

DEFAULT_STATUS_LIMITS_H = {"overdue_h": 0.0, "due_h": 250.0, "plan_h": 1000.0}
"""Upper limits of remaining hours [h] for "act now", "due soon" and "plan ahead"."""


def remaining_bearing_h(consumed: float | np.ndarray, rate_per_h: float | np.ndarray) -> np.ndarray:
    """Remaining bearing hours at the recent damage rate.

    Parameters
    ----------
    consumed : float or array
        Consumed fraction of the life [-].
    rate_per_h : float or array
        Damage rate [1/h]; nan = no recent operation.

    Returns
    -------
    numpy.ndarray
        Remaining hours [h]: 0 once the life is used up; nan without a rate; inf
        when the rate is 0 (the recent load does no fatigue damage).

    Notes
    -----
    ``remaining = max(0, 1 - consumed) / rate``.

    References
    ----------
    Palmgren-Miner rule; design brief, "Life model v1".
    """
    c = np.asarray(consumed, dtype=float)
    r = np.asarray(rate_per_h, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        rem = np.maximum(0.0, 1.0 - c) / r
    return np.where(c >= 1.0, 0.0, np.where(np.isnan(r), np.nan, rem))


def limiting_mode(bearing_h: float, wear_h: float) -> tuple[float, str | None]:
    """The smaller of the bearing and wear estimates, and which one it is.

    Parameters
    ----------
    bearing_h, wear_h : float
        Remaining bearing and wear hours [h]; nan = no estimate.

    Returns
    -------
    tuple
        (remaining hours [h], "bearing" | "wear" | None); None when neither has an
        estimate. A tie is reported as "bearing".

    Notes
    -----
    ``remaining = min(bearing, wear)`` ignoring nan.

    References
    ----------
    Design brief, "Life model v1".
    """
    rem, names = limiting_modes(np.array([bearing_h], float), np.array([wear_h], float))
    return float(rem[0]), names[0]


def _day_start(as_of: date) -> datetime:
    if isinstance(as_of, datetime) or not isinstance(as_of, date):
        raise ValueError(f"as_of must be a datetime.date (a day), got {as_of!r}")
    return datetime.combine(as_of, time(0), tzinfo=UTC)


def due_date(as_of: date, remaining_h: float, utilisation_h_per_day: float) -> date | None:
    """Calendar date when the remaining hours run out at the recent utilisation.

    Parameters
    ----------
    as_of : datetime.date
        The as-of day.
    remaining_h : float
        Remaining hours [h].
    utilisation_h_per_day : float
        Utilisation [h/d].

    Returns
    -------
    datetime.date or None
        None without an estimate, without utilisation, for infinite remaining hours or
        beyond the calendar's range.

    Notes
    -----
    ``due = as_of + floor(remaining / utilisation)`` days.

    References
    ----------
    Design brief, "Life model v1" (due date).
    """
    return due_dates(
        as_of, np.array([remaining_h], float), np.array([utilisation_h_per_day], float)
    )[0]


def status_band(
    remaining_h: float | np.ndarray,
    *,
    overdue_h: float = DEFAULT_STATUS_LIMITS_H["overdue_h"],
    due_h: float = DEFAULT_STATUS_LIMITS_H["due_h"],
    plan_h: float = DEFAULT_STATUS_LIMITS_H["plan_h"],
) -> str | np.ndarray:
    """Status band for remaining hours.

    Parameters
    ----------
    remaining_h : float or array
        Remaining hours [h]; nan = no estimate.
    overdue_h, due_h, plan_h : float
        Ascending upper limits [h] of "act now", "due soon" and "plan ahead".

    Returns
    -------
    str or numpy.ndarray of str
        One of :data:`STATUS_BANDS`, or :data:`NO_ESTIMATE` for nan.

    Notes
    -----
    ``act now: r <= overdue_h``; ``due soon: r <= due_h``; ``plan ahead: r <= plan_h``;
    otherwise healthy (including inf).

    References
    ----------
    Design brief (status bands); limits are planning settings, common practice.
    """
    if not (overdue_h <= due_h <= plan_h):
        raise ValueError(
            "status limits must be ascending: overdue_h <= due_h <= plan_h, got "
            f"{overdue_h!r}, {due_h!r}, {plan_h!r}"
        )
    r = np.asarray(remaining_h, dtype=float)
    with np.errstate(invalid="ignore"):
        idx = np.searchsorted(np.array([overdue_h, due_h, plan_h]), r, side="left")
    names = np.array((*STATUS_BANDS, NO_ESTIMATE), dtype=object)
    out = names[np.where(np.isnan(r), len(STATUS_BANDS), idx)]
    return str(out) if r.ndim == 0 else out


# --- over arrays of components (the ranking's implementation) ---------------------------


def consumed_fraction(damage: np.ndarray, a1: float) -> np.ndarray:
    """Consumed fraction = ledger damage since the rebuild (a1 = 1) / a1 [-]."""
    return np.asarray(damage, float) / a1


def damage_rate_from_totals(damage: np.ndarray, hours: np.ndarray, a1: float) -> np.ndarray:
    """Window damage / a1 / window operating hours [1/h]; NaN without hours."""
    h = np.asarray(hours, float)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(h > 0, np.asarray(damage, float) / a1 / h, np.nan)


def utilisation_from_totals(meter_hours: np.ndarray, days: float) -> np.ndarray:
    """Hour-meter hours of uploads ending in the period / its length [h/d]."""
    return np.asarray(meter_hours, float) / float(days)


def limiting_modes(bearing: np.ndarray, wear_h: np.ndarray) -> tuple[np.ndarray, list]:
    """The smaller of the two estimates per row (the one definition; :func:`limiting_mode` is
    its scalar form): the smaller of the two
    estimates [h] (nan: neither) and "bearing" (also on a tie), "wear" or None."""
    no_b, no_w = np.isnan(bearing), np.isnan(wear_h)
    with np.errstate(invalid="ignore"):
        use_b = no_w | (~no_b & (bearing <= wear_h))
    names = np.where(use_b, "bearing", "wear").astype(object)
    names[no_b & no_w] = None
    return np.where(no_b & no_w, np.nan, np.where(use_b, bearing, wear_h)), names.tolist()


def due_dates(as_of: date, remaining_h: np.ndarray, util: np.ndarray) -> list:
    """Due date per row, ``as_of + floor(remaining / utilisation)`` days; None without an
    estimate, utilisation or a finite date (the one definition; :func:`due_date` is its
    scalar form)."""
    if isinstance(as_of, datetime) or not isinstance(as_of, date):
        raise ValueError(f"as_of must be a datetime.date (a day), got {as_of!r}")
    with np.errstate(invalid="ignore", divide="ignore"):
        ok = ~np.isnan(remaining_h) & (util > 0)
        days = np.maximum(remaining_h, 0.0) / np.where(ok, util, 1.0)
        ok &= np.isfinite(days) & (days < (date.max - as_of).days)
    out: list = [None] * remaining_h.size
    start = as_of.toordinal()
    for i, d in zip(np.flatnonzero(ok).tolist(), np.floor(days[ok]).tolist(), strict=True):
        out[i] = date.fromordinal(start + int(d))
    return out
