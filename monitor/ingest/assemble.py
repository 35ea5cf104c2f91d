"""Cut validated, sorted band arrays into a :class:`~monitor.records.HistogramBatch`.

The band arrays of all histograms are sorted once (see
:class:`monitor.ingest.histograms.Groups`). Plain histograms keep their sorted bands; the
pressure-by-speed matrices of all 2-D histograms are filled in one scatter. The batch
holds every histogram's bands end to end, so nothing here loops per histogram; the
:class:`~monitor.records.Histogram` records are views of the batch, made on request.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

from monitor.domain.batch import HistogramBatch
from monitor.domain.records import QUANTITY_PRESSURE, QUANTITY_PRESSURE_SPEED
from monitor.ingest.common import Table

if TYPE_CHECKING:
    from monitor.ingest.groups import Groups


def assemble(t: Table, g: Groups, start: np.ndarray, end: np.ndarray) -> HistogramBatch:
    """The histograms [bar, rpm, h] of a validated band table, in histogram order.

    Parameters
    ----------
    t : Table
        The band table, canonical units.
    g : Groups
        Its rows sorted by histogram, pressure low and speed low.
    start, end : numpy.ndarray
        Period start and end of every row [int64 ns since the epoch, UTC].
    """
    f = g.first
    n = len(f)
    rows = g.ends - g.starts
    is2d = g.d2[g.starts]
    n_p, n_s = rows.copy(), np.zeros(n, dtype=np.int64)
    bands = {k: g.col[k] for k in ("pressure_low", "pressure_high", "hours")}
    s_lo = s_hi = np.zeros(0)
    two_d = np.flatnonzero(is2d)
    if two_d.size:
        m = _matrices(g, two_d)
        n_p[two_d], n_s[two_d] = m["n_p"], m["n_s"]
        one_d = np.repeat(~is2d, rows)  # sorted rows of plain histograms
        bands = {k: _splice(v[one_d], m[k], is2d, n_p, n_s, k) for k, v in bands.items()}
        s_lo, s_hi = m["speed_low"], m["speed_high"]
    quantity = np.where(is2d, QUANTITY_PRESSURE_SPEED, QUANTITY_PRESSURE).astype(object)
    line = None
    if t.line0 is not None:
        line = np.minimum.reduceat(g.sort(t.line0), g.starts).astype(np.int64)
    return HistogramBatch(
        unit=_strings(t, "unit", f),
        position=_strings(t, "position", f),
        quantity=quantity,
        period_start_ns=_whole_us(start[f]),
        period_end_ns=_whole_us(end[f]),
        hour_meter_start=t.num["hour_meter_start"][f],
        hour_meter_end=t.num["hour_meter_end"][f],
        mean_speed_rpm=t.num["mean_speed"][f],
        line=line,
        n_pressure=n_p,
        n_speed=n_s,
        pressure_low_bar=bands["pressure_low"],
        pressure_high_bar=bands["pressure_high"],
        speed_low_rpm=s_lo,
        speed_high_rpm=s_hi,
        hours=bands["hours"],
        oil_temp_c=t.num["oil_temp"][f],
    )


def _splice(
    plain: np.ndarray,
    matrix: np.ndarray,
    is2d: np.ndarray,
    n_p: np.ndarray,
    n_s: np.ndarray,
    key: str,
) -> np.ndarray:
    """Bands (or hours) of plain and pressure-by-speed histograms end to end, in
    histogram order: ``plain`` holds the former's values, ``matrix`` the latter's."""
    count = n_p * np.maximum(n_s, 1) if key == "hours" else n_p
    out = np.empty(int(count.sum()))
    seg = np.repeat(is2d, count)
    out[~seg] = plain
    out[seg] = matrix
    return out


def _matrices(g: Groups, two_d: np.ndarray) -> dict[str, np.ndarray]:
    """Bands and hours matrices of the pressure-by-speed histograms ``two_d``, end to end.

    Within each histogram, the distinct pressure bands (sorted rows with a new low edge)
    and the distinct speed bands (rows sorted by speed low with a new low edge) index
    the cells of a zero matrix; cells not listed stay 0 h. Returns the band counts
    ``n_p``/``n_s`` per histogram and the flat ``pressure_low``, ``pressure_high``,
    ``speed_low``, ``speed_high`` and ``hours`` (each matrix row by row).
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
    return {
        "n_p": np_,
        "n_s": ns,
        "pressure_low": pl[newp],
        "pressure_high": ph[newp],
        "speed_low": sl[so][news],
        "speed_high": sh[so][news],
        "hours": flat,
    }


def _index_within(new: np.ndarray, grp: np.ndarray, n_groups: int) -> tuple:
    """Per row: how many ``new`` rows of its group came before it (0-based index of its
    distinct value); per group: the number of distinct values."""
    c = np.cumsum(new) - 1
    counts = np.bincount(grp, weights=new, minlength=n_groups).astype(np.int64)
    base = np.r_[0, np.cumsum(counts)[:-1]]
    return c - base[grp], counts


def _whole_us(ns: np.ndarray) -> np.ndarray:
    """Timestamps [ns] rounded down to whole microseconds, as datetimes hold them."""
    return ns - ns % 1000


def _strings(t: Table, f: str, rows: np.ndarray) -> np.ndarray:
    """The text of column ``f`` on ``rows`` (codes gathered first, then the few uniques)."""
    codes, uniq = t.text[f]
    return np.asarray(uniq, dtype=object)[codes[rows]]
