"""Case-drain wear: normalising readings, Theil-Sen trend and remaining wear hours.

Wear of the rotating group opens clearances and raises internal leakage, which leaves
through the case drain. Leakage through a thin gap is laminar, so a reading is made
comparable by scaling it to the model's test pressure and oil temperature. The trend
of the normalised flow against the hour meter is fitted with the Theil-Sen estimator,
which shrugs off single odd readings. Results are estimates: the maker's case-drain
limits and a qualified technician decide on a rebuild.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from monitor.models import kendall
from monitor.models.oil import walther_viscosity_mm2s

MIN_READINGS = 3
"""Fewest readings for a wear trend (a line needs two; three is this project's rule,
common practice, no source)."""


@dataclass(frozen=True)
class WearTrend:
    """Theil-Sen trend of normalised case-drain flow and the remaining wear hours.

    Attributes
    ----------
    slope, slope_low, slope_high : float
        Median pairwise slope and its confidence interval [L/min per h].
    intercept : float
        Level at hour meter 0 [L/min].
    level_now : float
        Fitted level at the current hour meter [L/min].
    remaining_h : float
        Hours until the fitted level reaches the limit [h]; 0 at or past the limit;
        nan (no estimate) if the slope is not positive or there are too few readings.
    remaining_h_low, remaining_h_high : float
        Range from the slope interval [h]: low uses ``slope_high``, high uses
        ``slope_low`` (``inf`` when ``slope_low <= 0``, i.e. no growth is possible).
    n : int
        Number of readings used.
    """

    slope: float
    intercept: float
    slope_low: float
    slope_high: float
    level_now: float
    remaining_h: float
    remaining_h_low: float
    remaining_h_high: float
    n: int


def normalise_case_drain_lpm(
    case_drain_lpm: float | np.ndarray,
    test_dp_bar: float | np.ndarray,
    oil_temp_c: float | np.ndarray,
    *,
    ref_dp_bar: float | None,
    ref_temp_c: float | None,
    oil_line: tuple[float, float] | None,
    flushing_lpm: float = 0.0,
) -> np.ndarray:
    """Scale case-drain readings to the reference test pressure and oil temperature.

    Parameters
    ----------
    case_drain_lpm : float or array
        Measured case-drain flow Q [L/min].
    test_dp_bar : float or array
        Pressure difference during the test dp_t [bar]; nan: not recorded.
    oil_temp_c : float or array
        Oil temperature during the test T [degC]; nan: not recorded.
    ref_dp_bar : float or None
        Model's reference test pressure dp_ref [bar]; None: no pressure scaling.
    ref_temp_c : float or None
        Model's reference oil temperature T_ref [degC]; None: no viscosity scaling.
    oil_line : tuple of float or None
        ASTM D341 coefficients (A, B) of the fleet oil, see
        :func:`monitor.models.oil.oil_line_from_spec`; None: no viscosity scaling.
    flushing_lpm : float, default 0
        Known flushing or charge-relief flow into the case [L/min], subtracted first.

    Returns
    -------
    numpy.ndarray
        Normalised leakage Q* [L/min]. Each factor is applied only where its condition
        is recorded; a reading without conditions is used as it is, less flushing (it
        can come out negative if the flushing flow is overstated).

    Notes
    -----
    ``Q* = (Q - Q_flush) (dp_ref / dp_t) (nu(T) / nu(T_ref))`` (laminar gap flow
    ``Q = b h^3 dp / (12 mu L)``, density taken as constant).

    References
    ----------
    Plane Poiseuille flow between parallel plates: F. M. White, Fluid Mechanics, 7th
    ed., McGraw-Hill 2011 (section from memory); ASTM D341-20 for nu(T).
    """
    q = np.asarray(case_drain_lpm, dtype=float) - float(flushing_lpm)
    dp = np.asarray(test_dp_bar, dtype=float)
    temp = np.asarray(oil_temp_c, dtype=float)
    if np.any(dp <= 0):
        raise ValueError("test_dp_bar must be > 0 bar where recorded (nan where not)")
    if ref_dp_bar is not None:
        if not (ref_dp_bar > 0):
            raise ValueError(f"ref_dp_bar must be > 0 bar or None, got {ref_dp_bar!r}")
        q = q * np.where(np.isnan(dp), 1.0, ref_dp_bar / dp)
    if ref_temp_c is not None and oil_line is not None:
        nu_ref = float(walther_viscosity_mm2s(ref_temp_c, *oil_line))
        nu = walther_viscosity_mm2s(temp, *oil_line)
        q = q * np.where(np.isnan(temp), 1.0, nu / nu_ref)
    return q


REFERENCE_TEMP_DISTANCE_K = 20.0
"""Default largest distance of a reading's oil temperature from the reference test
temperature for it to join the trend [K] (common practice, no source)."""

REFERENCE_DP_RATIO = (0.5, 2.0)
"""Default range of the test-pressure ratio dp_t / dp_ref for a reading to join the trend
[-] (common practice, no source)."""


def off_reference(
    test_dp_bar: float | np.ndarray,
    oil_temp_c: float | np.ndarray,
    *,
    ref_dp_bar: float | None,
    ref_temp_c: float | None,
    max_temp_distance_k: float = REFERENCE_TEMP_DISTANCE_K,
    dp_ratio_range: tuple[float, float] = REFERENCE_DP_RATIO,
) -> np.ndarray:
    """Readings taken too far from the reference test conditions to be trended.

    Parameters
    ----------
    test_dp_bar : float or array
        Pressure difference during the test dp_t [bar]; nan: not recorded.
    oil_temp_c : float or array
        Oil temperature during the test T [degC]; nan: not recorded.
    ref_dp_bar, ref_temp_c : float or None
        Model's reference test pressure [bar] and oil temperature [degC]; None: that
        condition is not checked.
    max_temp_distance_k : float, default 20
        Largest ``|T - T_ref|`` of a reading that is trended [K].
    dp_ratio_range : tuple of float, default (0.5, 2)
        Range of ``dp_t / dp_ref`` of a reading that is trended [-].

    Returns
    -------
    numpy.ndarray of bool
        True where ``|T - T_ref| > max_temp_distance_k`` or ``dp_t / dp_ref`` lies outside
        ``dp_ratio_range``; a condition not recorded counts as within.

    Raises
    ------
    ValueError
        If the distance is not positive or the ratio range does not hold 1.

    Notes
    -----
    Normalising (:func:`normalise_case_drain_lpm`) multiplies a reading by
    ``(dp_ref / dp_t) (nu(T) / nu(T_ref))``; far from the reference the laminar-leakage
    law and the viscosity line carry the whole answer (a reading at 5 degC in ISO VG 46
    oil is multiplied by about 13 to reach 50 degC), so such readings are shown but not
    trended. The limits are a rule of this project (common practice, no source).

    References
    ----------
    ASTM D341-20 for the viscosity line; F. M. White, Fluid Mechanics, 7th ed.,
    McGraw-Hill 2011, plane Poiseuille flow (section from memory).
    """
    if not (np.isfinite(max_temp_distance_k) and max_temp_distance_k > 0):
        raise ValueError(
            f"max_temp_distance_k must be a temperature distance > 0 K, got {max_temp_distance_k!r}"
        )
    lo, hi = (float(v) for v in dp_ratio_range)
    if not (0 < lo <= 1 <= hi < np.inf):
        raise ValueError(
            f"dp_ratio_range must be (low, high) with 0 < low <= 1 <= high, got {dp_ratio_range!r}"
        )
    dp = np.asarray(test_dp_bar, dtype=float)
    temp = np.asarray(oil_temp_c, dtype=float)
    off = np.zeros(np.broadcast(dp, temp).shape, bool)
    with np.errstate(invalid="ignore"):
        if ref_temp_c is not None:
            off |= np.abs(temp - float(ref_temp_c)) > max_temp_distance_k
        if ref_dp_bar is not None:
            ratio = dp / float(ref_dp_bar)
            off |= (ratio < lo) | (ratio > hi)
    return off


def clearance_ratio(leakage_ratio: float | np.ndarray) -> np.ndarray:
    """Gap growth implied by a leakage ratio at equal pressure and viscosity.

    Parameters
    ----------
    leakage_ratio : float or array
        Normalised leakage divided by the new-unit leakage [-].

    Returns
    -------
    numpy.ndarray
        Gap height ratio h / h_new [-]; nan for negative ratios.

    Notes
    -----
    Laminar gap flow scales with ``h^3``, so ``h / h_new = ratio^(1/3)``.

    References
    ----------
    Laminar flow between parallel plates (F. M. White, Fluid Mechanics, 7th ed., McGraw-Hill 2011,
    plane Poiseuille flow between parallel plates (section from memory)).
    """
    r = np.asarray(leakage_ratio, dtype=float)
    with np.errstate(invalid="ignore"):
        return np.where(r < 0, np.nan, np.cbrt(r))


def theil_sen(
    x: np.ndarray, y: np.ndarray, alpha: float = 0.95
) -> tuple[float, float, float, float]:
    """Theil-Sen slope, intercept and exact distribution-free slope confidence interval.

    Parameters
    ----------
    x : array (n,)
        Independent variable, e.g. hour meter [h].
    y : array (n,)
        Dependent variable, e.g. normalised case-drain flow [L/min].
    alpha : float, default 0.95
        Confidence level of the slope interval [-], in (0, 1).

    Returns
    -------
    tuple of float
        (slope, intercept, slope_low, slope_high) [y-unit per x-unit, y-unit, ...];
        slope_low and slope_high are nan when n points cannot give an interval at the
        level (n = 3 or 4 at 95 %, see :func:`theil_sen_batch`).

    Raises
    ------
    ValueError
        If fewer than two points, non-finite values, or all x equal.

    Notes
    -----
    One row of :func:`theil_sen_batch`, which holds the definition.

    References
    ----------
    Theil (1950); Sen, P. K. (1968), J. Am. Stat. Assoc. 63, 1379-1389.
    """
    xs, ys = np.asarray(x, dtype=float), np.asarray(y, dtype=float)
    if xs.shape != ys.shape or xs.ndim != 1 or xs.size < 2:
        raise ValueError("x and y must be 1-D arrays of equal length >= 2")
    if not (np.all(np.isfinite(xs)) and np.all(np.isfinite(ys))):
        raise ValueError("x and y must be finite (drop missing readings first)")
    if np.unique(xs).size < 2:
        raise ValueError("x must have at least two distinct values")
    row = theil_sen_batch([xs], [ys], alpha)[0]
    return tuple(float(v) for v in row)  # type: ignore[return-value]


def remaining_wear_h(limit: float, level: float, slope: float, low: float, high: float) -> tuple:
    """Hours until a fitted level reaches the limit, and the range from the slope bounds.

    Parameters are the limit and level [L/min] and slope, low and high slope bound
    [L/min per h]. Returns (remaining, remaining_low, remaining_high) [h]: 0 at or past
    the limit, nan without growth (see :class:`WearTrend`).
    """
    if math.isnan(slope) or math.isnan(level):
        return (math.nan,) * 3
    if level >= limit:
        return (0.0, 0.0, 0.0)
    if slope <= 0:
        return (math.nan,) * 3
    gap = limit - level
    r_low = gap / high if high > 0 else math.nan
    r_high = gap / low if low > 0 else (math.inf if not math.isnan(low) else math.nan)
    return (gap / slope, r_low, r_high)


def remaining_wear_h_batch(
    limit: np.ndarray, level: np.ndarray, slope: np.ndarray, low: np.ndarray, high: np.ndarray
) -> np.ndarray:
    """:func:`remaining_wear_h` of many fits at once, with the same results.

    Parameters are arrays of the limit and level [L/min] and of the slope and its low
    and high bound [L/min per h]. Returns an (m, 3) array of remaining, remaining_low and
    remaining_high [h] (0 at or past the limit, nan without growth, inf for the high end
    when the low slope bound is not positive).
    """
    limit, level, slope, low, high = (
        np.asarray(v, dtype=float) for v in (limit, level, slope, low, high)
    )
    gap = limit - level
    with np.errstate(divide="ignore", invalid="ignore"):
        grown = np.column_stack(
            [
                gap / slope,
                np.where(high > 0, gap / high, np.nan),
                np.where(low > 0, gap / low, np.where(np.isnan(low), np.nan, np.inf)),
            ]
        )
        known = ~(np.isnan(slope) | np.isnan(level))
        past = known & (level >= limit)
        grow = known & ~past & (slope > 0)
    out = np.full((gap.size, 3), np.nan)
    out[past] = 0.0
    out[grow] = grown[grow]
    return out


def case_drain_trend(
    hour_meter_h: np.ndarray,
    normalised_lpm: np.ndarray,
    *,
    limit_lpm: float,
    hour_meter_now_h: float | None = None,
    alpha: float = 0.95,
    min_readings: int = MIN_READINGS,
) -> WearTrend:
    """Wear trend of one component and the hours until its case drain reaches the limit.

    Parameters
    ----------
    hour_meter_h : array (n,)
        Hour meter at each reading since the last rebuild [h].
    normalised_lpm : array (n,)
        Normalised case-drain flow, see :func:`normalise_case_drain_lpm` [L/min];
        readings with nan in either array are dropped.
    limit_lpm : float
        Rebuild limit of the normalised flow [L/min].
    hour_meter_now_h : float, optional
        Hour meter now [h]; default the last reading's.
    alpha : float, default 0.95
        Confidence level of the slope interval [-].
    min_readings : int, default 3
        Fewest readings for an estimate.

    Returns
    -------
    WearTrend
        All fields nan (``n`` set) with fewer than ``min_readings`` readings or a
        single distinct hour meter. ``remaining_h`` is 0 when the fitted level now is
        at or past the limit, nan when the slope is not positive. The slope bounds and
        the remaining-hours range are nan when the readings are too few for an interval
        at ``alpha`` (3 or 4 readings at 95 %, see :func:`theil_sen_batch`).

    Notes
    -----
    ``level_now = intercept + slope H_now``; ``remaining = (Q_limit - level_now) /
    slope``; low / high use the upper / lower slope bound.

    References
    ----------
    Sen, P. K. (1968), J. Am. Stat. Assoc. 63, 1379-1389.
    """
    if not (np.isfinite(limit_lpm) and limit_lpm > 0):
        raise ValueError(f"limit_lpm must be a flow > 0 L/min, got {limit_lpm!r}")
    x, y = np.asarray(hour_meter_h, dtype=float), np.asarray(normalised_lpm, dtype=float)
    if x.shape != y.shape or x.ndim != 1:
        raise ValueError("hour_meter_h and normalised_lpm must be 1-D arrays of equal length")
    keep = np.isfinite(x) & np.isfinite(y)
    x, y = x[keep], y[keep]
    n = int(x.size)
    if n < min_readings or np.unique(x).size < 2:
        return WearTrend(*(math.nan,) * 8, n=n)
    slope, intercept, low, high = theil_sen(x, y, alpha)
    now = float(x.max()) if hour_meter_now_h is None else float(hour_meter_now_h)
    level = intercept + slope * now
    rem = remaining_wear_h(limit_lpm, level, slope, low, high)
    return WearTrend(slope, intercept, low, high, level, *rem, n=n)


PAIR_BLOCK = 4_000_000
"""Most pairwise slopes held at once by :func:`theil_sen_batch` (about 32 MB)."""


PAIR_ROWS = 256
"""Series per block of :func:`_pair_slopes` (a block's differences stay in the CPU cache)."""


def _pair_slopes(x: np.ndarray, y: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Pairwise slopes of k series of equal length n (rows of x, y), unsorted.

    Every pair i < j once, in blocks by j (block j holds the pairs (0..j-1, j)), so the
    pairs of the first n - 1 points are the leading (n - 1)(n - 2) / 2 columns. A pair
    with equal x gives ``inf`` and is not counted. The differences are taken on the
    transposed series, a block of :data:`PAIR_ROWS` series at a time, so that every
    subtraction runs over contiguous memory.

    Returns the (k, n(n-1)/2) slopes and, per series, the number of counted pairs of all
    points and of the first n - 1 points.
    """
    k, n = x.shape
    pairs, head = n * (n - 1) // 2, (n - 1) * (n - 2) // 2
    slopes = np.empty((k, pairs))
    count, count_head = np.empty(k, np.int64), np.empty(k, np.int64)
    for s in range(0, k, PAIR_ROWS):
        xt, yt = (
            np.ascontiguousarray(x[s : s + PAIR_ROWS].T),
            np.ascontiguousarray(y[s : s + PAIR_ROWS].T),
        )
        dx, dy = np.empty((pairs, xt.shape[1])), np.empty((pairs, xt.shape[1]))
        off = 0
        for j in range(1, n):
            np.subtract(xt[:j], xt[j], out=dx[off : off + j])
            np.subtract(yt[:j], yt[j], out=dy[off : off + j])
            off += j
        ok = dx != 0
        if ok.all():
            q = np.divide(dy, dx, out=dy)
        else:
            with np.errstate(divide="ignore", invalid="ignore"):
                q = np.where(ok, dy / np.where(ok, dx, 1.0), np.inf)
        slopes[s : s + xt.shape[1]] = q.T
        count[s : s + xt.shape[1]] = ok.sum(axis=0)
        count_head[s : s + xt.shape[1]] = ok[:head].sum(axis=0)
    return slopes, count, count_head


def _fit_rows(
    slopes: np.ndarray, count: np.ndarray, x: np.ndarray, y: np.ndarray, level: float
) -> np.ndarray:
    """(k, 4) slope, intercept, low, high from each row's sorted pairwise slopes."""
    k, n = x.shape
    if slopes.shape[1] == 0:
        return np.full((k, 4), np.nan)
    rows = np.arange(k)
    c = np.maximum(count, 1)
    mid_lo, mid_hi = slopes[rows, (c - 1) // 2], slopes[rows, c // 2]
    slope = np.where(c % 2 == 1, mid_lo, (mid_lo + mid_hi) / 2.0)
    intercept = np.median(y, axis=1) - slope * np.median(x, axis=1)
    rank = kendall.interval_ranks(x, level)
    ok = rank >= 1
    last = slopes.shape[1] - 1
    low = np.where(ok, slopes[rows, np.clip(rank - 1, 0, last)], np.nan)
    high = np.where(ok, slopes[rows, np.clip(count - rank, 0, last)], np.nan)
    out = np.column_stack([slope, intercept, low, high])
    out[count == 0] = np.nan
    return out


def _theil_sen_rows(
    x: np.ndarray, y: np.ndarray, level: float, before_last: bool = False
) -> tuple[np.ndarray, np.ndarray | None]:
    """(k, 4) slope, intercept, low, high of k series of equal length n (rows of x, y),
    and, with ``before_last``, the same of each series without its last point (taken
    from the same pairwise slopes: the pairs that do not involve the last point)."""
    slopes, count, count_head = _pair_slopes(x, y)
    before = None
    if before_last:
        head = slopes[:, : (x.shape[1] - 1) * (x.shape[1] - 2) // 2].copy()
        head.sort(axis=1)
        before = _fit_rows(head, count_head, x[:, :-1], y[:, :-1], level)
    slopes.sort(axis=1)
    return _fit_rows(slopes, count, x, y, level), before


def theil_sen_batch(xs: list[np.ndarray], ys: list[np.ndarray], alpha: float = 0.95) -> np.ndarray:
    """Theil-Sen slope, intercept and exact slope confidence interval of many series.

    Parameters
    ----------
    xs, ys : list of array (n_i,)
        Independent and dependent values of each series (finite, n_i >= 2), e.g. hour
        meter [h] and normalised case-drain flow [L/min].
    alpha : float, default 0.95
        Confidence level of the slope interval [-], in (0, 1).

    Returns
    -------
    numpy.ndarray (m, 4)
        Per series: slope, intercept, slope_low, slope_high [y-unit per x-unit, y-unit,
        ...]; a row of nan where all x of a series are equal; slope_low and slope_high
        nan where no pair of order statistics reaches the level (n = 3 and 4 at 95 %:
        the widest interval, smallest to largest slope, covers ``1 - 2/n!``, 67 % and
        92 %).

    Notes
    -----
    Slope: median of the ``N'`` pairwise slopes ``(y_j - y_i) / (x_j - x_i)`` over pairs
    with ``x_i != x_j``; intercept ``median(y) - slope median(x)``. Interval: the sorted
    slopes ``[S_(L), S_(N'+1-L)]`` with the largest rank ``L`` for which
    ``1 - 2 P(K <= L - 1) >= alpha``, ``K`` the number of discordant pairs under the
    null hypothesis of Kendall's test (:func:`monitor.models.kendall.interval_rank`:
    exact counts with ties in x up to 50 points, normal approximation with continuity
    correction above). The interval is distribution-free: it holds its level for any
    continuous, independent errors. Ties in y (rounded readings) are not corrected for.
    Series of equal length are stacked and their pairwise slopes taken over i < j,
    sorted once per row.

    References
    ----------
    Theil, H. (1950), A rank-invariant method of linear and polynomial regression
    analysis, Proc. Kon. Ned. Akad. Wetensch. 53; Sen, P. K. (1968), Estimates of the
    regression coefficient based on Kendall's tau, J. Am. Stat. Assoc. 63, 1379-1389;
    Hollander, M., Wolfe, D. A. and Chicken, E., Nonparametric Statistical Methods, 3rd
    ed., Wiley 2014, ch. 9 (the confidence interval based on the Theil statistic;
    section number from memory).
    """
    return _batch(xs, ys, alpha, before_last=False)[0]


def theil_sen_batch_and_before_last(
    xs: list[np.ndarray], ys: list[np.ndarray], alpha: float = 0.95
) -> tuple[np.ndarray, np.ndarray]:
    """:func:`theil_sen_batch` of each series, and of each series without its last point.

    Parameters
    ----------
    xs, ys : list of array (n_i,)
        Independent and dependent values of each series (finite, n_i >= 2), e.g. hour
        meter [h] and normalised case-drain flow [L/min].
    alpha : float, default 0.95
        Confidence level of the slope interval [-], in (0, 1).

    Returns
    -------
    tuple of numpy.ndarray (m, 4)
        Per series, slope, intercept, slope_low, slope_high [y-unit per x-unit, y-unit,
        ...] of all points, then of the points before the last; a row of nan where all
        x of the points taken are equal or fewer than two points are left.

    Notes
    -----
    The pairwise slopes of the points before the last are the pairwise slopes of all
    points less those that involve the last point, so both fits share one set of
    differences; each is then :func:`theil_sen_batch` element by element (same results
    as two calls of :func:`theil_sen_batch`).

    References
    ----------
    Theil (1950); Sen (1968), J. Am. Stat. Assoc. 63, 1379-1389.
    """
    return _batch(xs, ys, alpha, before_last=True)


def _batch(
    xs: list[np.ndarray], ys: list[np.ndarray], alpha: float, *, before_last: bool
) -> tuple[np.ndarray, np.ndarray]:
    if len(xs) != len(ys):
        raise ValueError("xs and ys must hold the same number of series")
    if not (0 < alpha < 1):
        raise ValueError(f"alpha must be a confidence level in (0, 1), got {alpha!r}")
    out, prev = np.full((len(xs), 4), np.nan), np.full((len(xs), 4), np.nan)
    if not xs:
        return out, prev
    shapes = [_shape(x) for x in xs]
    if shapes != [_shape(y) for y in ys] or any(len(sh) != 1 or sh[0] < 2 for sh in shapes):
        raise ValueError("every series needs x and y of equal length >= 2")
    sizes = np.array([sh[0] for sh in shapes], dtype=np.int64)
    for n in np.unique(sizes):
        idx = np.flatnonzero(sizes == n)
        step = max(1, PAIR_BLOCK // max(1, n * (n - 1) // 2))
        for s in range(0, idx.size, step):
            part = idx[s : s + step]
            x = np.array([xs[i] for i in part], dtype=float)
            y = np.array([ys[i] for i in part], dtype=float)
            if not (np.isfinite(x).all() and np.isfinite(y).all()):
                raise ValueError("x and y must be finite (drop missing readings first)")
            out[part], before = _theil_sen_rows(x, y, alpha, before_last)
            if before is not None:
                prev[part] = before
    return out, prev


def _shape(v: object) -> tuple:
    return v.shape if isinstance(v, np.ndarray) else np.shape(v)
