"""Case-drain wear of the fleet status: normalised readings, trend, remaining wear hours
and the step flag, per component.

Pure: DataFrames in, a wear DataFrame out. The readings of all components are
normalised to each model's test conditions (:mod:`monitor.models.wear`) in one call per
model and oil, then fitted with one batched Theil-Sen; series the batch cannot take
follow the one-at-a-time definition (:func:`_wear_one`). :mod:`monitor.fleet`
assembles these columns into the status and re-exports the public names.

All numbers are estimates. The makers' service limits, local codes and qualified
technicians decide when a drive is rebuilt.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import TYPE_CHECKING

import numpy as np
import pandas as pd

from monitor.models import oil, wear

if TYPE_CHECKING:  # the settings type lives with the status (which imports this module)
    from monitor.fleet.params import StatusParams


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
        :func:`monitor.models.wear.normalise_case_drain_lpm`).
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


def readings_off_reference(
    test_dp_bar: np.ndarray, oil_temp_c: np.ndarray, row: Mapping, params: StatusParams
) -> np.ndarray:
    """Readings of one component too far from its model's test conditions to be trended.

    Parameters
    ----------
    test_dp_bar, oil_temp_c : array
        Test pressure [bar] and oil temperature [degC] (nan: not recorded).
    row : mapping
        The component's row (model ``m_*`` fields).
    params : StatusParams
        The distance [K] and pressure-ratio [-] limits.

    Returns
    -------
    numpy.ndarray of bool
        True where the reading is off the reference (see
        :func:`monitor.models.wear.off_reference`).
    """
    return wear.off_reference(
        test_dp_bar,
        oil_temp_c,
        ref_dp_bar=_num(row.get("m_case_drain_test_dp_bar")),
        ref_temp_c=_num(row.get("m_case_drain_test_temp_c")),
        max_temp_distance_k=params.case_drain_temp_distance_k,
        dp_ratio_range=(params.case_drain_dp_ratio_min, params.case_drain_dp_ratio_max),
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
    reading's hour meter. It needs at least ``params.step_min_before`` earlier readings
    (4 by default, never fewer than a trend needs) at two or more hour meters; with fewer
    there is no flag (a rule of this project, common practice, no source).
    """
    if y.size - 1 < params.step_min_before:
        return False
    px, py = x[:-1], y[:-1]
    if np.unique(px).size < 2:
        return False
    slope, intercept, _, _ = wear.theil_sen(px, py)
    level = intercept + slope * x[-1]
    return bool(level > 0 and y[-1] > params.case_drain_step_factor * level)


def wear_frame(inputs: pd.DataFrame, readings: pd.DataFrame, params: StatusParams) -> pd.DataFrame:
    """Case-drain level, slope, remaining wear hours and step flag per component.

    Parameters
    ----------
    inputs : pandas.DataFrame
        Rows of :func:`monitor.store.status_reads.status_inputs`.
    readings : pandas.DataFrame
        Case-drain readings of the current lives
        (:func:`monitor.store.status_reads.readings_in_life`).
    params : StatusParams
        Trend and step settings.

    Returns
    -------
    pandas.DataFrame
        ``n_wear_readings, case_drain_level_lpm [L/min], case_drain_slope_lpm_per_h
        [L/min/h], remaining_wear_h, remaining_wear_h_low, remaining_wear_h_high [h],
        case_drain_limit_lpm [L/min], case_drain_step (bool)`` aligned with ``inputs``,
        and ``n_wear_readings_off`` (readings off the reference test conditions, left out
        of the trend and the step) and ``wear_range_short`` (a trend whose readings are
        too few for a slope interval at 95 %, so no range).

    Notes
    -----
    ``n_wear_readings`` counts the trended readings (those off the reference excluded).
    Columns at once: the readings of all components are one pair of arrays, each
    component a contiguous span; the trend and the fit before the latest reading
    come from one batched Theil-Sen (:func:`monitor.models.wear.theil_sen_batch_and_before_last`).
    Series with non-finite values or an invalid limit take :func:`_wear_one`, the
    one-at-a-time definition the batch reproduces (``tests/test_perf_equivalence.py``).
    """
    limit, has_limit = _limits(inputs)
    sr = _Series.build(inputs, readings, params)
    res = np.full((len(inputs), 6), np.nan)  # level, slope, remaining x 3, slope_low
    step = np.zeros(len(inputs), bool)
    st = _SpanStats(sr.x, sr.y, sr.n)
    valid = ~has_limit[sr.rows] | (np.isfinite(limit[sr.rows]) & (limit[sr.rows] > 0))
    fast = st.finite & valid  # the others keep the one-at-a-time path, as they always did
    trend = fast & (st.n >= params.min_wear_readings) & (st.x_min != st.x_max)
    fit, before = wear.theil_sen_batch_and_before_last(
        [sr.x[a:b] for a, b in sr.bounds(trend)], [sr.y[a:b] for a, b in sr.bounds(trend)]
    )
    rows = sr.rows[trend]
    level = fit[:, 1] + fit[:, 0] * _now_fast(inputs, rows, st.x_max[trend])
    res[rows, 0], res[rows, 1], res[rows, 5] = level, fit[:, 0], fit[:, 2]
    lim = has_limit[rows]
    res[rows[lim], 2:5] = wear.remaining_wear_h_batch(
        limit[rows[lim]], level[lim], fit[lim, 0], fit[lim, 2], fit[lim, 3]
    )
    # fit of the readings before the latest: only where there are enough of them
    with_fit = (st.n[trend] - 1 >= params.step_min_before) & (st.p_min[trend] != st.p_max[trend])
    step_level = np.full(sr.rows.size, np.nan)
    step_level[np.flatnonzero(trend)[with_fit]] = (
        before[with_fit, 1] + before[with_fit, 0] * sr.x[sr.last[trend][with_fit]]
    )
    step[sr.rows[fast]] = _steps(sr, fast, step_level, params)
    for j in np.flatnonzero(~fast).tolist():
        i = int(sr.rows[j])
        x, y = sr.series(j)
        row = _row(inputs, i)
        res[i], step[i] = _wear_one(x, y, None if not has_limit[i] else limit[i], row, params)
    return _wear_out(res, sr, limit, step, inputs.index)


def _steps(sr, fast, step_level, params: StatusParams) -> np.ndarray:  # noqa: ANN001
    """:func:`case_drain_step` of the finite series (``fast``), from the fitted level
    before the latest reading where there is one (no flag where there is none)."""
    ok = fast & ~np.isnan(step_level)
    y_last = np.where(ok, sr.y[np.where(ok, sr.last, 0)], np.nan)
    with np.errstate(invalid="ignore"):
        flag = ok & (step_level > 0) & (y_last > params.case_drain_step_factor * step_level)
    return flag[fast]


def _wear_out(res: np.ndarray, sr, limit, step, index) -> pd.DataFrame:  # noqa: ANN001
    names = (
        "case_drain_level_lpm",
        "case_drain_slope_lpm_per_h",
        "remaining_wear_h",
        "remaining_wear_h_low",
        "remaining_wear_h_high",
    )
    out = pd.DataFrame(res[:, :5], columns=list(names), index=index)
    count = np.zeros(len(index), int)
    count[sr.rows] = sr.n
    out["n_wear_readings"] = count
    out["n_wear_readings_off"] = sr.off_count
    # a trend without a slope interval: too few readings for the interval's level
    out["wear_range_short"] = ~np.isnan(res[:, 1]) & np.isnan(res[:, 5])
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

    def __init__(self, rows, n, x, y, off_count) -> None:  # noqa: ANN001
        self.rows, self.n, self.x, self.y = rows, n, x, y
        self.off_count = off_count  # per inputs row: readings left out (off reference)
        self.start = np.r_[0, np.cumsum(n)[:-1]].astype(np.int64) if n.size else n
        self.last = self.start + n - 1

    def series(self, j: int) -> tuple[np.ndarray, np.ndarray]:
        a, b = int(self.start[j]), int(self.start[j] + self.n[j])
        return self.x[a:b], self.y[a:b]

    def bounds(self, mask: np.ndarray) -> list[tuple[int, int]]:
        a = self.start[mask]
        return list(zip(a.tolist(), (a + self.n[mask]).tolist(), strict=True))

    @classmethod
    def build(cls, inputs: pd.DataFrame, readings: pd.DataFrame, params: StatusParams) -> _Series:
        cid = inputs["component_id"].to_numpy()
        empty = np.zeros(0, np.int64)
        off_count = np.zeros(len(inputs), np.int64)
        if readings.empty or cid.size == 0:
            return cls(empty, empty, np.zeros(0), np.zeros(0), off_count)
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
        y, off = _normalised_by_group(inputs, rows, n, cols[1:], params)
        per_row_off = np.bincount(np.repeat(np.arange(rows.size), n), off, rows.size)
        off_count[rows] = per_row_off.astype(np.int64)
        x = cols[0]
        if off.any():  # readings off the reference conditions are shown, not trended
            x, y, n = x[~off], y[~off], n - off_count[rows]
            rows, n = rows[n > 0], n[n > 0]
        return cls(rows, n, x, y, off_count)


def _normalised_by_group(
    inputs: pd.DataFrame,
    rows: np.ndarray,
    n: np.ndarray,
    cols: list[np.ndarray],
    params: StatusParams,
) -> tuple[np.ndarray, np.ndarray]:
    """Readings normalised, and whether each is off the reference conditions, in one
    call per component model and oil (elementwise, so the same as one call per
    component)."""
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
    off = np.zeros(elem_group.size, bool)
    for g, j in enumerate(first):
        sel = elem_group == g if len(first) > 1 else slice(None)
        row = _row(inputs, int(rows[j]))
        line = oil_viscosity_line(row)
        y[sel] = normalised_case_drain(cols[0][sel], cols[1][sel], cols[2][sel], row, line)
        off[sel] = readings_off_reference(cols[1][sel], cols[2][sel], row, params) & (
            np.isfinite(cols[0][sel])  # only flow readings count
        )
    return y, off


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
    vals = (math.nan,) * 6
    if trend is not None:
        vals = (
            trend.level_now,
            trend.slope,
            trend.remaining_h,
            trend.remaining_h_low,
            trend.remaining_h_high,
            trend.slope_low,
        )
    return vals, case_drain_step(x, y, params)
