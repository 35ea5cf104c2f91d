"""Time at pressure from a sampled pressure trace of a closed drive loop.

A handheld logger on the loop's two gauge ports records both loop pressures (and often a
shaft speed) as a time series. These functions turn such samples into the time-at-pressure
histograms that a drive controller logs, so that a trace enters the life model like any
logged histogram. They work on whole arrays or on one chunk of a long trace at a time:
every result is a sum over samples, so chunk results add up.

Conventions
-----------
- The **high side** at each sample is the larger of the two loop pressures and the **low
  side** the smaller one: in a closed loop either port can be the working side, depending
  on the direction of travel.
- Band pressures are **high-side gauge pressures**, like logged histograms; the life model
  subtracts the low side (charge pressure) later. The mean low side is reported beside the
  histogram so that the two can be compared.
- **Sample duration** is the time to the next sample (a forward hold): the last sample of a
  trace gets none, and an interval longer than ``max_gap_s`` is a gap in the recording and
  gets none either.
- Bands are half-open, ``[low, high)``; a value exactly on an edge belongs to the band above
  it, and the top edge of the last band belongs to the last band.
"""

from __future__ import annotations

import numpy as np
import numpy.typing as npt

DEFAULT_MAX_GAP_S = 2.0
"""Longest interval between two samples still taken as continuous recording [s] (common
practice, no source: ten times the slowest usual logger interval of 0.1 s, well below the
time a drive spends at one load)."""

DEFAULT_BAND_WIDTH_BAR = 25.0
"""Width of the default pressure bands [bar] (common practice, no source: the band width of
many on-board load histograms)."""

DEFAULT_SPEED_BAND_WIDTH_RPM = 250.0
"""Width of the default speed bands of the pressure-by-speed matrix [rpm] (common practice,
no source)."""

PRESSURE_TOP_BAR = 1000.0
"""Top of the valid gauge pressure range [bar]; default bands cover 0 to this."""

SPEED_TOP_RPM = 10000.0
"""Top of the valid speed range [rpm]; default speed bands cover 0 to this."""


def loop_sides_bar(
    pressure_a_bar: npt.ArrayLike, pressure_b_bar: npt.ArrayLike
) -> tuple[np.ndarray, np.ndarray]:
    """High and low side of a closed loop at each sample.

    Parameters
    ----------
    pressure_a_bar, pressure_b_bar : array_like (n,)
        Gauge pressure of loop side A and side B [bar].

    Returns
    -------
    high_bar, low_bar : numpy.ndarray (n,)
        ``max(p_A, p_B)`` and ``min(p_A, p_B)`` [bar]; nan where either side is nan.

    Notes
    -----
    ``p_high = max(p_A, p_B)``, ``p_low = min(p_A, p_B)``: the working side of a closed loop
    is the one at the higher pressure; the other returns to the pump at charge pressure.
    """
    a = np.asarray(pressure_a_bar, dtype=float)
    b = np.asarray(pressure_b_bar, dtype=float)
    if a.shape != b.shape:
        raise ValueError(
            f"pressure_a_bar and pressure_b_bar must have the same shape, got {a.shape} "
            f"and {b.shape}"
        )
    return np.maximum(a, b), np.minimum(a, b)


def sample_durations_s(
    time_s: npt.ArrayLike, *, max_gap_s: float = DEFAULT_MAX_GAP_S
) -> tuple[np.ndarray, np.ndarray]:
    """Duration each sample stands for, and where the recording has gaps.

    Parameters
    ----------
    time_s : array_like (n,)
        Sample times [s], strictly increasing.
    max_gap_s : float, default 2.0
        Longest interval still taken as continuous [s], > 0.

    Returns
    -------
    duration_s : numpy.ndarray (n,)
        Time from each sample to the next [s]; 0 for the last sample and for a sample
        followed by a gap.
    gap_after : numpy.ndarray of bool (n,)
        True where the interval from sample ``i`` to ``i + 1`` is longer than ``max_gap_s``
        (False for the last sample).

    Notes
    -----
    ``dt_i = t_{i+1} - t_i`` if ``t_{i+1} - t_i <= max_gap_s`` else 0; ``dt_{n-1} = 0``.
    """
    if not (np.isfinite(max_gap_s) and max_gap_s > 0):
        raise ValueError(f"max_gap_s must be a time > 0 s, got {max_gap_s!r}")
    t = np.asarray(time_s, dtype=float)
    if t.ndim != 1:
        raise ValueError(f"time_s must be one-dimensional, got shape {t.shape}")
    step = np.diff(t)
    if np.any(~(step > 0)):
        raise ValueError("time_s must be finite and strictly increasing")
    gap = np.zeros(t.size, dtype=bool)
    gap[:-1] = step > max_gap_s
    duration = np.zeros(t.size)
    duration[:-1] = np.where(gap[:-1], 0.0, step)
    return duration, gap


def band_edges(
    edges: npt.ArrayLike | None = None,
    *,
    width: float = DEFAULT_BAND_WIDTH_BAR,
    top: float = PRESSURE_TOP_BAR,
) -> np.ndarray:
    """Band edges covering 0 to ``top``: given edges, extended with default-width bands.

    Parameters
    ----------
    edges : array_like (k,), optional
        Band edges to keep [bar or rpm], strictly increasing, >= 0, at least two. None:
        bands of ``width`` from 0.
    width : float, default 25
        Width of the bands added above the last given edge (or of all bands) [bar or rpm].
    top : float, default 1000
        Highest value to cover [bar or rpm].

    Returns
    -------
    numpy.ndarray
        Strictly increasing edges from 0 to at least ``top``: ``[0, e_0)`` if the first
        given edge is above 0, the given bands, then ``e_k + j * width`` up to ``top``.
    """
    if not (np.isfinite(width) and width > 0):
        raise ValueError(f"width must be > 0, got {width!r}")
    if edges is None:
        return np.arange(int(np.ceil(top / width)) + 1) * width
    e = np.asarray(edges, dtype=float)
    if e.ndim != 1 or e.size < 2 or not np.all(np.isfinite(e)) or np.any(np.diff(e) <= 0):
        raise ValueError("edges must be at least two finite, strictly increasing values")
    if e[0] < 0:
        raise ValueError(f"edges must start at 0 or above, got {e[0]!r}")
    low = [0.0] if e[0] > 0 else []
    n_above = max(0, int(np.ceil((top - e[-1]) / width)))
    above = e[-1] + np.arange(1, n_above + 1) * width
    return np.concatenate([low, e, above])


def band_index(values: np.ndarray, edges: np.ndarray) -> np.ndarray:
    """Band of each value on ``edges`` (half-open bands, last band closed); -1 outside."""
    idx = np.searchsorted(edges, values, side="right") - 1
    idx[values == edges[-1]] = edges.size - 2
    idx[(idx < 0) | (idx >= edges.size - 1) | np.isnan(values)] = -1
    return idx


def time_at_pressure_h(
    high_bar: npt.ArrayLike, duration_s: npt.ArrayLike, edges_bar: npt.ArrayLike
) -> np.ndarray:
    """Hours at pressure: each sample's duration added to the band of its high side.

    Parameters
    ----------
    high_bar : array_like (n,)
        High-side gauge pressure at each sample [bar].
    duration_s : array_like (n,)
        Duration of each sample [s] (:func:`sample_durations_s`).
    edges_bar : array_like (B + 1,)
        Band edges [bar], strictly increasing.

    Returns
    -------
    numpy.ndarray (B,)
        Hours per band [h]. Samples outside the edges are not counted; edges from
        :func:`band_edges` cover every valid pressure.

    Notes
    -----
    ``t_b = sum_i dt_i [e_b <= p_i < e_{b+1}] / 3600``.
    """
    p, dt, edges = _check_samples(high_bar, duration_s, edges_bar, "edges_bar")
    idx = band_index(p, edges)
    ok = idx >= 0
    seconds = np.bincount(idx[ok], weights=dt[ok], minlength=edges.size - 1)
    return seconds / 3600.0


def time_at_pressure_speed_h(
    high_bar: npt.ArrayLike,
    speed_rpm: npt.ArrayLike,
    duration_s: npt.ArrayLike,
    edges_bar: npt.ArrayLike,
    speed_edges_rpm: npt.ArrayLike,
) -> np.ndarray:
    """Hours at pressure by speed: each sample's duration added to its (pressure, speed) cell.

    Parameters
    ----------
    high_bar : array_like (n,)
        High-side gauge pressure [bar].
    speed_rpm : array_like (n,)
        Shaft speed [rpm].
    duration_s : array_like (n,)
        Duration of each sample [s].
    edges_bar : array_like (B + 1,)
        Pressure band edges [bar].
    speed_edges_rpm : array_like (S + 1,)
        Speed band edges [rpm].

    Returns
    -------
    numpy.ndarray (B, S)
        Hours per cell [h]; samples outside either set of edges are not counted.

    Notes
    -----
    ``t_bs = sum_i dt_i [p_i in band b] [n_i in band s] / 3600``.
    """
    p, dt, edges = _check_samples(high_bar, duration_s, edges_bar, "edges_bar")
    n, _, s_edges = _check_samples(speed_rpm, duration_s, speed_edges_rpm, "speed_edges_rpm")
    ip, js = band_index(p, edges), band_index(n, s_edges)
    ok = (ip >= 0) & (js >= 0)
    n_s = s_edges.size - 1
    cells = np.bincount(ip[ok] * n_s + js[ok], weights=dt[ok], minlength=(edges.size - 1) * n_s)
    return cells.reshape(edges.size - 1, n_s) / 3600.0


def _check_samples(
    values: npt.ArrayLike, duration_s: npt.ArrayLike, edges: npt.ArrayLike, name: str
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    v = np.asarray(values, dtype=float)
    dt = np.asarray(duration_s, dtype=float)
    e = np.asarray(edges, dtype=float)
    if v.shape != dt.shape or v.ndim != 1:
        raise ValueError(
            f"values and duration_s must be 1-D of one length, got {v.shape}, {dt.shape}"
        )
    if e.ndim != 1 or e.size < 2 or np.any(~(np.diff(e) > 0)):
        raise ValueError(f"{name} must be at least two strictly increasing edges")
    return v, dt, e


def used_bands(hours: np.ndarray, edges: np.ndarray, keep_to: float) -> int:
    """Number of leading bands to keep: up to the last band with time, and at least up to
    the band ending at or above ``keep_to`` (an edge value; 0 keeps none by itself).

    Parameters
    ----------
    hours : numpy.ndarray (B,) or (B, S)
        Hours per band (first axis) [h].
    edges : numpy.ndarray (B + 1,)
        Band edges.
    keep_to : float
        Keep every band whose low edge is below this value.

    Returns
    -------
    int
        Count of bands from the bottom to keep (at least 1).
    """
    rows = hours.reshape(hours.shape[0], -1).sum(axis=1)
    used = np.flatnonzero(rows > 0)
    last = int(used[-1]) + 1 if used.size else 1
    wanted = int(np.searchsorted(edges[:-1], keep_to, side="left"))
    return max(1, last, min(wanted, edges.size - 1))


def bucket_minmax(
    bucket: np.ndarray, values: np.ndarray, n_buckets: int
) -> tuple[np.ndarray, np.ndarray]:
    """Smallest and largest value in each bucket.

    Parameters
    ----------
    bucket : numpy.ndarray of int (n,)
        Bucket of each value, non-decreasing, in ``[0, n_buckets)``.
    values : numpy.ndarray (n,)
        The values.
    n_buckets : int
        Number of buckets.

    Returns
    -------
    vmin, vmax : numpy.ndarray (n_buckets,)
        Per bucket; nan for a bucket without values.
    """
    vmin = np.full(n_buckets, np.nan)
    vmax = np.full(n_buckets, np.nan)
    if bucket.size == 0:
        return vmin, vmax
    starts = np.flatnonzero(np.r_[True, bucket[1:] != bucket[:-1]])
    where = bucket[starts]
    vmin[where] = np.minimum.reduceat(values, starts)
    vmax[where] = np.maximum.reduceat(values, starts)
    return vmin, vmax


def minmax_envelope(
    time_s: npt.ArrayLike, values: npt.ArrayLike, n_buckets: int
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Min-max decimation of a long series for plotting.

    Parameters
    ----------
    time_s : array_like (n,)
        Sample times [s], non-decreasing.
    values : array_like (n,)
        Sample values (any unit).
    n_buckets : int
        Number of equal time buckets over ``[t_0, t_{n-1}]``, >= 1 (e.g. the plot's width
        in pixels).

    Returns
    -------
    bucket_start_s, vmin, vmax : numpy.ndarray (n_buckets,)
        Start time of each bucket [s] and the smallest and largest value in it (nan for an
        empty bucket, e.g. in a gap). Drawing both keeps every peak visible that a plain
        subsample would miss.

    Notes
    -----
    Bucket of sample ``i``: ``k = min(floor(n_b (t_i - t_0) / (t_{n-1} - t_0)), n_b - 1)``.
    """
    if not (isinstance(n_buckets, int | np.integer) and n_buckets >= 1):
        raise ValueError(f"n_buckets must be an integer >= 1, got {n_buckets!r}")
    t = np.asarray(time_s, dtype=float)
    v = np.asarray(values, dtype=float)
    if t.shape != v.shape or t.ndim != 1:
        raise ValueError("time_s and values must be 1-D arrays of the same length")
    if t.size == 0:
        empty = np.full(n_buckets, np.nan)
        return empty, empty.copy(), empty.copy()
    span = float(t[-1] - t[0])
    width = span / n_buckets if span > 0 else 1.0
    k = np.minimum(((t - t[0]) / width).astype(np.int64), n_buckets - 1)
    vmin, vmax = bucket_minmax(k, v, n_buckets)
    return t[0] + np.arange(n_buckets) * width, vmin, vmax
