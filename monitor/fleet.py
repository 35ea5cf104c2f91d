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
    lo = _window_lower(inputs)
    damage_life = _diff(inputs, "cum_damage", "base")
    win_hours = _diff(inputs, "cum_hours", "lo", lo)
    win_damage = _diff(inputs, "cum_damage", "lo", lo)
    consumed = _consumed_fraction(damage_life, a1)
    rate = _damage_rate_per_h(win_damage, win_hours, a1)
    return pd.DataFrame(
        {
            "hours_since_rebuild": _diff(inputs, "cum_meter_hours", "base"),
            "consumed_fraction": consumed,
            "damage_rate_per_h": rate,
            "remaining_bearing_h": lifecycle.remaining_bearing_h(consumed, rate),
            "window_hours": win_hours,
            "relief_hours": _diff(inputs, "cum_relief_hours", "lo", lo),
            "cutoff_hours": _diff(inputs, "cum_cutoff_hours", "lo", lo),
            "relief_heat_kwh": _diff(inputs, "cum_relief_heat_kwh", "lo", lo),
            "utilisation_h_per_day": _utilisation_h_per_day(
                _diff(inputs, "cum_meter_hours", "month"), params.utilisation_days
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

    Notes
    -----
    Columns at once: the readings of all components are one pair of arrays, each
    component a contiguous span; the trend and the fit before the latest reading
    come from one batched Theil-Sen (:func:`monitor.wear.theil_sen_batch_and_before_last`).
    Series with non-finite values or an invalid limit take :func:`_wear_one`, the
    one-at-a-time definition the batch reproduces (``tests/test_perf_equivalence.py``).
    """
    limit, has_limit = _limits(inputs)
    sr = _Series.build(inputs, readings)
    res = np.full((len(inputs), 5), np.nan)
    step = np.zeros(len(inputs), bool)
    st = _SpanStats(sr.x, sr.y, sr.n)
    valid = ~has_limit[sr.rows] | (np.isfinite(limit[sr.rows]) & (limit[sr.rows] > 0))
    fast = st.finite & valid  # the others keep the one-at-a-time path, as they always did
    m = params.min_wear_readings
    trend = fast & (st.n >= m) & (st.x_min != st.x_max)
    fit, before = wear.theil_sen_batch_and_before_last(
        [sr.x[a:b] for a, b in sr.bounds(trend)], [sr.y[a:b] for a, b in sr.bounds(trend)]
    )
    rows = sr.rows[trend]
    level = fit[:, 1] + fit[:, 0] * _now_fast(inputs, rows, st.x_max[trend])
    res[rows, 0], res[rows, 1] = level, fit[:, 0]
    lim = has_limit[rows]
    res[rows[lim], 2:] = wear.remaining_wear_h_batch(
        limit[rows[lim]], level[lim], fit[lim, 0], fit[lim, 2], fit[lim, 3]
    )
    # fit of the readings before the latest: only where it has enough readings of its own
    with_fit = (st.n[trend] - 1 >= m) & (st.p_min[trend] != st.p_max[trend])
    step_level = np.full(sr.rows.size, np.nan)
    step_level[np.flatnonzero(trend)[with_fit]] = (
        before[with_fit, 1] + before[with_fit, 0] * sr.x[sr.last[trend][with_fit]]
    )
    step[sr.rows[fast]] = _steps(sr, fast, trend, with_fit, step_level, params)
    for j in np.flatnonzero(~fast).tolist():
        i = int(sr.rows[j])
        x, y = sr.series(j)
        row = _row(inputs, i)
        res[i], step[i] = _wear_one(x, y, None if not has_limit[i] else limit[i], row, params)
    return _wear_out(res, sr, limit, step, inputs.index)


def _steps(sr, fast, trend, with_fit, step_level, params: StatusParams) -> np.ndarray:  # noqa: ANN001
    """:func:`case_drain_step` of the finite series (``fast``), from the fitted level
    before the latest reading where there is one, else the median of the earlier ones."""
    level = step_level.copy()
    has_fit = np.zeros(sr.rows.size, bool)
    has_fit[np.flatnonzero(trend)[with_fit]] = True
    for j in np.flatnonzero(fast & ~has_fit & (sr.n >= 2)).tolist():
        level[j] = float(np.median(sr.series(j)[1][:-1]))
    ok = fast & (sr.n >= 2)
    y_last = np.where(ok, sr.y[np.where(ok, sr.last, 0)], np.nan)
    with np.errstate(invalid="ignore"):
        flag = ok & (level > 0) & (y_last > params.case_drain_step_factor * level)
    return flag[fast]


def _wear_out(res: np.ndarray, sr, limit, step, index) -> pd.DataFrame:  # noqa: ANN001
    names = (
        "case_drain_level_lpm",
        "case_drain_slope_lpm_per_h",
        "remaining_wear_h",
        "remaining_wear_h_low",
        "remaining_wear_h_high",
    )
    out = pd.DataFrame(res, columns=list(names), index=index)
    count = np.zeros(len(index), int)
    count[sr.rows] = sr.n
    out["n_wear_readings"] = count
    out["case_drain_limit_lpm"] = limit
    out["case_drain_step"] = step
    return out


_WEAR_KEYS = (
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
)
"""Columns of a status-inputs row that the wear trend reads."""


def _row(inputs: pd.DataFrame, i: int) -> dict:
    """The wear columns of one inputs row as a dict (absent columns left out)."""
    return {c: inputs[c].iat[i] for c in _WEAR_KEYS if c in inputs.columns}


def _float_col(df: pd.DataFrame, name: str) -> np.ndarray:
    """A column as float (None and non-numbers -> nan); all nan if the column is absent."""
    if name not in df.columns:
        return np.full(len(df), np.nan)
    return pd.to_numeric(df[name], errors="coerce").to_numpy(float, na_value=np.nan)


def _limits(inputs: pd.DataFrame) -> tuple[np.ndarray, np.ndarray]:
    """:func:`case_drain_limit_lpm` of every row: the limit [L/min] (nan: none) and
    whether there is one."""
    direct = _float_col(inputs, "m_case_drain_limit_lpm")
    factor = _float_col(inputs, "m_case_drain_limit_factor")
    new = _float_col(inputs, "m_case_drain_new_lpm")
    by_factor = ~np.isnan(factor) & ~np.isnan(new)
    has = ~np.isnan(direct) | by_factor
    limit = np.where(~np.isnan(direct), direct, np.where(by_factor, factor * new, np.nan))
    return limit, has


def _now_fast(inputs: pd.DataFrame, rows: np.ndarray, x_max: np.ndarray) -> np.ndarray:
    """:func:`_now_hour_meter` of finite series: the later of the last upload's hour
    meter (0 or missing: not known) and the highest reading [h]."""
    last = _float_col(inputs, "now_hour_meter_end")[rows]
    known = ~np.isnan(last) & (last != 0)
    return np.where(known & (x_max <= last), last, x_max)


class _Series:
    """Each input row's readings as one span of two concatenated arrays: hour meter
    [h] and normalised case drain [L/min], normalised in one call per model and oil."""

    def __init__(self, rows, n, x, y) -> None:  # noqa: ANN001
        self.rows, self.n, self.x, self.y = rows, n, x, y
        self.start = np.r_[0, np.cumsum(n)[:-1]].astype(np.int64) if n.size else n
        self.last = self.start + n - 1

    def series(self, j: int) -> tuple[np.ndarray, np.ndarray]:
        a, b = int(self.start[j]), int(self.start[j] + self.n[j])
        return self.x[a:b], self.y[a:b]

    def bounds(self, mask: np.ndarray) -> list[tuple[int, int]]:
        a = self.start[mask]
        return list(zip(a.tolist(), (a + self.n[mask]).tolist(), strict=True))

    @classmethod
    def build(cls, inputs: pd.DataFrame, readings: pd.DataFrame) -> _Series:
        cid = inputs["component_id"].to_numpy()
        empty = np.zeros(0, np.int64)
        if readings.empty or cid.size == 0:
            return cls(empty, empty, np.zeros(0), np.zeros(0))
        rd = readings
        if not rd["component_id"].is_monotonic_increasing:
            rd = rd.sort_values("component_id", kind="stable")  # time order kept within
        rid = rd["component_id"].to_numpy(np.int64)
        ids, first, counts = np.unique(rid, return_index=True, return_counts=True)
        pos = np.minimum(np.searchsorted(ids, cid), ids.size - 1)
        rows = np.flatnonzero(ids[pos] == cid)
        n = counts[pos[rows]].astype(np.int64)
        out_start = np.r_[0, np.cumsum(n)[:-1]]
        take = np.arange(int(n.sum())) + np.repeat(first[pos[rows]] - out_start, n)
        cols = [
            rd[c].to_numpy(float)[take]
            for c in ("hour_meter", "case_drain_lpm", "test_pressure_bar", "oil_temp_c")
        ]
        y = _normalised_by_group(inputs, rows, n, cols[1:])
        return cls(rows, n, cols[0], y)


def _normalised_by_group(
    inputs: pd.DataFrame, rows: np.ndarray, n: np.ndarray, cols: list[np.ndarray]
) -> np.ndarray:
    """Readings normalised in one call per component model and oil (elementwise, so the
    same numbers as one call per component)."""
    keys = [
        inputs[c].to_numpy(object)[rows] if c in inputs.columns else [None] * rows.size
        for c in ("m_name", "oil_name")
    ]
    groups: dict[tuple, int] = {}
    first: list[int] = []
    row_group = np.empty(rows.size, np.int64)
    for j, key in enumerate(zip(*keys, strict=True)):
        g = groups.setdefault(key, len(groups))
        if g == len(first):
            first.append(j)
        row_group[j] = g
    elem_group = np.repeat(row_group, n)
    y = np.empty(elem_group.size)
    for g, j in enumerate(first):
        sel = elem_group == g if len(first) > 1 else slice(None)
        row = _row(inputs, int(rows[j]))
        line = oil_viscosity_line(row)
        y[sel] = normalised_case_drain(cols[0][sel], cols[1][sel], cols[2][sel], row, line)
    return y


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


def _now_hour_meter(row: Mapping, x: np.ndarray) -> float:
    return float(np.nanmax([_num(row.get("now_hour_meter_end")) or np.nan, x.max()]))


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


# --- assembling the status -------------------------------------------------------------


_FLAG_SETS = tuple(
    tuple(name for bit, name in enumerate(FLAGS) if code >> bit & 1) for code in range(16)
)
"""The flags of each 4-bit code (bit i set: ``FLAGS[i]`` is raised)."""


def _flags(df: pd.DataFrame, params: StatusParams) -> list[list[str]]:
    """Each row's raised flags, in the order of :data:`FLAGS` (a new list per row)."""
    wh, rh = df["window_hours"].to_numpy(float), df["relief_hours"].to_numpy(float)
    frac = np.where(wh > 0, rh / np.where(wh > 0, wh, 1.0), 0.0)
    age = df["data_age_days"].to_numpy(float)
    stale = np.isnan(age) | (age > params.stale_days)
    relief = ~df["has_cutoff"].to_numpy(bool) & (frac > params.heavy_relief_fraction)
    few = ~np.isnan(df["case_drain_limit_lpm"].to_numpy(float)) & (
        df["n_wear_readings"].to_numpy() < params.min_wear_readings
    )
    step = df["case_drain_step"].to_numpy(bool)
    code = stale.astype(int) + 2 * step + 4 * relief + 8 * few
    return [list(_FLAG_SETS[c]) for c in code.tolist()]


def _limiting(bearing: np.ndarray, wear_h: np.ndarray) -> tuple[np.ndarray, list]:
    """:func:`monitor.lifecycle.limiting_mode` of every row: the smaller of the two
    estimates [h] (nan: neither) and "bearing" (also on a tie), "wear" or None."""
    no_b, no_w = np.isnan(bearing), np.isnan(wear_h)
    with np.errstate(invalid="ignore"):
        use_b = no_w | (~no_b & (bearing <= wear_h))
    names = np.where(use_b, "bearing", "wear").astype(object)
    names[no_b & no_w] = None
    return np.where(no_b & no_w, np.nan, np.where(use_b, bearing, wear_h)), names.tolist()


def _due_dates(as_of: date, remaining_h: np.ndarray, util: np.ndarray) -> list:
    """:func:`monitor.lifecycle.due_date` of every row: ``as_of + floor(remaining /
    utilisation)`` days, None without an estimate, utilisation or a finite date."""
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
    last = pd.to_datetime(inputs["now_period_end"], utc=True)
    stamps = last.array.to_pydatetime().astype(object)
    stamps[last.isna().to_numpy()] = None
    extra = {
        "last_upload_at": _objects(list(stamps)),
        "data_age_days": (pd.Timestamp(as_of_instant(as_of)) - last).dt.total_seconds().to_numpy()
        / 86400.0,
        "has_cutoff": inputs["m_cutoff_bar"].notna().to_numpy(),
    }
    df = pd.concat([df, pd.DataFrame(extra)], axis=1)
    rem, lim = _limiting(
        df["remaining_bearing_h"].to_numpy(float), df["remaining_wear_h"].to_numpy(float)
    )
    util = df["utilisation_h_per_day"].to_numpy(float)
    extra = {
        "flags": _objects(_flags(df, params)),
        "remaining_h": rem,
        "limiting": _objects(lim),
        "status": lifecycle.status_band(rem, **params.status_limits),
        "due_date": _objects(_due_dates(as_of, rem, util)),
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
    return [_plain_object(v) for v in col.tolist()]


def _plain_object(v: object) -> object:
    """:func:`_plain` with the status frame's object values (text, None, days, UTC
    times, flag lists) looked up by exact type first."""
    t = type(v)
    if t is str or v is None:
        return v
    if t is date or t is datetime:  # a plain datetime is never NaT: same text as Timestamp's
        return v.isoformat()
    if t is list:
        return [str(x) for x in v]
    return _plain(v)


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
