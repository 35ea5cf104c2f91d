"""Pressure cycles of a trace: turning points, rainflow counting, cycle matrices.

Fatigue of a loop's hoses, housings and valve plates follows the pressure cycles it sees,
which a time-at-pressure histogram cannot tell. A trace is first reduced to its **turning
points** (the peaks and valleys), chunk by chunk with the state carried between chunks, so
a long trace never has to be held in memory; the cycles are then counted by the rainflow
method of ASTM E1049-85 with the maintained ``rainflow`` package.

Turning points pass a **hysteresis gate**: a peak or valley is kept only once the signal
has moved back from it by more than ``hysteresis_bar``. This drops the small reversals of
sensor noise and of the logger's resolution (thousands per second at 1 kHz) and with them
only cycles whose range is below the gate. With a gate of 0 the turning points are the
plain reversals, the same as ``rainflow.reversals``.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import numpy.typing as npt
import rainflow

DEFAULT_HYSTERESIS_BAR = 5.0
"""Hysteresis gate of the turning points [bar] (common practice, no source: about 1 % of a
typical relief setting and above the noise of a logger's pressure transducer)."""

DEFAULT_RANGE_LEVELS_BAR = (50.0, 100.0, 200.0)
"""Cycle ranges [bar] at and above which cycles per operating hour are reported."""

DEFAULT_CYCLE_BIN_BAR = 25.0
"""Bin width of the default range and mean edges of the cycle matrix [bar]."""


@dataclass(frozen=True)
class TurningCarry:
    """State of the turning-point gate after a chunk.

    ``started``: the first sample was seen (and kept); ``direction``: +1 while a peak is
    pending, -1 while a valley is pending, 0 before the signal first left the gate around
    the first sample; ``value`` and ``time_s``: the pending extreme (or the first sample).
    """

    started: bool = False
    direction: int = 0
    value: float = np.nan
    time_s: float = np.nan


def plain_reversals(values: np.ndarray) -> np.ndarray:
    """Indices of the first sample, every strict reversal and the last distinct value.

    A run of equal values counts once, at its first sample.

    Parameters
    ----------
    values : numpy.ndarray (n,)
        A series (any unit).

    Returns
    -------
    numpy.ndarray of int
        Sorted indices into ``values``.
    """
    if values.size == 0:
        return np.zeros(0, dtype=np.int64)
    keep = np.flatnonzero(np.r_[True, values[1:] != values[:-1]])
    step = np.diff(values[keep])
    inner = np.flatnonzero(step[:-1] * step[1:] < 0) + 1
    if keep.size == 1:
        return keep
    return np.concatenate([keep[:1], keep[inner], keep[-1:]])  # sorted, no repeats


def _gate(values: list, times: list, carry: TurningCarry, hysteresis: float):
    """The hysteresis gate over candidate points (sequential by nature; candidates only)."""
    out_v, out_t = [], []
    started, d, cv, ct = carry.started, carry.direction, carry.value, carry.time_s
    for v, t in zip(values, times, strict=True):
        if not started:
            started, cv, ct = True, v, t
            out_v.append(v)
            out_t.append(t)
        elif d > 0:
            if v > cv:
                cv, ct = v, t
            elif cv - v > hysteresis:
                out_v.append(cv)
                out_t.append(ct)
                d, cv, ct = -1, v, t
        elif d < 0:
            if v < cv:
                cv, ct = v, t
            elif v - cv > hysteresis:
                out_v.append(cv)
                out_t.append(ct)
                d, cv, ct = 1, v, t
        elif abs(v - cv) > hysteresis:
            d, cv, ct = (1 if v > cv else -1), v, t
    return out_v, out_t, TurningCarry(started, d, cv, ct)


def turning_points(
    values: npt.ArrayLike,
    time_s: npt.ArrayLike,
    *,
    hysteresis: float = DEFAULT_HYSTERESIS_BAR,
    carry: TurningCarry | None = None,
    final: bool = True,
) -> tuple[np.ndarray, np.ndarray, TurningCarry]:
    """Turning points of a series (one chunk of it), gated by hysteresis.

    Parameters
    ----------
    values : array_like (n,)
        The series, e.g. high-side pressure [bar]; finite.
    time_s : array_like (n,)
        Sample times [s].
    hysteresis : float, default 5
        Gate in the unit of ``values``, >= 0; 0 keeps every strict reversal.
    carry : TurningCarry, optional
        State after the previous chunk (chunks follow each other without overlap).
    final : bool, default True
        True for the last chunk: the pending extreme is kept as the last point.

    Returns
    -------
    values, time_s : numpy.ndarray
        The turning points found in this chunk and their times. The first sample of the
        series is always the first point, the last pending extreme the last one.
    TurningCarry
        State to pass with the next chunk.

    Notes
    -----
    A pending peak ``v*`` is kept when a later value falls to ``v < v* - h``; a pending
    valley when a later value rises to ``v > v* + h``. Only the chunk's plain reversals
    (:func:`plain_reversals`) are fed to the gate: the points between two reversals are
    monotone and cannot change its state. The same input split into any chunks gives the
    same points.

    References
    ----------
    ASTM E1049-85 (2017), *Standard Practices for Cycle Counting in Fatigue Analysis*,
    §3.2 (peaks and valleys) and §5.4.4 (rainflow counting of the reversals).
    """
    if not (np.isfinite(hysteresis) and hysteresis >= 0):
        raise ValueError(f"hysteresis must be >= 0, got {hysteresis!r}")
    v = np.asarray(values, dtype=float)
    t = np.asarray(time_s, dtype=float)
    if v.shape != t.shape or v.ndim != 1:
        raise ValueError("values and time_s must be 1-D arrays of the same length")
    idx = plain_reversals(v)
    out_v, out_t, state = _gate(
        v[idx].tolist(), t[idx].tolist(), carry or TurningCarry(), hysteresis
    )
    if final and state.direction != 0:
        out_v.append(state.value)
        out_t.append(state.time_s)
    return np.array(out_v, dtype=float), np.array(out_t, dtype=float), state


def rainflow_cycles(turning_points_bar: npt.ArrayLike) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Rainflow cycles of a series of turning points.

    Parameters
    ----------
    turning_points_bar : array_like (m,)
        Peaks and valleys [bar] (:func:`turning_points`); any series works.

    Returns
    -------
    range_bar, mean_bar, count : numpy.ndarray (c,)
        Range [bar], mean [bar] and count (1 for a full cycle, 0.5 for a half cycle) of
        every cycle, in the order counted.

    Notes
    -----
    Counted by ``rainflow.extract_cycles``: three-point rainflow counting with the residue
    counted as half cycles.

    References
    ----------
    ASTM E1049-85 (2017), §5.4.4 *Rainflow Counting*, Fig. 6 (worked example).
    """
    tp = np.asarray(turning_points_bar, dtype=float)
    if tp.ndim != 1 or not np.all(np.isfinite(tp)):
        raise ValueError("turning_points_bar must be a 1-D array of finite pressures")
    # the last point repeated changes no cycle, but makes the library count the half
    # cycle of a series of exactly two points (it yields only the first point of those)
    series = tp.tolist() + tp[-1:].tolist()
    rows = np.array([c[:3] for c in rainflow.extract_cycles(series)], dtype=float)
    rows = rows.reshape(-1, 3)
    return rows[:, 0], rows[:, 1], rows[:, 2]


def cycle_edges_bar(highest_bar: float, width_bar: float = DEFAULT_CYCLE_BIN_BAR) -> np.ndarray:
    """Edges from 0 in steps of ``width_bar`` up to ``highest_bar`` rounded up [bar]
    (at least one bin)."""
    if not (np.isfinite(width_bar) and width_bar > 0):
        raise ValueError(f"width_bar must be > 0 bar, got {width_bar!r}")
    top = max(1, int(np.ceil(max(highest_bar, 0.0) / width_bar)))
    if highest_bar == top * width_bar:
        top += 1  # keep the highest value inside a half-open bin
    return np.arange(top + 1) * width_bar


def range_mean_matrix(
    range_bar: npt.ArrayLike,
    mean_bar: npt.ArrayLike,
    count: npt.ArrayLike,
    range_edges_bar: npt.ArrayLike,
    mean_edges_bar: npt.ArrayLike,
) -> np.ndarray:
    """Cycle counts by range (rows) and mean (columns).

    Parameters
    ----------
    range_bar, mean_bar, count : array_like (c,)
        From :func:`rainflow_cycles`.
    range_edges_bar, mean_edges_bar : array_like
        Bin edges [bar], strictly increasing. Bins are half-open ``[low, high)``; cycles
        outside the edges are not counted (:func:`cycle_edges_bar` covers every cycle).

    Returns
    -------
    numpy.ndarray (R, M)
        Cycles per bin (half cycles count 0.5).
    """
    r = np.asarray(range_bar, dtype=float)
    m = np.asarray(mean_bar, dtype=float)
    c = np.asarray(count, dtype=float)
    re_, me = np.asarray(range_edges_bar, float), np.asarray(mean_edges_bar, float)
    for name, e in (("range_edges_bar", re_), ("mean_edges_bar", me)):
        if e.ndim != 1 or e.size < 2 or np.any(~(np.diff(e) > 0)):
            raise ValueError(f"{name} must be at least two strictly increasing edges")
    ir = np.searchsorted(re_, r, side="right") - 1
    im = np.searchsorted(me, m, side="right") - 1
    ok = (ir >= 0) & (ir < re_.size - 1) & (im >= 0) & (im < me.size - 1)
    n_m = me.size - 1
    flat = np.bincount(ir[ok] * n_m + im[ok], weights=c[ok], minlength=(re_.size - 1) * n_m)
    return flat.reshape(re_.size - 1, n_m)


def cycles_per_hour(
    range_bar: npt.ArrayLike,
    count: npt.ArrayLike,
    *,
    operating_hours: float,
    levels_bar: npt.ArrayLike = DEFAULT_RANGE_LEVELS_BAR,
) -> np.ndarray:
    """Cycles per operating hour with a range at or above each level.

    Parameters
    ----------
    range_bar, count : array_like (c,)
        From :func:`rainflow_cycles`.
    operating_hours : float
        Hours the trace covers, gaps left out [h], > 0.
    levels_bar : array_like (L,), default (50, 100, 200)
        Range levels [bar].

    Returns
    -------
    numpy.ndarray (L,)
        Cycles per hour [1/h].

    Notes
    -----
    ``N_l = sum_j c_j [r_j >= l] / t_op``.
    """
    if not (np.isfinite(operating_hours) and operating_hours > 0):
        raise ValueError(f"operating_hours must be > 0 h, got {operating_hours!r}")
    r = np.asarray(range_bar, dtype=float)
    c = np.asarray(count, dtype=float)
    lv = np.atleast_1d(np.asarray(levels_bar, dtype=float))
    return (c[np.newaxis, :] * (r[np.newaxis, :] >= lv[:, np.newaxis])).sum(
        axis=1
    ) / operating_hours


@dataclass(frozen=True)
class CycleSummary:
    """Rainflow cycles of a trace's high-side pressure.

    Attributes
    ----------
    range_edges_bar, mean_edges_bar : numpy.ndarray
        Bin edges of the matrix [bar].
    counts : numpy.ndarray (R, M)
        Cycles by range and mean.
    levels_bar : numpy.ndarray (L,)
        Range levels [bar].
    per_hour : numpy.ndarray (L,)
        Cycles per operating hour at or above each level [1/h].
    total_cycles : float
        All cycles counted (half cycles as 0.5).
    """

    range_edges_bar: np.ndarray
    mean_edges_bar: np.ndarray
    counts: np.ndarray
    levels_bar: np.ndarray
    per_hour: np.ndarray
    total_cycles: float


def summarise_cycles(
    turning_points_bar: npt.ArrayLike,
    *,
    operating_hours: float,
    range_edges_bar: npt.ArrayLike | None = None,
    mean_edges_bar: npt.ArrayLike | None = None,
    levels_bar: npt.ArrayLike = DEFAULT_RANGE_LEVELS_BAR,
) -> CycleSummary:
    """Rainflow count, range-by-mean matrix and cycles per hour of a trace.

    Parameters
    ----------
    turning_points_bar : array_like (m,)
        Turning points of the high-side pressure [bar].
    operating_hours : float
        Hours the trace covers, gaps left out [h].
    range_edges_bar, mean_edges_bar : array_like, optional
        Matrix bin edges [bar]; default 25-bar bins from 0 covering every cycle.
    levels_bar : array_like, default (50, 100, 200)
        Range levels for cycles per hour [bar].

    Returns
    -------
    CycleSummary
    """
    rng, mean, count = rainflow_cycles(turning_points_bar)
    top = float(np.max(turning_points_bar, initial=0.0))
    r_edges = cycle_edges_bar(top) if range_edges_bar is None else np.asarray(range_edges_bar)
    m_edges = cycle_edges_bar(top) if mean_edges_bar is None else np.asarray(mean_edges_bar)
    return CycleSummary(
        range_edges_bar=np.asarray(r_edges, dtype=float),
        mean_edges_bar=np.asarray(m_edges, dtype=float),
        counts=range_mean_matrix(rng, mean, count, r_edges, m_edges),
        levels_bar=np.atleast_1d(np.asarray(levels_bar, dtype=float)),
        per_hour=cycles_per_hour(
            rng, count, operating_hours=operating_hours, levels_bar=levels_bar
        ),
        total_cycles=float(count.sum()),
    )
