"""Use cases of the stored settings: read, validate and store them; the ledger's compute
function with the settings it depends on; whether the ledger is stale."""

from __future__ import annotations

import copy
from functools import partial

from monitor.store import db, queries
from monitor.store.db import Engine
from monitor.usecases.common import DomainError

DEFAULT_SETTINGS: dict = {
    "reliability_pct": 90.0,
    "rate_window_h": 500.0,
    "stale_days": 14,
    "status_limits": {"overdue_h": 0.0, "due_h": 250.0, "plan_h": 1000.0},
    "utilisation_days": 30,
    "case_drain_step_factor": 1.5,
    "heavy_relief_fraction": 0.01,
    "min_wear_readings": 3,
    "case_drain_step_min_before": 4,
    "case_drain_temp_distance_k": 20.0,
    "case_drain_dp_ratio_min": 0.5,
    "case_drain_dp_ratio_max": 2.0,
    "band_pressure": "midpoint",
    "life_before_data_h": 50.0,
}
"""Settings used where none are stored (``save_settings`` stores overrides)."""

LEDGER_SETTINGS = ("band_pressure",)
"""Settings the damage ledger is computed with: changing one makes the ledger stale until
``recompute`` (the others act when a status is read)."""

BAND_PRESSURE_CHOICES = ("midpoint", "upper")
"""The pressure a histogram band stands for: its midpoint, or its upper edge (cautious)."""

STALE_KEY = "ledger_stale"
"""Stored flag: the ledger was computed with other settings (or an older model) than
those in force; ``recompute`` clears it."""

RECOMPUTE_NEEDED = (
    "the damage ledger was computed with other settings than those now in force: run "
    "`drivespan recompute` (or Recompute on the dashboard's Settings page) so that every "
    "upload is counted with the new setting"
)


def get_settings(engine: Engine) -> dict:
    """Status settings: :data:`DEFAULT_SETTINGS` overlaid with the stored values."""
    with engine.connect() as conn:
        stored = queries.get_settings(conn)
    out = copy.deepcopy(DEFAULT_SETTINGS)
    for key, value in stored.items():
        if key == "status_limits" and isinstance(value, dict):
            out[key] = {**out[key], **value}
        elif key in out:
            out[key] = value
    return out


def save_settings(engine: Engine, values: dict) -> dict:
    """Validate and store status settings; return the settings now in force.

    Raises DomainError naming the field if a value is out of range.
    """
    merged = {**get_settings(engine), **values}
    if "status_limits" in values:
        if not isinstance(values["status_limits"], dict):
            raise DomainError(
                "status_limits must give overdue_h, due_h and plan_h in hours, "
                f"got {values['status_limits']!r}"
            )
        merged["status_limits"] = {
            **get_settings(engine)["status_limits"],
            **values["status_limits"],
        }
    unknown = sorted(set(values) - set(DEFAULT_SETTINGS))
    if unknown:
        raise DomainError(
            f"unknown setting(s) {', '.join(unknown)}: known are {', '.join(DEFAULT_SETTINGS)}"
        )
    params = _status_params(merged)  # raises DomainError on a bad value
    ledger = {k: _ledger_setting(k, values[k]) for k in LEDGER_SETTINGS if k in values}
    checked = {k: getattr(params, k) for k in values if k != "status_limits" and k not in ledger}
    if "status_limits" in values:
        checked["status_limits"] = dict(params.status_limits)
    before = get_settings(engine)
    with db.transaction(engine) as conn:
        queries.put_settings(conn, {**checked, **ledger})  # numbers stored as numbers
        if any(before[k] != v for k, v in ledger.items()) and queries.any_ledger_row(conn):
            queries.put_settings(conn, {STALE_KEY: True})
    return get_settings(engine)


def _ledger_setting(key: str, value: object) -> str:
    if key == "band_pressure" and value not in BAND_PRESSURE_CHOICES:
        raise DomainError(
            f"band_pressure must be one of {', '.join(BAND_PRESSURE_CHOICES)} (the pressure a "
            f"histogram band stands for), got {value!r}"
        )
    return str(value)


def ledger_stale(engine: Engine) -> bool:
    """True when the ledger must be recomputed to follow the settings in force."""
    with engine.connect() as conn:
        return bool(queries.get_settings(conn).get(STALE_KEY, False))


def ledger_band_pressure(conn) -> str:  # noqa: ANN001 - a Connection
    """The band pressure rule in force (stored setting, else the default)."""
    return queries.get_settings(conn).get("band_pressure", DEFAULT_SETTINGS["band_pressure"])


def ledger_compute(conn) -> partial:  # noqa: ANN001 - a Connection
    """The ledger's compute function with the stored settings it depends on bound."""
    from monitor.ledger.batch_metrics import batch_metrics

    return partial(batch_metrics, band_pressure=ledger_band_pressure(conn))


def mark_ledger_current(conn) -> None:  # noqa: ANN001 - a Connection
    """After a whole recompute: the ledger follows the settings in force."""
    queries.delete_settings(conn, [STALE_KEY])


def _positive(settings: dict, key: str, what: str) -> float:
    if isinstance(settings[key], bool):
        raise DomainError(f"{key} must be a number ({what}), got {settings[key]!r}")
    try:
        v = float(settings[key])
    except (TypeError, ValueError):
        raise DomainError(f"{key} must be a number ({what}), got {settings[key]!r}") from None
    if not (v > 0) or v != v or v == float("inf"):
        raise DomainError(f"{key} must be a positive number ({what}), got {settings[key]!r}")
    return v


def _status_params(settings: dict):  # noqa: ANN202 - fleet.StatusParams
    from monitor import fleet
    from monitor.models import bearings

    lo, hi = bearings.RELIABILITY_RANGE_PCT
    r = _positive(settings, "reliability_pct", "planning reliability in %")
    if not (lo <= r <= hi):
        raise DomainError(
            f"reliability_pct must be between {lo:g} and {hi:g} % "
            f"(ISO 281 gives no factor a1 outside that range), got {r:g}"
        )
    limits = settings["status_limits"]
    if not isinstance(limits, dict):
        raise DomainError(
            f"status_limits must give overdue_h, due_h and plan_h in hours, got {limits!r}"
        )
    try:
        lim = {k: float(limits[k]) for k in ("overdue_h", "due_h", "plan_h")}
    except (KeyError, TypeError, ValueError):
        raise DomainError(
            f"status_limits must give numbers overdue_h, due_h and plan_h in hours, got {limits!r}"
        ) from None
    if not (lim["overdue_h"] < lim["due_h"] < lim["plan_h"]):
        raise DomainError(f"status_limits must be ordered overdue_h < due_h < plan_h, got {lim}")
    step = _positive(settings, "case_drain_step_factor", "a multiple of the fitted level")
    frac = _positive(settings, "heavy_relief_fraction", "a share of operating hours")
    n = settings["min_wear_readings"]
    if not isinstance(n, int) or isinstance(n, bool) or n < 3:
        raise DomainError(
            f"min_wear_readings must be a whole number >= 3 (a Theil-Sen "
            f"trend needs three readings), got {n!r}"
        )
    if step <= 1 or frac >= 1:
        raise DomainError("case_drain_step_factor must be > 1 and heavy_relief_fraction < 1")
    return fleet.StatusParams(
        **_wear_reference(settings),
        reliability_pct=r,
        rate_window_h=_positive(settings, "rate_window_h", "operating hours"),
        utilisation_days=_positive(settings, "utilisation_days", "calendar days"),
        stale_days=_positive(settings, "stale_days", "calendar days"),
        status_limits=lim,
        case_drain_step_factor=step,
        heavy_relief_fraction=frac,
        min_wear_readings=n,
        life_before_data_h=_positive(settings, "life_before_data_h", "an hour meter reading"),
    )


def _wear_reference(settings: dict) -> dict:
    """The step and reference-condition settings of the wear trend, checked."""
    before = settings["case_drain_step_min_before"]
    if not isinstance(before, int) or isinstance(before, bool) or before < 3:
        raise DomainError(
            "case_drain_step_min_before must be a whole number >= 3 (readings before the "
            f"latest that the step flag compares with), got {before!r}"
        )
    dist = _positive(settings, "case_drain_temp_distance_k", "a temperature distance in K")
    lo = _positive(settings, "case_drain_dp_ratio_min", "test pressure over reference")
    hi = _positive(settings, "case_drain_dp_ratio_max", "test pressure over reference")
    if not (lo <= 1.0 <= hi):
        raise DomainError(
            "case_drain_dp_ratio_min must be <= 1 and case_drain_dp_ratio_max >= 1 (a "
            f"reading at the reference pressure is always trended), got {lo:g} and {hi:g}"
        )
    return {
        "case_drain_step_min_before": before,
        "case_drain_temp_distance_k": dist,
        "case_drain_dp_ratio_min": lo,
        "case_drain_dp_ratio_max": hi,
    }


def _params_for(engine: Engine, reliability_pct: float | None, rate_window_h: float | None):  # noqa: ANN202
    settings = get_settings(engine)
    if reliability_pct is not None:
        settings["reliability_pct"] = reliability_pct
    if rate_window_h is not None:
        settings["rate_window_h"] = rate_window_h
    return _status_params(settings)
