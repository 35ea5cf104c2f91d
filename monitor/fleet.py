"""Fleet status: per-component remaining life, due dates, flags and the ranking.

Pure: DataFrames in, a status DataFrame out. The inputs are the ledger running
totals at a few points in time (see :mod:`monitor.snapshot`) and the case-drain
readings of each component's current life; the life arithmetic follows the life
model v1 of the design brief (consumed fraction, damage rate over the rate window,
remaining bearing hours, normalised case-drain trend, utilisation, due date).

All numbers are estimates. The makers' service limits, local codes and qualified
technicians decide when a drive is rebuilt.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass, field
from datetime import UTC, date, datetime

import numpy as np
import pandas as pd

from monitor import bearings, lifecycle, oil, wear

RANK_COLUMNS = (
    "unit",
    "site",
    "position",
    "component_model",
    "hour_meter",
    "hours_since_rebuild",
    "consumed_fraction",
    "damage_rate_per_h",
    "remaining_bearing_h",
    "remaining_wear_h",
    "remaining_wear_h_low",
    "remaining_wear_h_high",
    "remaining_h",
    "limiting",
    "utilisation_h_per_day",
    "due_date",
    "status",
    "relief_hours",
    "relief_heat_kwh",
    "last_upload_at",
    "data_age_days",
    "flags",
)
"""The stable keys of ``drivespan rank --format json``, in order."""

EXTRA_COLUMNS = (
    "machine_type",
    "component_id",
    "case_drain_level_lpm",
    "case_drain_limit_lpm",
    "case_drain_slope_lpm_per_h",
    "cutoff_hours",
    "has_cutoff",
)
"""Further columns of the status frame (dashboard detail), after the rank keys."""

STATUS_COLUMNS = RANK_COLUMNS + EXTRA_COLUMNS

FLAG_STALE = "stale"
FLAG_STEP = "case_drain_step"
FLAG_RELIEF = "heavy_relief"
FLAG_FEW = "few_wear_readings"
FLAGS = (FLAG_STALE, FLAG_STEP, FLAG_RELIEF, FLAG_FEW)

DEFAULT_LIMITS = dict(lifecycle.DEFAULT_STATUS_LIMITS_H)


@dataclass(frozen=True)
class StatusParams:
    """Settings of one status computation.

    Attributes
    ----------
    reliability_pct : float
        Planning reliability for ISO 281 a1 [%], 90-99.95.
    rate_window_h : float
        Operating hours over which the damage rate is taken [h].
    utilisation_days : float
        Calendar days over which utilisation is taken [d].
    stale_days : float
        Data older than this raises the ``stale`` flag [d].
    status_limits : mapping
        Remaining-hours limits of the status bands [h] (see :mod:`monitor.lifecycle`).
    case_drain_step_factor : float
        Latest normalised reading above this multiple of the fitted level before it
        raises ``case_drain_step`` [-] (1.5: common practice, no source).
    heavy_relief_fraction : float
        Share of window hours at relief, without a cut-off, that raises
        ``heavy_relief`` [-] (0.01: common practice, no source).
    min_wear_readings : int
        Fewest case-drain readings for a wear trend [-].
    """

    reliability_pct: float = 90.0
    rate_window_h: float = 500.0
    utilisation_days: float = 30.0
    stale_days: float = 14.0
    status_limits: Mapping[str, float] = field(default_factory=lambda: dict(DEFAULT_LIMITS))
    case_drain_step_factor: float = 1.5
    heavy_relief_fraction: float = 0.01
    min_wear_readings: int = 3


def as_of_instant(as_of: date) -> datetime:
    """The start of the as-of day in UTC: data up to this instant count."""
    return datetime(as_of.year, as_of.month, as_of.day, tzinfo=UTC)


# --- bearing life ----------------------------------------------------------------------


def _diff(df: pd.DataFrame, col: str, lower: str) -> np.ndarray:
    """now_<col> - <lower>_<col>, with a missing lower point read as zero."""
    now = df[f"now_{col}"].to_numpy(float)
    low = np.nan_to_num(df[f"{lower}_{col}"].to_numpy(float), nan=0.0)
    return np.where(np.isnan(now), 0.0, now - low)


def _window_lower(df: pd.DataFrame) -> pd.DataFrame:
    """Rate-window start: the window row, clamped so it is never before the rebuild."""
    out = df.copy()
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


def bearing_frame(inputs: pd.DataFrame, params: StatusParams) -> pd.DataFrame:
    """Consumed fraction, damage rate and remaining bearing hours per component.

    Parameters
    ----------
    inputs : pandas.DataFrame
        Rows of :func:`monitor.snapshot.status_inputs` (``now_*``, ``base_*``,
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
    df = _window_lower(inputs)
    damage_life = _diff(df, "cum_damage", "base")
    win_hours = _diff(df, "cum_hours", "lo")
    win_damage = _diff(df, "cum_damage", "lo")
    consumed = _consumed_fraction(damage_life, a1)
    rate = _damage_rate_per_h(win_damage, win_hours, a1)
    return pd.DataFrame(
        {
            "hours_since_rebuild": _diff(df, "cum_meter_hours", "base"),
            "consumed_fraction": consumed,
            "damage_rate_per_h": rate,
            "remaining_bearing_h": lifecycle.remaining_bearing_h(consumed, rate),
            "window_hours": win_hours,
            "relief_hours": _diff(df, "cum_relief_hours", "lo"),
            "cutoff_hours": _diff(df, "cum_cutoff_hours", "lo"),
            "relief_heat_kwh": _diff(df, "cum_relief_heat_kwh", "lo"),
            "utilisation_h_per_day": _utilisation_h_per_day(
                _diff(df, "cum_meter_hours", "month"), params.utilisation_days
            ),
        },
        index=inputs.index,
    )


# --- life arithmetic over running totals ----------------------------------------------
# The same definitions as monitor.lifecycle.bearing_life / utilisation_h_per_day, taken
# as differences of the ledger's running totals instead of sums over per-upload arrays
# (tests/test_fleet.py checks the two agree).


def _consumed_fraction(damage: np.ndarray, a1: float) -> np.ndarray:
    """Consumed fraction = ledger damage since the rebuild (a1 = 1) / a1 [-]."""
    return np.asarray(damage, float) / a1


def _damage_rate_per_h(damage: np.ndarray, hours: np.ndarray, a1: float) -> np.ndarray:
    """Window damage / a1 / window operating hours [1/h]; NaN without hours."""
    h = np.asarray(hours, float)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(h > 0, np.asarray(damage, float) / a1 / h, np.nan)


def _utilisation_h_per_day(meter_hours: np.ndarray, days: float) -> np.ndarray:
    """Hour-meter hours of uploads ending in the period / its length [h/d]."""
    return np.asarray(meter_hours, float) / float(days)


STATUS_BANDS = (*lifecycle.STATUS_BANDS, lifecycle.NO_ESTIMATE)
"""Status band names, most urgent first, then the no-estimate band."""


# --- case-drain wear -------------------------------------------------------------------


def oil_viscosity_line(row: Mapping) -> tuple[float, float] | None:
    """ASTM D341 line (A, B) of the unit's oil from a components row, or None if unknown."""
    try:
        return oil.oil_line_from_spec(
            iso_vg=_num(row.get("oil_iso_vg")),
            viscosity_index=_num(row.get("oil_viscosity_index")),
            nu40_mm2s=_num(row.get("oil_nu40_mm2s")),
            nu100_mm2s=_num(row.get("oil_nu100_mm2s")),
        )
    except ValueError:
        return None


def _num(v: object) -> float | None:
    if v is None:
        return None
    try:
        f = float(v)  # type: ignore[arg-type]
    except (TypeError, ValueError):
        return None
    return None if math.isnan(f) else f


def case_drain_limit_lpm(row: Mapping) -> float | None:
    """Rebuild limit of the normalised case drain [L/min] of a components row, or None."""
    lim = _num(row.get("m_case_drain_limit_lpm"))
    if lim is not None:
        return lim
    factor, new = _num(row.get("m_case_drain_limit_factor")), _num(row.get("m_case_drain_new_lpm"))
    return factor * new if factor is not None and new is not None else None


def normalised_case_drain(
    case_drain_lpm: np.ndarray,
    test_dp_bar: np.ndarray,
    oil_temp_c: np.ndarray,
    row: Mapping,
    line: tuple[float, float] | None,
) -> np.ndarray:
    """Readings of one component normalised to its model's test conditions.

    Parameters
    ----------
    case_drain_lpm, test_dp_bar, oil_temp_c : array
        Raw flow [L/min], test pressure [bar] and oil temperature [degC] (nan: not
        recorded).
    row : mapping
        The component's row (model ``m_*`` fields).
    line : tuple of float or None
        ASTM D341 line of the unit's oil.

    Returns
    -------
    numpy.ndarray
        Normalised flow [L/min], flushing subtracted (see
        :func:`monitor.wear.normalise_case_drain_lpm`).
    """
    return wear.normalise_case_drain_lpm(
        case_drain_lpm,
        test_dp_bar,
        oil_temp_c,
        ref_dp_bar=_num(row.get("m_case_drain_test_dp_bar")),
        ref_temp_c=_num(row.get("m_case_drain_test_temp_c")),
        oil_line=line,
        flushing_lpm=_num(row.get("m_case_drain_flushing_lpm")) or 0.0,
    )


def _fit(
    x: np.ndarray, y: np.ndarray, limit: float | None, now: float, params: StatusParams
) -> wear.WearTrend | None:
    if limit is not None:
        return wear.case_drain_trend(
            x, y, limit_lpm=limit, hour_meter_now_h=now, min_readings=params.min_wear_readings
        )
    if x.size < params.min_wear_readings or np.unique(x).size < 2:
        return None
    slope, intercept, low, high = wear.theil_sen(x, y)
    nan = math.nan
    return wear.WearTrend(
        slope, intercept, low, high, intercept + slope * now, nan, nan, nan, n=int(x.size)
    )


def case_drain_step(x: np.ndarray, y: np.ndarray, params: StatusParams) -> bool:
    """True if the latest reading exceeds the step factor times the level fitted before it.

    The level before is the Theil-Sen line through the earlier readings at the latest
    reading's hour meter, or, with fewer earlier readings than a trend needs, their
    median (a rule of this project, common practice, no source).
    """
    if y.size < 2:
        return False
    px, py = x[:-1], y[:-1]
    if py.size >= params.min_wear_readings and np.unique(px).size >= 2:
        slope, intercept, _, _ = wear.theil_sen(px, py)
        level = intercept + slope * x[-1]
    else:
        level = float(np.median(py))
    return bool(level > 0 and y[-1] > params.case_drain_step_factor * level)


def wear_frame(inputs: pd.DataFrame, readings: pd.DataFrame, params: StatusParams) -> pd.DataFrame:
    """Case-drain level, slope, remaining wear hours and step flag per component.

    Parameters
    ----------
    inputs : pandas.DataFrame
        Rows of :func:`monitor.snapshot.status_inputs`.
    readings : pandas.DataFrame
        Case-drain readings of the current lives (:func:`monitor.snapshot.readings_in_life`).
    params : StatusParams
        Trend and step settings.

    Returns
    -------
    pandas.DataFrame
        ``n_wear_readings, case_drain_level_lpm [L/min], case_drain_slope_lpm_per_h
        [L/min/h], remaining_wear_h, remaining_wear_h_low, remaining_wear_h_high [h],
        case_drain_limit_lpm [L/min], case_drain_step (bool)`` aligned with ``inputs``.
    """
    used = [c for c in inputs.columns if c in _WEAR_KEYS]
    records = inputs[used].to_dict("records")
    limits = [case_drain_limit_lpm(r) for r in records]
    res = np.full((len(records), 5), np.nan)
    count, step = np.zeros(len(records), int), np.zeros(len(records), bool)
    spans, cols = _reading_spans(readings)
    series = _wear_series(records, spans, cols)
    rows = np.fromiter(series, dtype=np.int64, count=len(series))
    x_all = np.concatenate([series[i][0] for i in rows]) if rows.size else np.zeros(0)
    y_all = np.concatenate([series[i][1] for i in rows]) if rows.size else np.zeros(0)
    st = _SpanStats(x_all, y_all, np.array([series[i][0].size for i in rows], dtype=np.int64))
    count[rows] = st.n
    valid = np.array([_valid_limit(limits[i]) for i in rows], dtype=bool)
    fast = st.finite & valid  # the others keep the one-at-a-time path, as they always did
    m = params.min_wear_readings
    trend_in = rows[fast & (st.n >= m) & (st.x_min != st.x_max)]
    step_in = rows[fast & (st.n - 1 >= m) & (st.p_min != st.p_max)]
    fit = wear.theil_sen_batch([series[i][0] for i in trend_in], [series[i][1] for i in trend_in])
    before = wear.theil_sen_batch(
        [series[i][0][:-1] for i in step_in], [series[i][1][:-1] for i in step_in]
    )
    step_fit = dict(zip(step_in.tolist(), before, strict=True))
    for i, (slope, intercept, low, high) in zip(trend_in.tolist(), fit, strict=True):
        level = intercept + slope * _now_fast(records[i], series[i][0])
        rem = (math.nan,) * 3
        if limits[i] is not None:
            rem = wear.remaining_wear_h(limits[i], level, slope, low, high)
        res[i] = (level, slope, *rem)
    for i, ok in zip(rows.tolist(), fast.tolist(), strict=True):
        x, y = series[i]
        if ok:
            step[i] = _step_from_fit(x, y, step_fit.get(i), params)
        else:
            res[i], step[i] = _wear_one(x, y, limits[i], records[i], params)
    names = (
        "case_drain_level_lpm",
        "case_drain_slope_lpm_per_h",
        "remaining_wear_h",
        "remaining_wear_h_low",
        "remaining_wear_h_high",
    )
    out = pd.DataFrame(res, columns=list(names), index=inputs.index)
    out["n_wear_readings"] = count
    out["case_drain_limit_lpm"] = np.array([np.nan if v is None else v for v in limits], float)
    out["case_drain_step"] = step
    return out


class _SpanStats:
    """Per series of concatenated readings: count, all finite, x range and the x range
    without the last reading (reductions over all series at once)."""

    def __init__(self, x: np.ndarray, y: np.ndarray, n: np.ndarray) -> None:
        self.n = n
        if n.size == 0:
            self.finite = np.zeros(0, bool)
            self.x_min = self.x_max = self.p_min = self.p_max = np.zeros(0)
            return
        starts = np.r_[0, np.cumsum(n)[:-1]]
        last = starts + n - 1
        with np.errstate(invalid="ignore"):
            self.finite = np.logical_and.reduceat(np.isfinite(x) & np.isfinite(y), starts)
            self.x_min = np.minimum.reduceat(x, starts)
            self.x_max = np.maximum.reduceat(x, starts)
            lo, hi = x.copy(), x.copy()
            lo[last], hi[last] = np.inf, -np.inf
            self.p_min = np.minimum.reduceat(lo, starts)
            self.p_max = np.maximum.reduceat(hi, starts)


def _valid_limit(limit: float | None) -> bool:
    return limit is None or (math.isfinite(limit) and limit > 0)


_WEAR_KEYS = frozenset(
    {
        "component_id",
        "now_hour_meter_end",
        "m_name",
        "m_case_drain_limit_lpm",
        "m_case_drain_limit_factor",
        "m_case_drain_new_lpm",
        "m_case_drain_test_dp_bar",
        "m_case_drain_test_temp_c",
        "m_case_drain_flushing_lpm",
        "oil_name",
        "oil_iso_vg",
        "oil_viscosity_index",
        "oil_nu40_mm2s",
        "oil_nu100_mm2s",
    }
)
"""Columns of a status-inputs row that the wear trend reads."""


def _now_fast(row: Mapping, x: np.ndarray) -> float:
    """:func:`_now_hour_meter` for finite readings ``x``, without numpy's nanmax."""
    last = _num(row.get("now_hour_meter_end")) or math.nan
    top = float(x.max())
    return top if math.isnan(last) else max(last, top)


def _now_hour_meter(row: Mapping, x: np.ndarray) -> float:
    return float(np.nanmax([_num(row.get("now_hour_meter_end")) or np.nan, x.max()]))


def _wear_series(records: list[dict], spans: dict, cols: list[np.ndarray]) -> dict:
    """Per component row with readings: (hour meter [h], normalised flow [L/min]).

    Readings are normalised in one call per component model and oil."""
    by_key: dict[tuple, list[int]] = {}
    for i, row in enumerate(records):
        if row["component_id"] in spans:
            by_key.setdefault((row.get("m_name"), row.get("oil_name")), []).append(i)
    out = {}
    for idx in by_key.values():
        row = records[idx[0]]
        sl = [spans[records[i]["component_id"]] for i in idx]
        take = np.concatenate([np.arange(s.start, s.stop) for s in sl])
        y = normalised_case_drain(
            cols[1][take], cols[2][take], cols[3][take], row, oil_viscosity_line(row)
        )
        pos = 0
        for i, s in zip(idx, sl, strict=True):
            k = s.stop - s.start
            out[i] = (cols[0][s], y[pos : pos + k])
            pos += k
    return dict(sorted(out.items()))


def _wear_one(x, y, limit, row, params) -> tuple[tuple, bool]:  # noqa: ANN001
    """Trend values and step flag of one component, the plain way (odd inputs)."""
    trend = _fit(x, y, limit, _now_hour_meter(row, x), params)
    vals = (math.nan,) * 5
    if trend is not None:
        vals = (
            trend.level_now,
            trend.slope,
            trend.remaining_h,
            trend.remaining_h_low,
            trend.remaining_h_high,
        )
    return vals, case_drain_step(x, y, params)


def _step_from_fit(x, y, fit, params: StatusParams) -> bool:  # noqa: ANN001
    """:func:`case_drain_step` with the Theil-Sen fit of the earlier readings given."""
    if y.size < 2:
        return False
    if fit is not None:
        level = fit[1] + fit[0] * x[-1]
    else:
        level = float(np.median(y[:-1]))
    return bool(level > 0 and y[-1] > params.case_drain_step_factor * level)


def _reading_spans(readings: pd.DataFrame) -> tuple[dict, list[np.ndarray]]:
    """Slices of each component's readings (sorted by time) and the value arrays."""
    if readings.empty:
        return {}, []
    rd = readings.sort_values("component_id", kind="stable")  # time order kept within
    cid = rd["component_id"].to_numpy()
    starts = np.flatnonzero(np.r_[True, cid[1:] != cid[:-1]])
    ends = np.r_[starts[1:], cid.size]
    spans = {cid[s]: slice(s, e) for s, e in zip(starts, ends, strict=True)}
    cols = [
        rd[c].to_numpy(float)
        for c in ("hour_meter", "case_drain_lpm", "test_pressure_bar", "oil_temp_c")
    ]
    return spans, cols


# --- assembling the status -------------------------------------------------------------


def _flags(df: pd.DataFrame, params: StatusParams) -> list[list[str]]:
    frac = np.where(
        df["window_hours"] > 0,
        df["relief_hours"] / df["window_hours"].where(df["window_hours"] > 0, 1.0),
        0.0,
    )
    stale = df["data_age_days"].isna() | (df["data_age_days"] > params.stale_days)
    relief = (~df["has_cutoff"]) & (frac > params.heavy_relief_fraction)
    few = df["case_drain_limit_lpm"].notna() & (df["n_wear_readings"] < params.min_wear_readings)
    out = []
    for s, st, r, f in zip(stale, df["case_drain_step"], relief, few, strict=True):
        out.append([name for name, on in zip(FLAGS, (s, st, r, f), strict=True) if on])
    return out


def _limiting(bearing: pd.Series, wear_h: pd.Series) -> tuple[list[float], list]:
    pairs = [lifecycle.limiting_mode(b, w) for b, w in zip(bearing, wear_h, strict=True)]
    return [p[0] for p in pairs], [p[1] for p in pairs]


def _objects(values: list) -> pd.Series:
    """A column that keeps None, dates and lists as they are (no dtype inference)."""
    out = np.empty(len(values), dtype=object)
    out[:] = values
    return pd.Series(out, dtype=object)


def fleet_status(
    inputs: pd.DataFrame, readings: pd.DataFrame, as_of: date, params: StatusParams
) -> pd.DataFrame:
    """Status of every component at the start of ``as_of``, most urgent first.

    Parameters
    ----------
    inputs : pandas.DataFrame
        :func:`monitor.snapshot.status_inputs` rows (component, model, oil, ledger points).
    readings : pandas.DataFrame
        :func:`monitor.snapshot.readings_in_life` rows.
    as_of : datetime.date
        The as-of day.
    params : StatusParams
        Settings.

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
    t = as_of_instant(as_of)
    last = pd.to_datetime(inputs["now_period_end"], utc=True)
    stamps = last.array.to_pydatetime().astype(object)
    stamps[last.isna().to_numpy()] = None
    df["last_upload_at"] = _objects(list(stamps))
    df["data_age_days"] = (pd.Timestamp(t) - last).dt.total_seconds().to_numpy() / 86400.0
    df["has_cutoff"] = inputs["m_cutoff_bar"].notna().to_numpy()
    df["flags"] = _objects(_flags(df, params))
    rem, lim = _limiting(df["remaining_bearing_h"], df["remaining_wear_h"])
    df["remaining_h"], df["limiting"] = np.asarray(rem, float), _objects(lim)
    df["status"] = lifecycle.status_band(df["remaining_h"].to_numpy(float), **params.status_limits)
    df["due_date"] = _objects(
        [
            lifecycle.due_date(as_of, r, u)
            for r, u in zip(df["remaining_h"], df["utilisation_h_per_day"], strict=True)
        ]
    )
    df["hour_meter"] = inputs["now_hour_meter_end"].to_numpy(float)
    for col in ("unit", "site", "position", "machine_type", "component_id"):
        df[col] = inputs[col].to_numpy()
    df["component_model"] = inputs["m_name"].to_numpy()
    return sort_status(df[list(STATUS_COLUMNS)])


def sort_status(df: pd.DataFrame) -> pd.DataFrame:
    """Most urgent first: remaining hours ascending (no estimate last), then due date,
    unit tag and position."""
    key = pd.DataFrame(
        {
            "n": df["remaining_h"].isna(),
            "r": df["remaining_h"].fillna(np.inf),
            "d": [pd.Timestamp(d) if d is not None else pd.Timestamp.max for d in df["due_date"]],
            "u": df["unit"],
            "p": df["position"],
        }
    )
    order = key.sort_values(["n", "r", "d", "u", "p"], kind="stable").index
    return df.loc[order].reset_index(drop=True)


def _plain(v: object) -> object:
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
    """:func:`_plain` of every value of a column, with fast paths by dtype."""
    if pd.api.types.is_float_dtype(col.dtype):
        return [v if math.isfinite(v) else None for v in col.to_numpy(float).tolist()]
    if pd.api.types.is_bool_dtype(col.dtype) or pd.api.types.is_integer_dtype(col.dtype):
        return col.to_numpy().tolist()
    return [v if type(v) is str else _plain(v) for v in col.tolist()]


def rank_records(df: pd.DataFrame) -> list[dict]:
    """JSON-ready records with exactly :data:`RANK_COLUMNS` (NaN/inf -> None, ISO dates)."""
    cols = [_plain_column(df[k]) for k in RANK_COLUMNS]
    return [dict(zip(RANK_COLUMNS, vals, strict=True)) for vals in zip(*cols, strict=True)]


# --- one unit in detail: monitor.fleet_detail -------------------------------------------

_DETAIL_NAMES = frozenset(
    {
        "ESTIMATE_NOTICE",
        "window_rows",
        "window_spectrum",
        "life_curve",
        "case_drain_detail",
        "relief_monthly",
        "oil_samples",
        "unit_summary",
    }
)


def __getattr__(name: str) -> object:
    """The unit-detail builders, which moved to :mod:`monitor.fleet_detail`, by their
    old names here (imported on first use: that module imports this one)."""
    if name in _DETAIL_NAMES:
        from monitor import fleet_detail

        return getattr(fleet_detail, name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
