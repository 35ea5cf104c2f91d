"""An independent re-statement of the life model over per-upload arrays (design brief,
"Life model v1"): the oracle that the ranking's running-total arithmetic
(:mod:`monitor.models.lifecycle`, :mod:`monitor.fleet.status`) is tested against. Not part
of the package."""

from __future__ import annotations

import math
from dataclasses import dataclass
from datetime import UTC, date, datetime, time, timedelta

import numpy as np

from monitor.models.lifecycle import RATE_WINDOW_H, UTILISATION_WINDOW_DAYS, remaining_bearing_h


def _day_start(as_of: date) -> datetime:
    if isinstance(as_of, datetime) or not isinstance(as_of, date):
        raise ValueError(f"as_of must be a datetime.date (a day), got {as_of!r}")
    return datetime.combine(as_of, time(0), tzinfo=UTC)


@dataclass(frozen=True)
class BearingLife:
    """Bearing-life state of one component since its last rebuild.

    Attributes
    ----------
    consumed : float
        Consumed fraction of the L10 life [-] (sum of damage / life factor).
    rate_per_h : float
        Recent damage rate [1/h]; nan without recent operating hours.
    window_h : float
        Operating hours the rate was taken over [h].
    remaining_h : float
        Remaining bearing hours [h]; nan = no estimate, inf = no damage accrues.
    """

    consumed: float
    rate_per_h: float
    window_h: float
    remaining_h: float


def _damage_hours(damage: np.ndarray, hours: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    d = np.asarray(damage, dtype=float).ravel()
    h = np.asarray(hours, dtype=float).ravel()
    if d.shape != h.shape:
        raise ValueError(f"damage and hours must have equal length, got {d.size} and {h.size}")
    if not (np.all(np.isfinite(h)) and np.all(h >= 0)):
        raise ValueError("hours must be finite operating hours >= 0 for every upload")
    if np.any(d < 0):
        raise ValueError("damage must be >= 0 for every upload")
    return d, h


def damage_rate_per_h(
    damage: np.ndarray, hours: np.ndarray, *, rate_window_h: float = RATE_WINDOW_H
) -> tuple[float, float]:
    """Damage rate over the most recent uploads that make up the rate window.

    Parameters
    ----------
    damage : array (n,)
        Damage of each upload since the last rebuild, oldest first [-].
    hours : array (n,)
        Operating hours of each upload [h].
    rate_window_h : float, default 500
        Operating hours the rate is taken over [h].

    Returns
    -------
    tuple of float
        (rate [1/h], hours used [h]); rate is nan when the uploads hold no hours.

    Notes
    -----
    Take the fewest most recent uploads whose hours add up to at least the window (all
    uploads if they add up to less): ``rate = sum D_k / sum t_k`` over those uploads.

    References
    ----------
    Design brief, "Life model v1" (damage rate).
    """
    if not (rate_window_h > 0):
        raise ValueError(f"rate_window_h must be > 0 h, got {rate_window_h!r}")
    d, h = _damage_hours(damage, hours)
    back = np.cumsum(h[::-1])
    reached = np.nonzero(back >= rate_window_h)[0]
    k = int(reached[0]) + 1 if reached.size else h.size
    used_h = float(h[h.size - k :].sum())
    if used_h <= 0:
        return math.nan, 0.0
    return float(d[d.size - k :].sum()) / used_h, used_h


def bearing_life(
    damage: np.ndarray,
    hours: np.ndarray,
    *,
    rate_window_h: float = RATE_WINDOW_H,
    life_factor: float = 1.0,
) -> BearingLife:
    """Consumed fraction, damage rate and remaining hours of one component.

    Parameters
    ----------
    damage : array (n,)
        Damage of each upload since the last rebuild at ``a = 1``, oldest first [-].
    hours : array (n,)
        Operating hours of each upload [h].
    rate_window_h : float, default 500
        Rate window [h].
    life_factor : float, default 1
        Life factor applied afterwards, e.g. a1 for the planning reliability [-]; the
        damage is divided by it.

    Returns
    -------
    BearingLife
        See the class; no uploads or no hours give ``remaining_h`` nan.

    Notes
    -----
    ``consumed = sum D / a``; ``rate`` from :func:`damage_rate_per_h` divided by ``a``;
    ``remaining = max(0, 1 - consumed) / rate``.

    References
    ----------
    Design brief, "Life model v1"; ISO 281:2007 for a1.
    """
    if not (life_factor > 0):
        raise ValueError(f"life_factor must be > 0, got {life_factor!r}")
    d, h = _damage_hours(damage, hours)
    rate, used = damage_rate_per_h(d, h, rate_window_h=rate_window_h)
    consumed = float(d.sum()) / life_factor
    rate = rate / life_factor
    return BearingLife(consumed, rate, used, float(remaining_bearing_h(consumed, rate)))


def utilisation_h_per_day(
    period_end: list[datetime] | tuple[datetime, ...],
    meter_hours: np.ndarray,
    as_of: date,
    *,
    window_days: int = UTILISATION_WINDOW_DAYS,
) -> float:
    """Recent utilisation: hour-meter hours per calendar day.

    Parameters
    ----------
    period_end : list or tuple of datetime
        End of each upload's period, timezone-aware.
    meter_hours : array (n,)
        Hour-meter hours of each upload (end minus start) [h].
    as_of : datetime.date
        The as-of day; data that ended before its start (00:00 UTC) count.
    window_days : int, default 30
        Length of the window [d].

    Returns
    -------
    float
        Utilisation [h/d]; 0.0 when no upload ended in the window.

    Notes
    -----
    ``u = sum t_k / window_days`` over uploads with
    ``as_of 00:00 - window_days < end <= as_of 00:00``: data up to the start of the
    as-of day count, so an upload ending exactly at midnight is in (the same rule as
    the fleet status's running totals).

    References
    ----------
    Design brief, "Life model v1" (utilisation).
    """
    start = _day_start(as_of)
    if not (isinstance(window_days, int) and window_days > 0):
        raise ValueError(f"window_days must be a whole number of days > 0, got {window_days!r}")
    h = np.asarray(meter_hours, dtype=float).ravel()
    if len(period_end) != h.size:
        raise ValueError("period_end and meter_hours must have equal length")
    if not (np.all(np.isfinite(h)) and np.all(h >= 0)):
        raise ValueError("meter_hours must be finite hours >= 0 for every upload")
    if any(t.tzinfo is None for t in period_end):
        raise ValueError("period_end must hold timezone-aware datetimes (UTC)")
    begin = start - timedelta(days=window_days)
    inside = np.array([begin < t <= start for t in period_end], dtype=bool)
    return float(h[inside].sum()) / window_days if h.size else 0.0


def limiting_mode(bearing_h: float, wear_h: float) -> tuple[float, str | None]:
    """The smaller estimate and its name, one row at a time; a tie is "bearing"."""
    if math.isnan(bearing_h) and math.isnan(wear_h):
        return math.nan, None
    if math.isnan(wear_h) or (not math.isnan(bearing_h) and bearing_h <= wear_h):
        return float(bearing_h), "bearing"
    return float(wear_h), "wear"


def due_date(as_of: date, remaining_h: float, utilisation_h_per_day: float) -> date | None:
    """``as_of + floor(remaining / utilisation)`` days, one row at a time."""
    _day_start(as_of)
    if math.isnan(remaining_h) or not (utilisation_h_per_day > 0):
        return None
    days = max(remaining_h, 0.0) / utilisation_h_per_day
    if not math.isfinite(days) or days >= (date.max - as_of).days:
        return None
    return as_of + timedelta(days=math.floor(days))
