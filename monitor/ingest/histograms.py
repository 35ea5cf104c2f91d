"""Validate a band table (CSV rows or JSON bands) and cut it into histograms.

Checks run on whole columns: identifiers, timestamps, number ranges, band edges; then
the rows are sorted once by (histogram, pressure low, speed low) and the per-histogram
rules (constant hour meter, no overlapping bands, hours vs hour-meter advance, no
overlapping periods) are checked on the sorted arrays. Nothing loops per row in Python.
"""

from __future__ import annotations

import numpy as np

from monitor.domain.batch import HistogramBatch
from monitor.domain.records import QUANTITIES, QUANTITY_PRESSURE_SPEED
from monitor.ingest import units as U
from monitor.ingest.assemble import assemble
from monitor.ingest.common import (
    HIST_TEXT,
    HOURS_TOLERANCE_FRACTION,
    HOURS_TOLERANCE_H,
    MAX_PROBLEMS,
    OPERATING_OIL_TEMP_RANGE_C,
    ProblemList,
    Table,
    check_numbers,
    check_text,
    first_rows,
    fmt,
    group_ids,
    parse_times,
    where_text,
)
from monitor.ingest.groups import Groups

"""Band columns kept in sorted order for the per-histogram checks and the records."""


def histograms(t: Table, probs: ProblemList, period_overlaps: bool = True) -> HistogramBatch | None:
    """Validate a band table and cut it into histograms (None if there is any problem).

    ``period_overlaps=False`` leaves out the check that histograms of one unit, position
    and quantity do not share time: a large file read in parts checks that over the
    whole file instead (:mod:`monitor.ingest.stream`).
    """
    if t.n == 0:
        probs.add(None, None, None, "the file has a header but no rows of data")
        return None
    for f in ("speed_low", "speed_high", "mean_speed", "oil_temp"):
        if f not in t.num:
            t.num[f] = np.full(t.n, np.nan)
            t.raw[f] = t.num[f]
            t.unit[f] = "c" if f == "oil_temp" else "rpm"
    check_text(t, ("unit", "position"), probs)
    is2d = _check_quantity(t, probs)
    start, end = parse_times(t, "period_start", probs), parse_times(t, "period_end", probs)
    for f in ("hour_meter_start", "hour_meter_end", "hours"):
        check_numbers(t, f, None, probs, required=True)
    for f in ("pressure_low", "pressure_high"):
        check_numbers(t, f, U.PRESSURE, probs, required=True)
    _check_speeds(t, is2d, probs)
    _check_oil_temp(t, probs)
    _check_band_edges(t, "pressure_low", "pressure_high", np.ones(t.n, bool), probs)
    _check_band_edges(t, "speed_low", "speed_high", is2d, probs)
    g = Groups.of(t, is2d)
    skip = _tainted(t, g) if probs else np.zeros(len(g.starts), dtype=bool)
    skip |= _check_group_constants(t, g, probs, skip)
    _check_overlaps(t, g, probs)
    _check_periods(t, g, start, end, probs, skip)
    if period_overlaps:
        _check_period_overlaps(t, g, start, end, probs, skip)
    if probs:
        return None
    return assemble(t, g, start, end)


def _tainted(t: Table, g: Groups) -> np.ndarray:
    """Per histogram: True if a check derived from its rows would only echo a value
    already reported bad (so it is not reported as a separate problem).

    That is a histogram holding a row with a bad value, or one that such a row would
    have belonged to: a row whose unit, position, period or quantity is bad forms a
    histogram of its own, and leaves the one that shares the other four key fields
    short of its hours.
    """
    bad = t.bad_rows()
    if not bad.any():
        return np.zeros(len(g.starts), dtype=bool)
    rows = bad.copy()
    codes = [t.text[k][0] for k in HIST_TEXT]
    for k in range(len(codes)):
        key = group_ids(codes[:k] + codes[k + 1 :])
        marked = np.zeros(int(key.max(initial=0)) + 1, dtype=bool)
        marked[key[bad]] = True
        rows |= marked[key]
    return np.logical_or.reduceat(g.sort(rows), g.starts)


def _check_quantity(t: Table, probs: ProblemList) -> np.ndarray:
    """Lower-case the quantity, flag unknown ones; True on pressure_speed rows."""
    qcodes, quniq = t.text["quantity"]
    quniq = np.array([str(q).lower() for q in quniq], dtype=object)
    t.text["quantity"] = (qcodes, quniq)
    first_rows(
        probs,
        t,
        "quantity",
        qcodes,
        ~np.isin(quniq, QUANTITIES),
        lambda v: f"unknown quantity `{v}`: use `pressure` or `pressure_speed`",
    )
    unknown = ~np.isin(quniq, QUANTITIES)
    if unknown.any():
        t.refuse("quantity", unknown[qcodes])
    return (quniq == QUANTITY_PRESSURE_SPEED)[qcodes]


def _check_group_constants(t: Table, g: Groups, probs: ProblemList, skip: np.ndarray) -> np.ndarray:
    """Hour meter and mean speed must be the same on every row of one histogram; a row
    that differs from the value most rows of its histogram give is reported.

    Returns the histograms whose hour meter differs between rows (their hour sums and
    hour-meter order are then not checked: they would only echo the same mistake).
    """
    uneven = np.zeros(len(g.starts), dtype=bool)
    skip_rows = np.repeat(skip, g.ends - g.starts)
    for f in ("hour_meter_start", "hour_meter_end", "mean_speed", "oil_temp"):
        v = g.sort(t.raw[f] if f == "oil_temp" else t.num[f])  # as written: one unit a column
        ref = np.repeat(v[g.starts], g.ends - g.starts)
        differ = ~_same(v, ref) & ~skip_rows
        if not differ.any():
            continue
        ref = _group_mode(g, v)
        differ = ~_same(v, ref) & ~skip_rows
        if f not in ("mean_speed", "oil_temp"):
            uneven |= np.logical_or.reduceat(differ, g.starts)
        raw_ref = dict(zip(g.order[differ].tolist(), ref[differ].tolist(), strict=True))
        probs.add_rows(
            np.sort(g.order[differ]),
            f,
            t,
            lambda r, f=f, raw_ref=raw_ref: (
                f"`{t.labels.get(f, f)}` differs from the {fmt(raw_ref[r])} that the other rows "
                "of the same histogram (same unit, position, period and quantity) give: give "
                "one value per histogram"
            ),
        )
    return uneven


def _same(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    return (a == b) | (np.isnan(a) & np.isnan(b))


def _group_mode(g: Groups, v: np.ndarray) -> np.ndarray:
    """Per sorted row: the value most rows of its histogram give (the first row's value
    when no value is more common than it)."""
    o = np.lexsort((v, g.gs))
    gv, vv = g.gs[o], v[o]
    new = np.r_[True, (gv[1:] != gv[:-1]) | ~_same(vv[1:], vv[:-1])]
    run = np.cumsum(new) - 1
    count = np.bincount(run)[run]  # size of each row's run of equal values
    first_count = count[np.argsort(o)][g.starts]  # run size of each histogram's first row
    best = np.zeros(len(g.starts), dtype=np.int64)
    np.maximum.at(best, gv, count)
    mode = v[g.starts].copy()
    better = np.flatnonzero(best > first_count)
    if better.size:
        at = np.flatnonzero(count == best[gv])  # rows of a most common run
        hist, first = np.unique(gv[at], return_index=True)
        mode[hist] = np.where(np.isin(hist, better), vv[at[first]], mode[hist])
    return np.repeat(mode, g.ends - g.starts)


def _check_overlaps(t: Table, g: Groups, probs: ProblemList) -> None:
    """Bands of one histogram may leave gaps but must not overlap (nor repeat a cell)."""
    same, d2 = g.same, g.d2
    pl, ph, sl = g.col["pressure_low"], g.col["pressure_high"], g.col["speed_low"]
    prev = np.r_[0, np.arange(len(pl) - 1)]
    with np.errstate(invalid="ignore"):
        # 1-D: consecutive bands after sorting by low edge
        bad1 = same & ~d2 & (pl < _shifted(ph))
        # 2-D: distinct pressure bands (a new low edge) and the repeat of a cell
        newp = ~same | (pl != _shifted(pl))
        pfirst = np.maximum.accumulate(np.where(newp, np.arange(len(pl)), 0))
        bad_hi = d2 & (ph != ph[pfirst])
        bad2 = same & d2 & newp & (pl < ph[np.r_[0, pfirst[:-1]]])
        dup = same & d2 & ~newp & (sl == _shifted(sl))
    rows = np.flatnonzero(bad1 | bad2 | bad_hi)
    other = np.where(bad_hi[rows], pfirst[rows], prev[rows])
    _report(probs, t, g.order, rows, lambda i, k: _band_message(t, g.order, i, int(other[k])))
    _report(probs, t, g.order, np.flatnonzero(dup), lambda i, k: _cell_message(t, g.order, i))
    _check_speed_overlaps(t, g, probs)


def _shifted(a: np.ndarray) -> np.ndarray:
    """``a`` moved one place down (the first element repeated): ``a[i - 1]``, ``a[0]``."""
    return np.r_[a[:1], a[:-1]]


def _report(probs: ProblemList, t: Table, o: np.ndarray, rows: np.ndarray, message) -> None:
    """One problem at ``pressure_low`` per sorted position in ``rows`` (first MAX listed)."""
    for k, i in enumerate(rows[:MAX_PROBLEMS].tolist()):
        line, column = t.locate(int(o[i]), "pressure_low")
        probs.add(line, column, t.value(int(o[i]), "pressure_low"), message(i, k))
    probs.more += max(0, len(rows) - MAX_PROBLEMS)


def _band_message(t: Table, o: np.ndarray, i: int, j: int) -> str:
    raw_lo, raw_hi = t.raw["pressure_low"], t.raw["pressure_high"]
    return (
        f"pressure band {fmt(raw_lo[o[i]])}-{fmt(raw_hi[o[i]])} overlaps the band "
        f"{fmt(raw_lo[o[j]])}-{fmt(raw_hi[o[j]])} "
        f"(line {t.locate(o[j], 'pressure_low')[0]}): bands may leave gaps but must "
        "not overlap"
    )


def _cell_message(t: Table, o: np.ndarray, i: int) -> str:
    also = t.locate(o[i - 1], "hours")[0]
    return (
        f"pressure-speed cell given twice (also on line {also}): give each "
        "pressure band x speed band cell once"
    )


def _check_speed_overlaps(t: Table, g: Groups, probs: ProblemList) -> None:
    """Distinct speed bands of one pressure-by-speed histogram must not overlap."""
    rows2 = g.order[g.d2]
    if rows2.size == 0:
        return
    gs2 = g.gs[g.d2]
    sl, sh = g.col["speed_low"][g.d2], g.col["speed_high"][g.d2]
    o2 = np.lexsort((sl, gs2))
    gg, sl, sh, rr = gs2[o2], sl[o2], sh[o2], rows2[o2]
    same = np.r_[False, gg[1:] == gg[:-1]]
    prev = np.r_[0, np.arange(len(rr) - 1)]
    with np.errstate(invalid="ignore"):
        news = ~same | (sl != sl[prev])
        sfirst = np.maximum.accumulate(np.where(news, np.arange(len(rr)), 0))
        bad = (sh != sh[sfirst]) | (same & news & (sl < sh[np.r_[0, sfirst[:-1]]]))
    probs.add_rows(
        np.sort(rr[bad]),
        "speed_low",
        t,
        "speed band overlaps another speed band of the same histogram: speed bands may "
        "leave gaps but must not overlap",
    )


def _check_speeds(t: Table, is2d: np.ndarray, probs: ProblemList) -> None:
    """Speed bands are required on pressure_speed rows and must be blank on pressure rows."""
    for f in ("speed_low", "speed_high"):
        v = t.num[f]
        given = ~np.isnan(v)
        need, extra = is2d & ~given, ~is2d & given
        probs.add_rows(
            np.flatnonzero(need), f, t, "a `pressure_speed` row needs a speed band [rpm]"
        )
        probs.add_rows(
            np.flatnonzero(extra),
            f,
            t,
            "a `pressure` row has no speed band: leave it blank or use `pressure_speed`",
        )
        if need.any() or extra.any():
            t.refuse(f, need | extra)
        check_numbers(t, f, U.SPEED, probs, required=False)
    check_numbers(t, "mean_speed", U.SPEED, probs, required=False)


def _check_oil_temp(t: Table, probs: ProblemList) -> None:
    """The period mean oil temperature, when given, within the plausible operating range."""
    f = "oil_temp"
    check_numbers(t, f, U.TEMPERATURE, probs, required=False, minimum=U.RANGES[U.TEMPERATURE][0])
    lo, hi = OPERATING_OIL_TEMP_RANGE_C
    v = t.num[f]
    with np.errstate(invalid="ignore"):
        bad = ((v < lo) | (v > hi)) & ~t.bad_rows(f)
    if not bad.any():
        return
    rows = np.flatnonzero(bad)
    seen = {t.locate(r, f): r for r in rows[::-1].tolist()}  # JSON: once per histogram
    probs.add_rows(
        np.sort(np.fromiter(seen.values(), dtype=np.int64)),
        f,
        t,
        lambda r: (
            f"{fmt(t.raw[f][r])} {t.unit_at(f, r)} is {v[r]:.1f} degC, outside the plausible "
            f"range {fmt(lo)} to {fmt(hi)} degC of a period mean operating oil temperature: "
            "check the value and its unit (c or f)"
        ),
    )
    t.refuse(f, bad)


def _check_band_edges(
    t: Table, lo_f: str, hi_f: str, rows_mask: np.ndarray, probs: ProblemList
) -> None:
    lo, hi = t.num[lo_f], t.num[hi_f]
    with np.errstate(invalid="ignore"):
        bad = rows_mask & (lo >= hi)
    name = lo_f.split("_")[0]

    def m(r: int) -> str:
        return (
            f"{name} band {fmt(t.raw[lo_f][r])}-{fmt(t.raw[hi_f][r])}: the low edge is not "
            "below the high edge; expected low < high"
        )

    probs.add_rows(np.flatnonzero(bad), lo_f, t, m)
    if bad.any():
        t.refuse(lo_f, bad)


def _check_periods(
    t: Table, g: Groups, start: np.ndarray, end: np.ndarray, probs: ProblemList, skip: np.ndarray
) -> None:
    """Per histogram: period order, hour meter order, hours vs hour-meter advance
    (not for the histograms in ``skip``)."""
    f = g.first
    s, e = start[f], end[f]
    hs, he = t.num["hour_meter_start"][f], t.num["hour_meter_end"][f]
    nat = np.iinfo(np.int64).min
    rows = f[(s != nat) & (e != nat) & (e <= s) & ~skip]
    probs.add_rows(
        rows,
        "period_end",
        t,
        "period_end is not after period_start: a period must end after it starts",
    )
    with np.errstate(invalid="ignore"):
        back = (he < hs) & ~skip
    probs.add_rows(
        f[back],
        "hour_meter_end",
        t,
        lambda r: (
            f"hour_meter_end {fmt(t.raw['hour_meter_end'][r])} is below hour_meter_start "
            f"{fmt(t.raw['hour_meter_start'][r])}: the hour meter must not run backwards "
            "within a period (a replaced meter is recorded in the fleet registry)"
        ),
    )
    _check_hours_sum(t, g, he - hs, back | skip, probs)


def _check_hours_sum(
    t: Table, g: Groups, dh: np.ndarray, back: np.ndarray, probs: ProblemList
) -> None:
    """The hours of a histogram add up to its hour-meter advance ``dh`` [h], within tolerance."""
    f = g.first
    total = np.add.reduceat(g.col["hours"], g.starts)
    tol = np.maximum(HOURS_TOLERANCE_H, HOURS_TOLERANCE_FRACTION * dh)
    with np.errstate(invalid="ignore"):
        off = (np.abs(total - dh) > tol) & ~back
    if not off.any():
        return
    k_of = dict(zip(f[off].tolist(), np.flatnonzero(off).tolist(), strict=True))
    probs.add_rows(
        f[off],
        "hours",
        t,
        lambda r: (
            f"histogram hours add up to {total[k_of[r]]:.2f} h but the hour meter advanced "
            f"{dh[k_of[r]]:.2f} h; they may differ by at most {tol[k_of[r]]:.2f} h (the "
            "larger of 0.25 h and 5 %): check the hours column and the hour meter readings"
        ),
    )


def _check_period_overlaps(
    t: Table, g: Groups, start: np.ndarray, end: np.ndarray, probs: ProblemList, skip: np.ndarray
) -> None:
    """Two histograms of one unit, position and quantity must not share time in one file
    (histograms in ``skip`` are left out)."""
    f = g.first[~skip]
    key = group_ids([t.text[k][0][f] for k in ("unit", "position", "quantity")])
    s, e = start[f], end[f]
    o = np.lexsort((s, key))
    bad = (key[o][1:] == key[o][:-1]) & (s[o][1:] < e[o][:-1])
    rows, prev = f[o[1:][bad]], f[o[:-1][bad]]
    other = dict(zip(rows.tolist(), prev.tolist(), strict=True))
    probs.add_rows(
        np.sort(rows),
        "period_start",
        t,
        lambda r: (
            f"period overlaps the histogram at {where_text(t, other[r], 'period_start')} of the "
            "same unit, position and quantity: each hour may be counted only once"
        ),
    )
