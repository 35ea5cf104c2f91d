"""Shared parts of telemetry ingest: column specs, the problem list, the column table.

Every reader (CSV, JSON) turns its input into a :class:`Table` of column arrays in
canonical units, and every check adds to one :class:`ProblemList`. The field checks here
(blank identifiers, timestamps, number ranges) are shared by histograms and readings.
"""

from __future__ import annotations

import re
from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from monitor.domain.batch import group_ids  # noqa: F401 - part of this module's interface
from monitor.domain.records import Problem
from monitor.ingest import units as U
from monitor.ingest.limits import (
    EARLIEST_TIME,
    LATEST_TIME,
    MAX_HOUR_METER_H,
    MAX_TEXT_CHARS,
    TIME_RANGE_TEXT,
    shorten,
)

MAX_PROBLEMS = 200
"""Problems listed per file; the rest are counted in one closing note."""

ROW = "*row*"
"""Key of :attr:`Table.refused` for rows refused whole (e.g. a CSV row cut short)."""

HOURS_TOLERANCE_H = 0.25
"""Absolute tolerance of histogram hours vs hour-meter advance [h] (common practice, no source)."""
HOURS_TOLERANCE_FRACTION = 0.05
"""Relative tolerance of histogram hours vs hour-meter advance [-] (common practice, no source)."""

HIST_TEXT = ("unit", "position", "period_start", "period_end", "quantity")
HIST_NUMBERS = ("hour_meter_start", "hour_meter_end", "hours")
HIST_UNIT_COLUMNS = {
    "pressure_low": U.PRESSURE,
    "pressure_high": U.PRESSURE,
    "speed_low": U.SPEED,
    "speed_high": U.SPEED,
    "mean_speed": U.SPEED,
    "oil_temp": U.TEMPERATURE,
}
HIST_REQUIRED = (*HIST_TEXT, *HIST_NUMBERS, "pressure_low", "pressure_high")
OPERATING_OIL_TEMP_RANGE_C = (-30.0, 150.0)
"""Plausible period mean of a loop's operating oil temperature [degC]: outside it the
value is a typo, a wrong unit or a sensor fault (common practice, no source). The oil's
own range (its viscosity line) is checked against the registry when the file is stored."""

READ_TEXT = ("unit", "position", "taken_at", "iso4406")
READ_NUMBERS = ("hour_meter",)
READ_UNIT_COLUMNS = {"case_drain": U.FLOW, "test_pressure": U.PRESSURE, "oil_temp": U.TEMPERATURE}
READ_REQUIRED = ("unit", "position", "taken_at", "hour_meter")

_TS_RE = re.compile(
    r"^\d{4}-\d{2}-\d{2}[T ]\d{2}:\d{2}(?::\d{2}(?:[.,]\d+)?)?(?:[Zz]|[+-]\d{2}(?::?\d{2})?)$"
)
_TS_NO_OFFSET_RE = re.compile(r"^\d{4}-\d{2}-\d{2}(?:[T ]\d{2}:\d{2}(?::\d{2}(?:[.,]\d+)?)?)?$")
_TS_HELP = "write ISO 8601 with an offset, e.g. 2026-03-02T10:00:00Z or 2026-03-02T12:00:00+02:00"


def fmt(x: float) -> str:
    """A number as the user would write it (no trailing ``.0``)."""
    if isinstance(x, str):
        return x
    if not np.isfinite(x):
        return str(x)
    return np.format_float_positional(float(x), trim="-")


class ProblemList:
    """Collects problems of one file; lists the first MAX_PROBLEMS, counts the rest."""

    def __init__(self, file: str) -> None:
        self.file = file
        self.items: list[Problem] = []
        self.more = 0
        self.stopped = False  # the reader gave up checking the rest of the file

    @property
    def full(self) -> bool:
        """True once MAX_PROBLEMS are listed (a reader may then stop checking)."""
        return len(self.items) >= MAX_PROBLEMS

    def add(self, line: int | None, column: str | None, value: object, message: str) -> None:
        if len(self.items) >= MAX_PROBLEMS:
            self.more += 1
            return
        shown = None if value is None else shorten(value)
        self.items.append(Problem(self.file, line, column, shown, message))

    def add_rows(
        self,
        rows: np.ndarray,
        field_: str,
        t: Table,
        message: Callable[[int], str] | str,
    ) -> None:
        """Add one problem per row index in ``rows`` about ``field_`` of table ``t``."""
        rows = np.asarray(rows)
        room = max(0, MAX_PROBLEMS - len(self.items))
        for r in rows[:room].tolist():
            line, column = t.locate(r, field_)
            text = message(r) if callable(message) else message
            self.add(line, column, t.value(r, field_), text)
        self.more += max(0, len(rows) - room)

    def result(self) -> list[Problem]:
        out = list(self.items)
        if self.more:
            out.append(
                Problem(self.file, None, None, None, f"{self.more} more problems not listed")
            )
        if self.stopped:
            msg = (
                f"checking stopped after {MAX_PROBLEMS} problems: fix these and check the "
                "file again to see the rest"
            )
            out.append(Problem(self.file, None, None, None, msg))
        return out

    def __bool__(self) -> bool:
        return bool(self.items) or self.more > 0


@dataclass
class Table:
    """Column arrays of one file's rows, canonical units, plus where each value came from.

    ``text`` holds factorized text columns ``(codes, uniques)``; ``num`` canonical
    float64 arrays; ``raw`` the numbers as written (for messages); ``unit`` the source
    unit spelling per numeric column; ``where`` maps (row, column) to (line, column label).
    """

    n: int
    text: dict[str, tuple[np.ndarray, np.ndarray]]
    num: dict[str, np.ndarray]
    raw: dict[str, np.ndarray]
    unit: dict[str, str]
    where: Callable[[int, str], tuple[int | None, str]]
    line0: np.ndarray | None = None  # CSV: source line of each row
    labels: dict[str, str] = field(default_factory=dict)  # column -> name in the file
    refused: dict[str, np.ndarray] = field(default_factory=dict)  # column -> rows reported

    def refuse(self, f: str, rows: np.ndarray) -> None:
        """Note that the value of column ``f`` on the rows of mask ``rows`` was reported
        as bad: later checks of ``f`` skip them, and checks derived from them are not
        reported as separate problems."""
        old = self.refused.get(f)
        self.refused[f] = rows.copy() if old is None else old | rows

    def bad_rows(self, *fields: str) -> np.ndarray:
        """Mask of rows with a value of one of ``fields`` (default: any) reported bad,
        or refused whole."""
        out = np.zeros(self.n, dtype=bool)
        for f, rows in self.refused.items():
            if not fields or f in fields or f == ROW:
                out |= rows
        return out

    def locate(self, r: int, f: str) -> tuple[int | None, str]:
        return self.where(r, f)

    def value(self, r: int, f: str) -> str | None:
        if f in self.text:
            codes, uniq = self.text[f]
            v = uniq[codes[r]]
            return None if v is None or (isinstance(v, float) and np.isnan(v)) else str(v)
        if f in self.raw:
            return fmt(self.raw[f][r])
        return None

    def unit_at(self, f: str, r: int) -> str:
        u = self.unit.get(f, "")
        return str(u if isinstance(u, str) else u[r])

    def strings(self, f: str) -> np.ndarray:
        codes, uniq = self.text[f]
        return np.asarray(uniq, dtype=object)[codes]


def check_text(t: Table, fields: tuple[str, ...], probs: ProblemList) -> None:
    """Blank or over-long identifiers (see :data:`~monitor.ingest.limits.MAX_TEXT_CHARS`);
    for each distinct bad value report its first row and a count."""
    for f in fields:
        if f not in t.text:
            continue
        codes, uniq = t.text[f]
        blank = np.asarray(uniq == "", dtype=bool)
        most = MAX_TEXT_CHARS[f]
        long = np.array([len(str(u)) > most for u in uniq], dtype=bool)
        first_rows(probs, t, f, codes, blank, lambda v, f=f: f"`{f}` must not be blank")
        first_rows(
            probs,
            t,
            f,
            codes,
            long,
            lambda v, f=f, most=most: (
                f"`{f}` is longer than {most} characters: expected a "
                f"{'unit tag' if f == 'unit' else 'drive position'} as in the fleet registry"
            ),
        )
        if blank.any() or long.any():
            t.refuse(f, (blank | long)[codes])


def first_rows(
    probs: ProblemList,
    t: Table,
    f: str,
    codes: np.ndarray,
    bad_uniq: np.ndarray,
    message: Callable[[str], str],
) -> None:
    """One problem per distinct bad value, at its first row, noting how many rows repeat it."""
    if not bad_uniq.any():
        return
    rows = np.flatnonzero(bad_uniq[codes] & ~t.bad_rows(ROW))
    if rows.size == 0:
        return
    _, first, counts = np.unique(codes[rows], return_index=True, return_counts=True)
    order = np.argsort(rows[first])
    room = max(0, MAX_PROBLEMS - len(probs.items))
    probs.more += max(0, len(order) - room)
    for k in order[:room].tolist():
        r = int(rows[first[k]])
        text = message(shorten(t.value(r, f) or ""))
        if counts[k] > 1:
            text += f" (the same value is on {counts[k] - 1} more rows)"
        line, column = t.locate(r, f)
        probs.add(line, column, t.value(r, f), text)


def parse_times(t: Table, f: str, probs: ProblemList) -> np.ndarray:
    """Parse a timestamp column: int64 ns since the epoch (UTC), NaT-int where invalid.

    Each distinct string is parsed once; the offset is required (checked by regex) and
    the time must lie in the plausible range :data:`~monitor.ingest.limits.EARLIEST_TIME`
    to :data:`~monitor.ingest.limits.LATEST_TIME` (the range is checked before the
    conversion to nanoseconds, which cannot hold dates outside 1677-2262).
    """
    codes, uniq = t.text[f]
    strs = pd.Series(uniq, dtype=object).astype(str)
    shaped = strs.str.match(_TS_RE).to_numpy(dtype=bool)
    parsed = pd.to_datetime(strs.where(shaped, None), utc=True, format="ISO8601", errors="coerce")
    valid = parsed.notna().to_numpy()
    inside = ((parsed >= EARLIEST_TIME) & (parsed < LATEST_TIME)).to_numpy(dtype=bool)
    ns = parsed.where(inside).dt.as_unit("ns").to_numpy(dtype="datetime64[ns]").astype(np.int64)
    bad = ~shaped | ~inside
    outside = set(strs[shaped & valid & ~inside].map(shorten))

    def msg(v: str) -> str:
        if not v:
            return f"`{f}` is blank: {_TS_HELP}"
        if _TS_NO_OFFSET_RE.match(v):
            return f"timestamp `{v}` has no UTC offset: add `Z` or an offset such as `+02:00`"
        if v in outside:
            return (
                f"timestamp `{v}` is outside the plausible range {TIME_RANGE_TEXT}: check "
                "the date (a typo in the year, or a logger clock that was never set)"
            )
        return f"`{v}` is not a valid ISO 8601 timestamp: {_TS_HELP}"

    first_rows(probs, t, f, codes, bad, msg)
    if bad.any():
        t.refuse(f, bad[codes])
    return ns[codes]


def check_numbers(
    t: Table,
    f: str,
    kind: str | None,
    probs: ProblemList,
    required: bool,
    minimum: float = 0.0,
    maximum: float | None = None,
) -> None:
    """Flag missing (when required), infinite, below-minimum, above-maximum and
    out-of-range values of column ``f``; rows already reported for ``f`` are skipped.

    ``maximum`` [the column's unit] defaults to none for columns with a unit ``kind``
    (their valid range applies) and to :data:`~monitor.ingest.limits.MAX_HOUR_METER_H`
    for the others (hour meters and hours).
    """
    v = t.num[f]
    top = maximum if maximum is not None else (np.inf if kind else MAX_HOUR_METER_H)
    if _all_valid(v, kind, required, minimum, top):
        return
    done = t.bad_rows(f)
    with np.errstate(invalid="ignore"):
        missing = np.isnan(v) & ~done if required else np.zeros(len(v), dtype=bool)
        inf = np.isinf(t.raw[f]) & ~done
        low = (v < minimum) & ~inf & ~done
        high = (v > top) & ~np.isinf(v) & ~done
        rng = U.out_of_range(v, kind) & ~low & ~inf & ~done if kind else np.zeros(len(v), bool)
    label = t.labels.get(f, f)
    what = f"a number >= {fmt(minimum)}"
    if missing.any():
        probs.add_rows(np.flatnonzero(missing), f, t, f"`{label}` is missing: expected {what}")
    if inf.any():
        probs.add_rows(
            np.flatnonzero(inf), f, t, f"`{label}` is not a finite number: expected {what}"
        )
    if low.any():
        probs.add_rows(np.flatnonzero(low), f, t, f"`{label}` must be {what}")
    if high.any():
        probs.add_rows(
            np.flatnonzero(high),
            f,
            t,
            f"`{label}` is above the plausible maximum of {fmt(top)} h: check the value "
            "and that it is given in hours",
        )
    if rng.any():
        _report_range(t, f, kind, rng, probs)
    t.refuse(f, missing | inf | low | high | rng)


def _report_range(t: Table, f: str, kind: str, rng: np.ndarray, probs: ProblemList) -> None:
    lo, hi = U.RANGES[kind]
    canon = U.CANONICAL[kind]
    v = t.num[f]

    def m(r: int) -> str:
        return (
            f"{fmt(t.raw[f][r])} {t.unit_at(f, r)} is {v[r]:.1f} {canon}, outside the valid "
            f"range {fmt(lo)}-{fmt(hi)} {canon}: check the value and the unit"
        )

    probs.add_rows(np.flatnonzero(rng), f, t, m)


def _all_valid(v: np.ndarray, kind: str | None, required: bool, minimum: float, top: float) -> bool:
    """True if no value of ``v`` needs a problem (one pass for the common, clean case)."""
    lower = max(minimum, U.RANGES[kind][0]) if kind else minimum
    upper = min(U.RANGES[kind][1], top) if kind else top
    with np.errstate(invalid="ignore"):
        ok = (v >= lower) & (v <= upper)
    if not required:
        ok |= np.isnan(v)
    return bool(ok.all())


def where_text(t: Table, r: int, f: str) -> str:
    """``line N`` for CSV rows, the field path for JSON values."""
    line, column = t.locate(r, f)
    return f"line {line}" if line is not None else column


def to_datetimes(ns: np.ndarray) -> list:
    """int64 ns since the epoch -> UTC-aware datetimes (each distinct value converted once)."""
    uniq, inv = np.unique(ns, return_inverse=True)
    dts = pd.DatetimeIndex(uniq.astype("datetime64[ns]"), tz="UTC").to_pydatetime()
    return dts[inv].tolist()
