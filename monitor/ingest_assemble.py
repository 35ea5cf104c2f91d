"""Cut validated, sorted band arrays into one Histogram record per histogram.

The band arrays of all histograms are sorted once (see
:class:`monitor.ingest_histograms.Groups`); each record gets views of its slice. The
pressure-by-speed matrices of all 2-D histograms are filled in one scatter into a single
buffer, so the only per-histogram Python work is slicing and the record itself.
"""

from __future__ import annotations

import gc
from collections.abc import Iterator
from contextlib import contextmanager
from typing import TYPE_CHECKING

import numpy as np

from monitor.ingest_common import Table, to_datetimes
from monitor.records import QUANTITY_PRESSURE, QUANTITY_PRESSURE_SPEED, Histogram

if TYPE_CHECKING:
    from monitor.ingest_histograms import Groups


def assemble(t: Table, g: Groups, start: np.ndarray, end: np.ndarray) -> list[Histogram]:
    """Histogram records [bar, rpm, h] from a validated band table, in histogram order.

    Parameters
    ----------
    t : Table
        The band table, canonical units.
    g : Groups
        Its rows sorted by histogram, pressure low and speed low.
    start, end : numpy.ndarray
        Period start and end of every row [int64 ns since the epoch, UTC].
    """
    with _no_gc():  # many small objects, no cycles: skip the collector's passes
        return _records(t, g, start, end)


def _records(t: Table, g: Groups, start: np.ndarray, end: np.ndarray) -> list[Histogram]:
    f = g.first
    n = len(f)
    ts = to_datetimes(np.r_[start[f], end[f]])
    quantity, lows, highs, speed_lows, speed_highs, cells = _band_lists(g)
    mean = [None if x != x else x for x in t.num["mean_speed"][f].tolist()]  # NaN -> None
    if t.line0 is not None:
        lines = np.minimum.reduceat(g.sort(t.line0), g.starts).tolist()
    else:
        lines = [None] * n
    return list(
        map(
            Histogram,
            _strings(t, "unit", f),
            _strings(t, "position", f),
            quantity,
            ts[:n],
            ts[n:],
            t.num["hour_meter_start"][f].tolist(),
            t.num["hour_meter_end"][f].tolist(),
            lows,
            highs,
            cells,
            speed_lows,
            speed_highs,
            mean,
            lines,
        )
    )


def _band_lists(g: Groups) -> tuple[list, ...]:
    """Per histogram: quantity, pressure low/high, speed low/high (or None), hours."""
    n = len(g.starts)
    pl, ph, hours = g.col["pressure_low"], g.col["pressure_high"], g.col["hours"]
    bounds = list(zip(g.starts.tolist(), g.ends.tolist(), strict=True))
    lows = [pl[a:b] for a, b in bounds]
    highs = [ph[a:b] for a, b in bounds]
    cells = [hours[a:b] for a, b in bounds]
    quantity = [QUANTITY_PRESSURE] * n
    speed_lows: list[np.ndarray | None] = [None] * n
    speed_highs: list[np.ndarray | None] = [None] * n
    two_d = np.flatnonzero(g.d2[g.starts])
    if two_d.size:
        for k, m in zip(two_d.tolist(), _matrices(g, two_d), strict=True):
            quantity[k] = QUANTITY_PRESSURE_SPEED
            lows[k], highs[k], speed_lows[k], speed_highs[k], cells[k] = m
    return quantity, lows, highs, speed_lows, speed_highs, cells


def _matrices(g: Groups, two_d: np.ndarray) -> list[tuple]:
    """(pressure low, pressure high, speed low, speed high, hours matrix) per 2-D group.

    ``two_d`` numbers the pressure-by-speed histograms. Within each, the distinct
    pressure bands (sorted rows with a new low edge) and the distinct speed bands (rows
    sorted by speed low with a new low edge) index the cells of a zero matrix; cells not
    listed stay 0 h.
    """
    rows = np.flatnonzero(g.d2)  # sorted positions of all 2-D cells, grouped
    grp = np.repeat(np.arange(len(two_d)), (g.ends - g.starts)[two_d])
    first = np.r_[True, grp[1:] != grp[:-1]]
    pl, ph = g.col["pressure_low"][rows], g.col["pressure_high"][rows]
    sl, sh = g.col["speed_low"][rows], g.col["speed_high"][rows]
    newp = first | np.r_[True, pl[1:] != pl[:-1]]
    pidx, np_ = _index_within(newp, grp, len(two_d))
    so = np.lexsort((sl, grp))
    news = first[so] | np.r_[True, sl[so][1:] != sl[so][:-1]]
    sidx = np.empty(len(rows), dtype=np.int64)
    sidx[so], ns = _index_within(news, grp[so], len(two_d))
    size = np_ * ns
    offset = np.r_[0, np.cumsum(size)[:-1]]
    flat = np.zeros(int(size.sum()))
    flat[offset[grp] + pidx * ns[grp] + sidx] = g.col["hours"][rows]
    pu, phu = pl[newp], ph[newp]
    su, shu = sl[so][news], sh[so][news]
    p0 = np.r_[0, np.cumsum(np_)[:-1]].tolist()
    s0 = np.r_[0, np.cumsum(ns)[:-1]].tolist()
    out = []
    sizes = zip(p0, s0, offset.tolist(), np_.tolist(), ns.tolist(), strict=True)
    for a, c, b, p, s in sizes:
        m = flat[b : b + p * s].reshape(p, s)
        out.append((pu[a : a + p], phu[a : a + p], su[c : c + s], shu[c : c + s], m))
    return out


def _index_within(new: np.ndarray, grp: np.ndarray, n_groups: int) -> tuple:
    """Per row: how many ``new`` rows of its group came before it (0-based index of its
    distinct value); per group: the number of distinct values."""
    c = np.cumsum(new) - 1
    counts = np.bincount(grp, weights=new, minlength=n_groups).astype(np.int64)
    base = np.r_[0, np.cumsum(counts)[:-1]]
    return c - base[grp], counts


def _strings(t: Table, f: str, rows: np.ndarray) -> list[str]:
    """The text of column ``f`` on ``rows`` (codes gathered first, then the few uniques)."""
    codes, uniq = t.text[f]
    return np.asarray(uniq, dtype=object)[codes[rows]].tolist()


@contextmanager
def _no_gc() -> Iterator[None]:
    """Pause the cyclic garbage collector (restoring its previous state afterwards).

    Building tens of thousands of records would otherwise trigger collector passes
    over every live object of the process, which cost more than the building itself.
    """
    was_enabled = gc.isenabled()
    gc.disable()
    try:
        yield
    finally:
        if was_enabled:
            gc.enable()
