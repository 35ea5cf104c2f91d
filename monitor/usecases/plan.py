"""Use cases of the rebuild plan: its stored settings and a plan for an as-of date.

The plan itself is computed by the pure :mod:`monitor.planning` on the fleet status
from :func:`monitor.usecases.status.fleet_status`; this module only keeps the shop's
settings (weekly capacity, per-site capacity, exchange stock, turnaround, pairing)
in the store and turns bad values into one clear :class:`~monitor.usecases.common.DomainError`.
"""

from __future__ import annotations

import copy
from datetime import date

from monitor import planning
from monitor.store import db, queries
from monitor.store.db import Engine
from monitor.usecases.common import DomainError, _today
from monitor.usecases.status import fleet_status

PLAN_KEY = "plan"
MAX_HORIZON_WEEKS = 260
_UNSET = object()
DEFAULT_PLAN_SETTINGS: dict = {
    "horizon_weeks": 12,
    "capacity_per_week": 3,
    "site_capacity": {},
    "exchange_stock": {},
    "turnaround_days": 21.0,
    "pair_within_h": 500.0,
}
"""Plan settings used where none are stored (common practice, no source: a small
shop doing a few closed-loop rebuilds a week with a three-week core turnaround)."""


def get_plan_settings(engine: Engine) -> dict:
    """Plan settings: :data:`DEFAULT_PLAN_SETTINGS` overlaid with the stored ones."""
    with engine.connect() as conn:
        stored = queries.get_settings(conn).get(PLAN_KEY, {})
    out = copy.deepcopy(DEFAULT_PLAN_SETTINGS)
    out.update({k: v for k, v in stored.items() if k in out})
    return out


def _checked(values: dict) -> dict:
    unknown = sorted(set(values) - set(DEFAULT_PLAN_SETTINGS))
    if unknown:
        raise DomainError(
            f"unknown plan setting(s) {', '.join(unknown)}: known are "
            f"{', '.join(DEFAULT_PLAN_SETTINGS)}"
        )
    for key in ("site_capacity", "exchange_stock"):
        if values.get(key) is not None and not isinstance(values[key], dict):
            raise DomainError(
                f"{key} must map names to whole numbers, e.g. {{'DS-P90': 2}}, got {values[key]!r}"
            )
    horizon = values.get("horizon_weeks")
    if isinstance(horizon, (int, float)) and horizon > MAX_HORIZON_WEEKS:
        raise DomainError(
            f"horizon_weeks must be at most {MAX_HORIZON_WEEKS} weeks (five years), got {horizon!r}"
        )
    try:
        planning.make_settings(_today(), **_plan_kwargs(values))
    except (ValueError, TypeError) as err:
        raise DomainError(f"plan settings rejected: {err}") from None
    return values


def _plan_kwargs(s: dict) -> dict:
    stock = dict(s.get("exchange_stock") or {})
    turnaround = s.get("turnaround_days")
    return dict(
        horizon_weeks=s["horizon_weeks"],
        capacity_per_week=s["capacity_per_week"],
        site_capacity=dict(s.get("site_capacity") or {}) or None,
        exchange_stock=stock or None,
        turnaround_days=turnaround if stock else None,
        pair_within_h=s.get("pair_within_h"),
    )


def save_plan_settings(engine: Engine, values: dict) -> dict:
    """Validate and store plan settings; return the settings now in force."""
    merged = {**get_plan_settings(engine), **values}
    _checked(merged)
    with db.transaction(engine) as conn:
        queries.put_settings(conn, {PLAN_KEY: merged})
    return get_plan_settings(engine)


def make_plan(
    engine: Engine,
    as_of: date | None = None,
    *,
    reliability_pct: float | None = None,
    horizon_weeks: int | None = None,
    capacity_per_week: int | None = None,
    site_capacity: dict | None = None,
    exchange_stock: dict | None = None,
    turnaround_days: float | dict | None = None,
    pair_within_h: float | None | object = _UNSET,
    **unknown: object,
) -> planning.Plan:
    """The rebuild plan at ``as_of`` (default today) with the stored settings.

    Arguments given (not None) override the stored settings for this plan only;
    ``pair_within_h=None`` turns pairing off for this plan.
    """
    if unknown:
        _checked(unknown)  # raises DomainError naming the unknown setting(s)
    given = dict(
        horizon_weeks=horizon_weeks,
        capacity_per_week=capacity_per_week,
        site_capacity=site_capacity,
        exchange_stock=exchange_stock,
        turnaround_days=turnaround_days,
    )
    settings = {**get_plan_settings(engine), **{k: v for k, v in given.items() if v is not None}}
    if pair_within_h is not _UNSET:
        settings["pair_within_h"] = pair_within_h
    _checked(settings)
    as_of = as_of or _today()
    status = fleet_status(engine, as_of, reliability_pct=reliability_pct)
    try:
        return planning.plan_rebuilds(status, as_of, **_plan_kwargs(settings))
    except ValueError as err:
        raise DomainError(f"plan rejected: {err}") from None
