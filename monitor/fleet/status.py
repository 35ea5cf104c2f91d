"""Fleet status: per-component remaining life, due dates, flags and the ranking.

Pure: DataFrames in, a status DataFrame out. The inputs are the ledger running
totals at a few points in time (see :mod:`monitor.store.status_reads`) and the case-drain
readings of each component's current life; the life arithmetic follows the life
model v1 of the design brief (consumed fraction, damage rate over the rate window,
remaining bearing hours, normalised case-drain trend, utilisation, due date). The
case-drain wear columns come from :mod:`monitor.fleet.wear_status`.

All numbers are estimates. The makers' service limits, local codes and qualified
technicians decide when a drive is rebuilt.
"""

from __future__ import annotations

import math
from datetime import date, datetime

import numpy as np
import pandas as pd

from monitor.fleet.params import (
    FLAGS,
    LIFE_BEFORE_SOURCES,
    RANK_COLUMNS,
    STATUS_COLUMNS,
    StatusParams,
    as_of_instant,
)
from monitor.fleet.wear_status import wear_frame
from monitor.models import bearings, lifecycle

# --- bearing life ----------------------------------------------------------------------


def _window_lower(df: pd.DataFrame) -> dict[str, np.ndarray]:
    """Rate-window start (``lo_<cum column>``): the window row, clamped so it is never
    before the rebuild."""
    out = {}
    win_h = df["win_cum_hours"].to_numpy(float)
    base_h = np.nan_to_num(df["base_cum_hours"].to_numpy(float), nan=0.0)
    use_base = np.isnan(win_h) | (win_h < base_h)
    for t in (
        "cum_hours",
        "cum_damage",
        "cum_meter_hours",
        "cum_relief_hours",
        "cum_cutoff_hours",
        "cum_relief_heat_kwh",
    ):
        w = df[f"win_{t}"].to_numpy(float)
        b = df[f"base_{t}"].to_numpy(float)
        out[f"lo_{t}"] = np.where(use_base, b, w)
    return out


def _diff(df: pd.DataFrame, col: str, lower: str, lo: dict | None = None) -> np.ndarray:
    """now_<col> - <lower>_<col>, with a missing lower point read as zero (``lower`` "lo":
    the window start of :func:`_window_lower`, given as ``lo``)."""
    now = df[f"now_{col}"].to_numpy(float)
    low = lo[f"lo_{col}"] if lower == "lo" else df[f"{lower}_{col}"].to_numpy(float)
    return np.where(np.isnan(now), 0.0, now - np.nan_to_num(low, nan=0.0))


def bearing_frame(inputs: pd.DataFrame, params: StatusParams) -> pd.DataFrame:
    """Consumed fraction, damage rate and remaining bearing hours per component.

    Parameters
    ----------
    inputs : pandas.DataFrame
        Rows of :func:`monitor.store.status_reads.status_inputs` (``now_*``, ``base_*``,
        ``win_*``, ``month_*`` running totals).
    params : StatusParams
        Reliability [%], window [h] and utilisation period [d].

    Returns
    -------
    pandas.DataFrame
        ``hours_since_rebuild [h], consumed_fraction [-], damage_rate_per_h [1/h],
        remaining_bearing_h [h], window_hours [h], relief_hours [h], cutoff_hours [h],
        relief_heat_kwh [kWh], utilisation_h_per_day [h/d]`` aligned with ``inputs``.

    Notes
    -----
    The ledger holds damage at a1 = 1, so damage at the planning reliability is the
    ledger damage divided by a1 (ISO 281:2007, reliability factor).
    """
    a1 = float(bearings.reliability_factor(params.reliability_pct))
    lo = _window_lower(inputs)
    before = life_before_data(inputs, params)
    damage_life = _diff(inputs, "cum_damage", "base") + before["damage"]
    win_hours = _diff(inputs, "cum_hours", "lo", lo)
    win_damage = _diff(inputs, "cum_damage", "lo", lo)
    consumed = lifecycle.consumed_fraction(damage_life, a1)
    rate = lifecycle.damage_rate_from_totals(win_damage, win_hours, a1)
    return pd.DataFrame(
        {
            "hours_since_rebuild": _diff(inputs, "cum_meter_hours", "base") + before["hours"],
            "life_before_data": before["source"],
            "kappa_floor_hours": (
                _diff(inputs, "cum_kappa_floor_hours", "base")
                if "now_cum_kappa_floor_hours" in inputs
                else np.zeros(len(inputs))
            ),
            "consumed_fraction": consumed,
            "damage_rate_per_h": rate,
            "remaining_bearing_h": lifecycle.remaining_bearing_h(consumed, rate),
            "window_hours": win_hours,
            "relief_hours": _diff(inputs, "cum_relief_hours", "lo", lo),
            "cutoff_hours": _diff(inputs, "cum_cutoff_hours", "lo", lo),
            "relief_heat_kwh": _diff(inputs, "cum_relief_heat_kwh", "lo", lo),
            "utilisation_h_per_day": lifecycle.utilisation_from_totals(
                _diff(inputs, "cum_meter_hours", "month"), params.utilisation_days
            ),
        },
        index=inputs.index,
    )


def life_before_data(inputs: pd.DataFrame, params: StatusParams) -> dict[str, np.ndarray]:
    """Life used before a drive's first upload, per component: damage [-] (a1 = 1), hour
    meter hours [h] and how it was counted (:data:`LIFE_BEFORE_SOURCES`).

    Only without a recorded rebuild: with ``consumed_at_first_upload`` ``f`` the damage is
    ``f``; with ``last_rebuild_hour_meter`` ``H`` it is ``(H0 - H) d30 / h30``, the hours
    from that rebuild to the first upload's hour meter ``H0`` at the damage ``d30`` per
    hour-meter hour ``h30`` of the first 30 logged days (hours ``H0 - H``); otherwise
    nothing, and "unknown" when ``H0`` is above ``life_before_data_h``.
    """
    n = len(inputs)
    no_rebuild = np.ones(n, bool)
    if "rebuilt_at" in inputs:
        no_rebuild = inputs["rebuilt_at"].isna().to_numpy()
    first = _col(inputs, "first_hour_meter")
    frac = _col(inputs, "consumed_at_first_upload")
    last = _col(inputs, "last_rebuild_hour_meter")
    with np.errstate(divide="ignore", invalid="ignore"):
        rate = _col(inputs, "early_damage") / _col(inputs, "early_meter_hours")
    gap = np.maximum(first - last, 0.0)
    use_frac = no_rebuild & ~np.isnan(frac)
    use_last = no_rebuild & ~use_frac & ~np.isnan(last) & np.isfinite(rate) & ~np.isnan(first)
    unknown = no_rebuild & ~use_frac & ~use_last & (first > params.life_before_data_h)
    source = np.where(no_rebuild, LIFE_BEFORE_SOURCES[1], LIFE_BEFORE_SOURCES[0]).astype(object)
    source[use_frac], source[use_last] = LIFE_BEFORE_SOURCES[2], LIFE_BEFORE_SOURCES[3]
    source[unknown] = LIFE_BEFORE_SOURCES[4]
    return {
        "damage": np.where(use_frac, frac, 0.0) + np.where(use_last, gap * rate, 0.0),
        "hours": np.where(use_last, gap, np.zeros(n)),
        "source": source,
    }


def oil_columns(inputs: pd.DataFrame) -> dict[str, np.ndarray]:
    """What the oil-condition factor of each drive's latest upload used: oil temperature
    [degC] and its source, the ISO 281 contamination level (the site's, else the oil's,
    else the default) and its eC [-]; None where the model has no bearing data."""
    n = len(inputs)
    pitch = _col(inputs, "m_bearing_pitch_diameter_mm")
    has = ~np.isnan(pitch)
    none = pd.Series([None] * n, index=inputs.index)
    site = inputs.get("site_contamination_level", none)
    oil = inputs.get("oil_contamination_level", none)
    level = np.full(n, None, dtype=object)
    ec = np.full(n, np.nan)
    for i in np.flatnonzero(has).tolist():
        lv = site.iat[i] or oil.iat[i] or bearings.DEFAULT_CONTAMINATION_LEVEL
        level[i] = lv
        key = bearings.CONTAMINATION_LEVEL_NAMES[lv]
        ec[i] = bearings.contamination_factor(key, float(pitch[i]))
    source = inputs.get("now_oil_factor_source", none).to_numpy(object)
    return {
        "oil_temp_c": _col(inputs, "now_oil_temp_c"),
        "oil_factor_source": np.where(has, source, None),
        "contamination_level": level,
        "contamination_ec": ec,
    }


def _col(df: pd.DataFrame, name: str) -> np.ndarray:
    return df[name].to_numpy(float) if name in df else np.full(len(df), np.nan)


STATUS_BANDS = (*lifecycle.STATUS_BANDS, lifecycle.NO_ESTIMATE)
"""Status band names, most urgent first, then the no-estimate band."""


# --- assembling the status -------------------------------------------------------------


_FLAG_SETS = tuple(
    tuple(name for bit, name in enumerate(FLAGS) if code >> bit & 1)
    for code in range(2 ** len(FLAGS))
)
"""The flags of each code (bit i set: ``FLAGS[i]`` is raised)."""


def _flags(df: pd.DataFrame, params: StatusParams) -> list[list[str]]:
    """Each row's raised flags, in the order of :data:`FLAGS` (a new list per row)."""
    wh, rh = df["window_hours"].to_numpy(float), df["relief_hours"].to_numpy(float)
    frac = np.where(wh > 0, rh / np.where(wh > 0, wh, 1.0), 0.0)
    age = df["data_age_days"].to_numpy(float)
    stale = np.isnan(age) | (age > params.stale_days)
    relief = ~df["has_cutoff"].to_numpy(bool) & (frac > params.heavy_relief_fraction)
    # too few trended readings for a trend, or for its range at the stated level
    few = ~np.isnan(df["case_drain_limit_lpm"].to_numpy(float)) & (
        (df["n_wear_readings"].to_numpy() < params.min_wear_readings)
        | df["wear_range_short"].to_numpy(bool)
    )
    step = df["case_drain_step"].to_numpy(bool)
    off = df["n_wear_readings_off"].to_numpy() > 0
    no_oil = (df["oil_factor_source"] == "none").to_numpy(bool)
    floor = df["kappa_floor_hours"].to_numpy(float) > 0
    before = (df["life_before_data"] == LIFE_BEFORE_SOURCES[4]).to_numpy(bool)
    code = stale.astype(int) + 2 * step + 4 * relief + 8 * few + 16 * off
    code = code + 32 * no_oil + 64 * floor + 128 * before
    return [list(_FLAG_SETS[c]) for c in code.tolist()]


def _objects(values: list) -> pd.Series:
    """A column that keeps None, dates and lists as they are (no dtype inference)."""
    out = np.empty(len(values), dtype=object)
    out[:] = values
    return pd.Series(out, dtype=object)


def fleet_status(
    inputs: pd.DataFrame,
    readings: pd.DataFrame,
    as_of: date,
    params: StatusParams,
    *,
    at: datetime | None = None,
) -> pd.DataFrame:
    """Status of every component at the start of ``as_of``, most urgent first.

    Parameters
    ----------
    inputs : pandas.DataFrame
        Rows of :func:`monitor.store.status_reads.status_inputs` (component, model, oil,
        ledger points).
    readings : pandas.DataFrame
        :func:`monitor.store.status_reads.readings_in_life` rows.
    as_of : datetime.date
        The as-of day.
    params : StatusParams
        Settings.
    at : datetime.datetime, optional
        The instant the data were read at [UTC] (data age counts from it); default the
        start of ``as_of``.

    Returns
    -------
    pandas.DataFrame
        Columns :data:`STATUS_COLUMNS` (hours [h], rate [1/h], utilisation [h/d],
        heat [kWh], flows [L/min], data age [d]); NaN where there is no estimate.
    """
    if inputs.empty:
        return pd.DataFrame(columns=list(STATUS_COLUMNS))
    inputs = inputs.reset_index(drop=True)
    df = pd.concat([bearing_frame(inputs, params), wear_frame(inputs, readings, params)], axis=1)
    last = pd.to_datetime(inputs["now_period_end"], utc=True)
    stamps = last.array.to_pydatetime().astype(object)
    stamps[last.isna().to_numpy()] = None
    extra = {
        "last_upload_at": _objects(list(stamps)),
        "data_age_days": (pd.Timestamp(at or as_of_instant(as_of)) - last)
        .dt.total_seconds()
        .to_numpy()
        / 86400.0,
        "has_cutoff": inputs["m_cutoff_bar"].notna().to_numpy(),
        **oil_columns(inputs),
    }
    df = pd.concat([df, pd.DataFrame(extra)], axis=1)
    rem, lim = lifecycle.limiting_modes(
        df["remaining_bearing_h"].to_numpy(float), df["remaining_wear_h"].to_numpy(float)
    )
    util = df["utilisation_h_per_day"].to_numpy(float)
    extra = {
        "flags": _objects(_flags(df, params)),
        "remaining_h": rem,
        "limiting": _objects(lim),
        "status": lifecycle.status_band(rem, **params.status_limits),
        "due_date": _objects(lifecycle.due_dates(as_of, rem, util)),
        "hour_meter": inputs["now_hour_meter_end"].to_numpy(float),
        **{c: inputs[c].to_numpy() for c in ("unit", "site", "position", "machine_type")},
        "component_id": inputs["component_id"].to_numpy(),
        "component_model": inputs["m_name"].to_numpy(),
    }
    df = pd.concat([df, pd.DataFrame(extra)], axis=1)
    return sort_status(df[list(STATUS_COLUMNS)])


_NO_DUE = date.max.toordinal() + 1
"""Sort key of a missing due date: after every calendar day."""


def sort_status(df: pd.DataFrame) -> pd.DataFrame:
    """Most urgent first: remaining hours ascending (no estimate last), then due date,
    unit tag and position."""
    key = pd.DataFrame(
        {
            "n": df["remaining_h"].isna(),
            "r": df["remaining_h"].fillna(np.inf),
            "d": [d.toordinal() if d is not None else _NO_DUE for d in df["due_date"]],
            "u": df["unit"],
            "p": df["position"],
        }
    )
    order = key.sort_values(["n", "r", "d", "u", "p"], kind="stable").index
    return df.loc[order].reset_index(drop=True)


def plain_value(v: object) -> object:
    if v is None:
        return None
    if isinstance(v, (list, tuple)):
        return [str(x) for x in v]
    if isinstance(v, (datetime, pd.Timestamp)):
        return None if pd.isna(v) else pd.Timestamp(v).isoformat()
    if isinstance(v, date):
        return v.isoformat()
    if isinstance(v, (np.bool_, bool)):
        return bool(v)
    if isinstance(v, (np.integer,)):
        return int(v)
    if isinstance(v, (float, np.floating)):
        return float(v) if math.isfinite(v) else None
    return v


def _plain_column(col: pd.Series) -> list:
    """:func:`plain_value` of every value of a column, with fast paths by dtype."""
    if pd.api.types.is_float_dtype(col.dtype):
        return [v if math.isfinite(v) else None for v in col.to_numpy(float).tolist()]
    if pd.api.types.is_bool_dtype(col.dtype) or pd.api.types.is_integer_dtype(col.dtype):
        return col.to_numpy().tolist()
    return [_plain_object(v) for v in col.tolist()]


def _plain_object(v: object) -> object:
    """:func:`plain_value` with the status frame's object values (text, None, days, UTC
    times, flag lists) looked up by exact type first."""
    t = type(v)
    if t is str or v is None:
        return v
    if t is date or t is datetime:  # a plain datetime is never NaT: same text as Timestamp's
        return v.isoformat()
    if t is list:
        return [str(x) for x in v]
    return plain_value(v)


def rank_records(df: pd.DataFrame) -> list[dict]:
    """JSON-ready records with exactly :data:`RANK_COLUMNS` (NaN/inf -> None, ISO dates)."""
    cols = [_plain_column(df[k]) for k in RANK_COLUMNS]
    return [dict(zip(RANK_COLUMNS, vals, strict=True)) for vals in zip(*cols, strict=True)]
