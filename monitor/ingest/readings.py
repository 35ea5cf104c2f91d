"""Validate a readings table (CSV rows or JSON readings) and build Reading records."""

from __future__ import annotations

import re

import numpy as np
import pandas as pd

from monitor.domain.records import Reading
from monitor.ingest import units as U
from monitor.ingest.common import (
    READ_UNIT_COLUMNS,
    ProblemList,
    Table,
    check_numbers,
    check_text,
    first_rows,
    group_ids,
    parse_times,
    to_datetimes,
    where_text,
)

_ISO4406_RE = re.compile(r"^(?:-|>28|\d{1,2})/(?:>28|\d{1,2})/(?:>28|\d{1,2})$")


def readings(t: Table, probs: ProblemList, repeats: bool = True) -> list[Reading]:
    """Validate a readings table and build Reading records (one per service check).

    ``repeats=False`` leaves out the check that no component is measured twice at one
    moment: a large file read in parts checks that over the whole file instead
    (:mod:`monitor.ingest.stream`).
    """
    if t.n == 0:
        probs.add(None, None, None, "the file has a header but no rows of data")
        return []
    check_text(t, ("unit", "position"), probs)
    taken = parse_times(t, "taken_at", probs)
    check_numbers(t, "hour_meter", None, probs, required=True)
    for f, kind in READ_UNIT_COLUMNS.items():
        if f in t.num:
            minimum = U.RANGES[kind][0]
            check_numbers(t, f, kind, probs, required=False, minimum=minimum)
    codes = _check_iso4406(t, probs) if "iso4406" in t.text else None
    if repeats:
        _check_repeats(t, taken, probs)
    if probs:
        return []
    return _build(t, taken, codes)


def _check_repeats(t: Table, taken: np.ndarray, probs: ProblemList) -> None:
    """The same component measured twice at the same moment: one of the rows is a copy
    (the store keeps one reading per component and time). Rows with a bad unit, position
    or time are left out (they are reported already)."""
    rows = np.flatnonzero(~t.bad_rows("unit", "position", "taken_at"))
    us = taken[rows] // 1000  # the store keeps whole microseconds
    key = group_ids([t.text["unit"][0][rows], t.text["position"][0][rows], pd.factorize(us)[0]])
    order = np.argsort(key, kind="stable")
    again = np.r_[False, key[order][1:] == key[order][:-1]]
    if not again.any():
        return
    first = np.maximum.accumulate(np.where(~again, np.arange(len(order)), 0))
    other = dict(zip(rows[order[again]].tolist(), rows[order[first[again]]].tolist(), strict=True))
    probs.add_rows(
        np.sort(rows[order[again]]),
        "taken_at",
        t,
        lambda r: (
            f"the same unit, position and time as the reading at "
            f"{where_text(t, other[r], 'taken_at')}: give each reading once (a component "
            "is measured once at a given moment)"
        ),
    )


def _check_iso4406(t: Table, probs: ProblemList) -> list[str | None]:
    """Flag malformed cleanliness codes; the code of each row (None where blank)."""
    c, q = t.text["iso4406"]
    q = np.array([str(x).replace(" ", "") for x in q], dtype=object)
    t.text["iso4406"] = (c, q)
    ok = np.array([v == "" or _iso4406_ok(v) for v in q], dtype=bool)
    first_rows(
        probs,
        t,
        "iso4406",
        c,
        ~ok,
        lambda v: (
            f"ISO 4406 code `{v}` is malformed: expected three scale numbers 0-28 "
            "(or `>28`) separated by `/`, e.g. 18/16/13, or -/15/12 for microscope counts"
        ),
    )
    return [None if v == "" else v for v in q[c].tolist()]


def _build(t: Table, taken: np.ndarray, codes: list[str | None] | None) -> list[Reading]:
    """Reading records [h, L/min, bar, degC] from a validated table."""
    when = to_datetimes(taken)
    get = {
        f: [None if np.isnan(x) else x for x in t.num[f].tolist()] if f in t.num else None
        for f in READ_UNIT_COLUMNS
    }
    unit, pos, hm = t.strings("unit").tolist(), t.strings("position").tolist(), t.num["hour_meter"]
    out = []
    for r in range(t.n):
        out.append(
            Reading(
                unit[r],
                pos[r],
                when[r],
                float(hm[r]),
                case_drain_lpm=get["case_drain"][r] if get["case_drain"] else None,
                test_pressure_bar=get["test_pressure"][r] if get["test_pressure"] else None,
                oil_temp_c=get["oil_temp"][r] if get["oil_temp"] else None,
                iso4406=codes[r] if codes else None,
                line=t.locate(r, "unit")[0],
            )
        )
    return out


def _iso4406_ok(code: str) -> bool:
    """True for a well-formed ISO 4406 code with scale numbers 0-28 or `>28`."""
    if not _ISO4406_RE.match(code):
        return False
    return all(p in ("-", ">28") or int(p) <= 28 for p in code.split("/"))
