"""Parse telemetry exports (histogram CSV, readings CSV, JSON) into records and problems.

Pure: bytes or a binary file-like object in, a :class:`~monitor.records.ParsedFile` out.
Values are converted to the canonical units of :mod:`monitor.units` and validated; every
problem found is collected (up to :data:`MAX_PROBLEMS` listed) so the person fixing the
file sees all of them at once. A file with any problem is rejected whole and then carries
no records. The formats are described for users in ``docs/formats.md``.

Histogram CSVs are parsed with one ``pandas.read_csv`` and whole-column numpy checks; the
histograms are cut from one stable sort by group key, with no Python loop per row.
"""

from __future__ import annotations

import csv
import hashlib
import io
import json
import re
import warnings
from collections.abc import Callable
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field
from typing import BinaryIO

import numpy as np
import pandas as pd

from monitor import units as U
from monitor.records import (
    QUANTITIES,
    QUANTITY_PRESSURE,
    QUANTITY_PRESSURE_SPEED,
    Histogram,
    ParsedFile,
    Problem,
    Reading,
)

MAX_PROBLEMS = 200
"""Problems listed per file; the rest are counted in one closing note."""

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
}
HIST_REQUIRED = (*HIST_TEXT, *HIST_NUMBERS, "pressure_low", "pressure_high")
READ_TEXT = ("unit", "position", "taken_at", "iso4406")
READ_NUMBERS = ("hour_meter",)
READ_UNIT_COLUMNS = {"case_drain": U.FLOW, "test_pressure": U.PRESSURE, "oil_temp": U.TEMPERATURE}
READ_REQUIRED = ("unit", "position", "taken_at", "hour_meter")

_TS_RE = re.compile(
    r"^\d{4}-\d{2}-\d{2}[T ]\d{2}:\d{2}(?::\d{2}(?:[.,]\d+)?)?(?:[Zz]|[+-]\d{2}(?::?\d{2})?)$"
)
_TS_NO_OFFSET_RE = re.compile(r"^\d{4}-\d{2}-\d{2}(?:[T ]\d{2}:\d{2}(?::\d{2}(?:[.,]\d+)?)?)?$")
_NONBLANK_RE = re.compile(rb"[^\xef\xbb\xbf \t\r\n]")
_ISO4406_RE = re.compile(r"^(?:-|>28|\d{1,2})/(?:>28|\d{1,2})/(?:>28|\d{1,2})$")
_TS_HELP = "write ISO 8601 with an offset, e.g. 2026-03-02T10:00:00Z or 2026-03-02T12:00:00+02:00"


def _fmt(x: float) -> str:
    """A number as the user would write it (no trailing ``.0``)."""
    if isinstance(x, str):
        return x
    if not np.isfinite(x):
        return str(x)
    return np.format_float_positional(float(x), trim="-")


class _Problems:
    """Collects problems of one file; lists the first MAX_PROBLEMS, counts the rest."""

    def __init__(self, file: str) -> None:
        self.file = file
        self.items: list[Problem] = []
        self.more = 0

    def add(self, line: int | None, column: str | None, value: object, message: str) -> None:
        if len(self.items) >= MAX_PROBLEMS:
            self.more += 1
            return
        shown = None if value is None else str(value)
        self.items.append(Problem(self.file, line, column, shown, message))

    def add_rows(
        self,
        rows: np.ndarray,
        field_: str,
        t: _Table,
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
        return out

    def __bool__(self) -> bool:
        return bool(self.items) or self.more > 0


@dataclass
class _Table:
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

    def locate(self, r: int, f: str) -> tuple[int | None, str]:
        return self.where(r, f)

    def value(self, r: int, f: str) -> str | None:
        if f in self.text:
            codes, uniq = self.text[f]
            v = uniq[codes[r]]
            return None if v is None or (isinstance(v, float) and np.isnan(v)) else str(v)
        if f in self.raw:
            return _fmt(self.raw[f][r])
        return None

    def unit_at(self, f: str, r: int) -> str:
        u = self.unit.get(f, "")
        return str(u if isinstance(u, str) else u[r])

    def strings(self, f: str) -> np.ndarray:
        codes, uniq = self.text[f]
        return np.asarray(uniq, dtype=object)[codes]


# ---------------------------------------------------------------- entry point


def parse_file(stream: BinaryIO | bytes, name: str) -> ParsedFile:
    """Parse one telemetry export, detecting its kind from its content.

    Parameters
    ----------
    stream : binary file-like or bytes
        The raw file content.
    name : str
        File name shown in problems.

    Returns
    -------
    ParsedFile
        Histograms [bar, rpm, h] and readings [L/min, bar, degC] in canonical units,
        ``content_sha256`` of the raw bytes, and every problem found. If there is any
        problem the record lists are empty.
    """
    data = stream if isinstance(stream, bytes | bytearray) else stream.read()
    data = bytes(data)
    with ThreadPoolExecutor(max_workers=1) as pool:
        # hashlib releases the GIL on large buffers: hash on the second core while parsing
        digest = pool.submit(lambda: hashlib.sha256(data).hexdigest())
        out = ParsedFile(name=name, content_sha256="")
        probs = _Problems(name)
        if _is_text(data, probs):
            head = data[:65536].decode("utf-8", errors="ignore").lstrip("\ufeff \t\r\n")
            if head.startswith(("{", "[")):
                _parse_json(data.decode("utf-8-sig"), probs, out)
            else:
                _parse_csv(data, head, probs, out)
        out.content_sha256 = digest.result()
    out.problems = probs.result()
    if out.problems:
        out.histograms, out.readings = [], []
    return out


def _is_text(data: bytes, probs: _Problems) -> bool:
    """True if ``data`` is non-blank UTF-8 text; else record why it is unusable."""
    if not data.isascii():
        try:
            data.decode("utf-8")
        except UnicodeDecodeError as e:
            line = data.count(b"\n", 0, e.start) + 1
            bad = f"0x{data[e.start]:02x}"
            probs.add(
                line,
                None,
                bad,
                f"file is not UTF-8 text (byte {bad} on line {line} is not valid UTF-8): "
                "export it again as UTF-8, e.g. 'Save as -> CSV UTF-8' in a spreadsheet "
                "program",
            )
            return False
    if not _NONBLANK_RE.search(data[:65536]) and not _NONBLANK_RE.search(data):
        probs.add(
            None,
            None,
            None,
            "file is empty: expected a histogram CSV, a readings CSV or a JSON document",
        )
        return False
    return True


# ---------------------------------------------------------------- CSV


def _parse_csv(data: bytes, head: str, probs: _Problems, out: ParsedFile) -> None:
    first = head.split("\n", 1)[0].rstrip("\r")
    sep = ";" if first.count(";") > first.count(",") else ","
    header = [h.strip() for h in next(csv.reader([first], delimiter=sep))]
    keys = [h.lower() for h in header]
    if "taken_at" in keys:
        spec = (READ_TEXT, READ_NUMBERS, READ_UNIT_COLUMNS, READ_REQUIRED, "readings")
    elif "period_start" in keys or any(k.startswith("pressure_") for k in keys):
        spec = (HIST_TEXT, HIST_NUMBERS, HIST_UNIT_COLUMNS, HIST_REQUIRED, "histogram")
    else:
        probs.add(
            1,
            None,
            first[:80],
            "cannot tell what this file holds: a histogram CSV needs the columns "
            f"{', '.join(HIST_REQUIRED)} (pressure columns with a unit suffix such as "
            "`pressure_low_bar`); a readings CSV needs "
            f"{', '.join(READ_REQUIRED)}; JSON must start with `{{` or `[`",
        )
        return
    cols = _resolve_header(header, spec, probs)
    if probs:
        return
    frame = _read_frame(data, sep, header, cols, spec[0], probs)
    if frame is None:
        return
    t = _csv_table(frame, header, cols, spec[0], sep, probs)
    if spec[4] == "histogram":
        out.histograms = _histograms(t, probs)
    else:
        out.readings = _readings(t, probs)


def _resolve_header(
    header: list[str], spec: tuple, probs: _Problems
) -> dict[str, tuple[int, str | None]]:
    """Map logical column -> (position in header, unit spelling or None)."""
    text, numbers, unit_cols, required, kind = spec
    plain = (*text, *numbers)
    known = [*plain] + [f"{p}_<{'|'.join(U.SHORT_SPELLINGS[k])}>" for p, k in unit_cols.items()]
    cols: dict[str, tuple[int, str | None]] = {}
    for i, h in enumerate(header):
        key = h.lower()
        logical, unit = key, None
        if key not in plain:
            prefix = next((p for p in unit_cols if key == p or key.startswith(p + "_")), None)
            if prefix is None:
                probs.add(
                    1,
                    h,
                    None,
                    f"unknown column `{h}` in a {kind} CSV: known columns are {', '.join(known)}",
                )
                continue
            names = " or ".join(f"`{prefix}_{s}`" for s in U.SHORT_SPELLINGS[unit_cols[prefix]])
            if key == prefix:
                probs.add(1, h, None, f"column `{h}` has no unit: name it {names}")
                continue
            suffix = h[len(prefix) + 1 :]
            try:
                unit = U.normalise_unit(unit_cols[prefix], suffix)
            except ValueError:
                probs.add(1, h, None, f"column `{h}` has unknown unit `{suffix}`: name it {names}")
                continue
            logical = prefix
        if logical in cols:
            probs.add(
                1, h, None, f"column `{h}` repeats `{header[cols[logical][0]]}`: keep only one"
            )
            continue
        cols[logical] = (i, unit)
    for r in required:
        if r not in cols and not any(
            p.column == r or (p.column or "").lower().startswith(r) for p in probs.items
        ):
            what = f"`{r}_bar`" if r in unit_cols else f"`{r}`"
            probs.add(
                1,
                None,
                None,
                f"missing required column {what}: a {kind} CSV needs the columns "
                + ", ".join(f"{c}_<unit>" if c in unit_cols else c for c in required),
            )
    return cols


def _read_frame(
    data: bytes,
    sep: str,
    header: list[str],
    cols: dict[str, tuple[int, str | None]],
    text_cols: tuple[str, ...],
    probs: _Problems,
) -> pd.DataFrame | None:
    """One ``read_csv`` of the file: numbers as float64 (fast path) or as text (fallback)."""
    names = [f"c{i}" for i in range(len(header))]
    kinds = {f"c{i}": (object if lg in text_cols else "float64") for lg, (i, _) in cols.items()}
    kw = dict(
        sep=sep,
        decimal="," if sep == ";" else ".",
        header=0,
        names=names,
        index_col=False,
        keep_default_na=False,
        na_values=[""],
        skip_blank_lines=False,
        engine="c",
        encoding="utf-8-sig",
    )
    floats = {c: k for c, k in kinds.items() if k is not object}
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("error", pd.errors.ParserWarning)
            return _read_typed(data, kinds, floats, kw)
    except pd.errors.ParserWarning:  # the first data row is longer than the header
        probs.add(
            2,
            None,
            None,
            f"line 2 has more fields than the header has columns ({len(header)}): every "
            f"row needs one value per column, separated by `{sep}`",
        )
        return None
    except pd.errors.ParserError as e:
        m = re.search(r"Expected (\d+) fields in line (\d+), saw (\d+)", str(e))
        if m:
            probs.add(
                int(m.group(2)),
                None,
                None,
                f"line {m.group(2)} has {m.group(3)} fields but the header has {m.group(1)}: "
                f"every row needs one value per column, separated by `{sep}`",
            )
        else:
            probs.add(None, None, None, f"cannot read the CSV: {e}")
        return None


def _read_typed(data: bytes, kinds: dict, floats: dict, kw: dict) -> pd.DataFrame:
    """Fast path: numbers as float64, text inferred (explicit text dtypes are slow)."""
    try:
        frame = pd.read_csv(io.BytesIO(data), dtype=floats, **kw)
        if all(pd.api.types.is_string_dtype(frame[c]) for c in kinds if c not in floats):
            return frame
        return pd.read_csv(io.BytesIO(data), dtype=kinds, **kw)  # e.g. tag "0042"
    except ValueError as e:
        if isinstance(e, pd.errors.ParserError):
            raise
        return pd.read_csv(io.BytesIO(data), dtype=object, **kw)  # a cell is not a number


def _numbers(col: pd.Series, sep: str) -> tuple[np.ndarray, np.ndarray]:
    """Float64 values of a column and a mask of non-blank cells that are not numbers."""
    if col.dtype == np.float64:
        return col.to_numpy(), np.zeros(len(col), dtype=bool)
    s = col.str.strip()
    if sep == ";":
        s = s.str.replace(",", ".", regex=False)
    vals = pd.to_numeric(s, errors="coerce").to_numpy(dtype=np.float64, na_value=np.nan)
    bad = np.isnan(vals) & s.notna().to_numpy() & (s != "").to_numpy()
    bad &= ~s.str.lower().isin(["nan"]).to_numpy()
    return vals, bad


def _factorize_stripped(values: pd.Series) -> tuple[np.ndarray, np.ndarray]:
    """Codes and uniques of text values; blanks around values and missing cells -> ""."""
    codes, uniq = pd.factorize(values)
    clean = np.array([str(u).strip() for u in uniq] + [""], dtype=object)
    codes = np.asarray(codes, dtype=np.int64)
    codes[codes < 0] = len(uniq)
    remap, uniq2 = pd.factorize(clean)
    if len(uniq2) < len(clean):
        return remap[codes], np.asarray(uniq2, dtype=object)
    return codes, clean


def _csv_table(
    frame: pd.DataFrame,
    header: list[str],
    cols: dict[str, tuple[int, str | None]],
    text_cols: tuple[str, ...],
    sep: str,
    probs: _Problems,
) -> _Table:
    """Column arrays of a CSV frame in canonical units; blank lines dropped."""
    text, num, raw, unit = {}, {}, {}, {}
    blank = np.ones(len(frame), dtype=bool)
    notnum: dict[str, np.ndarray] = {}
    for lg, (i, u) in cols.items():
        col = frame[f"c{i}"]
        if lg in text_cols:
            codes, uniq = _factorize_stripped(col)
            text[lg] = (codes, uniq)
            blank &= (uniq == "")[codes]
            continue
        vals, notnum[lg] = _numbers(col, sep)
        blank &= np.isnan(vals) & ~notnum[lg]
        kind = HIST_UNIT_COLUMNS.get(lg) or READ_UNIT_COLUMNS.get(lg)
        raw[lg] = vals
        num[lg] = U.convert(vals, kind, u) if kind else vals
        unit[lg] = u or ""
    keep = np.flatnonzero(~blank) if blank.any() else None
    if keep is not None:
        text = {k: (c[keep], q) for k, (c, q) in text.items()}
        num = {k: v[keep] for k, v in num.items()}
        raw = {k: v[keep] for k, v in raw.items()}
        notnum = {k: v[keep] for k, v in notnum.items()}
    lines = (keep if keep is not None else np.arange(len(frame))) + 2
    names = {lg: header[i] for lg, (i, _) in cols.items()}
    t = _Table(len(lines), text, num, raw, unit, lambda r, f: (int(lines[r]), names.get(f, f)))
    t.line0 = lines
    t.labels = names
    for lg, bad in notnum.items():
        rows = np.flatnonzero(bad)
        if rows.size:
            t.raw[lg] = frame[f"c{cols[lg][0]}"].to_numpy(dtype=object)[
                keep if keep is not None else slice(None)
            ]
            probs.add_rows(rows, lg, t, f"`{names[lg]}` must be a number")
    return t


# ---------------------------------------------------------------- shared checks


def _check_text(t: _Table, fields: tuple[str, ...], probs: _Problems) -> None:
    """Blank identifiers; for each distinct bad value report its first row and a count."""
    for f in fields:
        if f not in t.text:
            continue
        codes, uniq = t.text[f]
        _first_rows(probs, t, f, codes, uniq == "", lambda v, f=f: f"`{f}` must not be blank")


def _first_rows(
    probs: _Problems,
    t: _Table,
    f: str,
    codes: np.ndarray,
    bad_uniq: np.ndarray,
    message: Callable[[str], str],
) -> None:
    """One problem per distinct bad value, at its first row, noting how many rows repeat it."""
    if not bad_uniq.any():
        return
    rows = np.flatnonzero(bad_uniq[codes])
    _, first, counts = np.unique(codes[rows], return_index=True, return_counts=True)
    order = np.argsort(rows[first])
    for k in order.tolist():
        r = int(rows[first[k]])
        text = message(t.value(r, f) or "")
        if counts[k] > 1:
            text += f" (the same value is on {counts[k] - 1} more rows)"
        line, column = t.locate(r, f)
        probs.add(line, column, t.value(r, f), text)


def _times(t: _Table, f: str, probs: _Problems) -> np.ndarray:
    """Parse a timestamp column: int64 ns since the epoch (UTC), NaT-int where invalid.

    Each distinct string is parsed once; the offset is required (checked by regex).
    """
    codes, uniq = t.text[f]
    strs = pd.Series(uniq, dtype=object).astype(str)
    shaped = strs.str.match(_TS_RE).to_numpy(dtype=bool)
    parsed = pd.to_datetime(strs.where(shaped, None), utc=True, format="ISO8601", errors="coerce")
    ns = parsed.to_numpy(dtype="datetime64[ns]").astype(np.int64)
    bad = ~shaped | parsed.isna().to_numpy()

    def msg(v: str) -> str:
        if not v:
            return f"`{f}` is blank: {_TS_HELP}"
        if _TS_NO_OFFSET_RE.match(v):
            return f"timestamp `{v}` has no UTC offset: add `Z` or an offset such as `+02:00`"
        return f"`{v}` is not a valid ISO 8601 timestamp: {_TS_HELP}"

    _first_rows(probs, t, f, codes, bad, msg)
    return ns[codes]


def _check_numbers(
    t: _Table, f: str, kind: str | None, probs: _Problems, required: bool, minimum: float = 0.0
) -> None:
    """Flag missing (when required), infinite, below-minimum and out-of-range values."""
    v = t.num[f]
    with np.errstate(invalid="ignore"):
        missing = np.isnan(v) if required else np.zeros(len(v), dtype=bool)
        inf = np.isinf(v)
        low = (v < minimum) & ~inf
        rng = U.out_of_range(v, kind) & ~low & ~inf if kind else np.zeros(len(v), bool)
    label = t.labels.get(f, f)
    what = f"a number >= {_fmt(minimum)}"
    if missing.any():
        probs.add_rows(np.flatnonzero(missing), f, t, f"`{label}` is missing: expected {what}")
    if inf.any() or low.any():
        probs.add_rows(np.flatnonzero(inf | low), f, t, f"`{label}` must be {what}")
    if rng.any():
        lo, hi = U.RANGES[kind]
        canon = U.CANONICAL[kind]

        def m(r: int) -> str:
            return (
                f"{_fmt(t.raw[f][r])} {t.unit_at(f, r)} is {v[r]:.1f} {canon}, outside the valid "
                f"range {_fmt(lo)}-{_fmt(hi)} {canon}: check the value and the unit"
            )

        probs.add_rows(np.flatnonzero(rng), f, t, m)


# ---------------------------------------------------------------- histograms


def _histograms(t: _Table, probs: _Problems) -> list[Histogram]:
    """Validate a band table and cut it into Histogram records."""
    if t.n == 0:
        probs.add(None, None, None, "the file has a header but no rows of data")
        return []
    for f in ("speed_low", "speed_high", "mean_speed"):
        if f not in t.num:
            t.num[f] = np.full(t.n, np.nan)
            t.raw[f] = t.num[f]
            t.unit[f] = "rpm"
    _check_text(t, ("unit", "position"), probs)
    qcodes, quniq = t.text["quantity"]
    quniq = np.array([str(q).lower() for q in quniq], dtype=object)
    t.text["quantity"] = (qcodes, quniq)
    _first_rows(
        probs,
        t,
        "quantity",
        qcodes,
        ~np.isin(quniq, QUANTITIES),
        lambda v: f"unknown quantity `{v}`: use `pressure` or `pressure_speed`",
    )
    is2d = (quniq == QUANTITY_PRESSURE_SPEED)[qcodes]
    start, end = _times(t, "period_start", probs), _times(t, "period_end", probs)
    for f in ("hour_meter_start", "hour_meter_end", "hours"):
        _check_numbers(t, f, None, probs, required=True)
    for f in ("pressure_low", "pressure_high"):
        _check_numbers(t, f, U.PRESSURE, probs, required=True)
    _check_speeds(t, is2d, probs)
    _check_band_edges(t, "pressure_low", "pressure_high", np.ones(t.n, bool), probs)
    _check_band_edges(t, "speed_low", "speed_high", is2d, probs)
    gid = _group_ids([t.text[k][0] for k in HIST_TEXT])
    order = np.lexsort((t.num["speed_low"], t.num["pressure_low"], gid))
    gs = gid[order]
    starts = np.flatnonzero(np.r_[True, gs[1:] != gs[:-1]])
    g = _Groups(order, starts, np.r_[starts[1:], len(order)])
    _check_group_constants(t, g, probs)
    _check_overlaps(t, g, is2d, probs)
    _check_periods(t, g, start, end, probs)
    _check_period_overlaps(t, g, start, end, probs)
    if probs:
        return []
    return _build(t, g, is2d, start, end)


def _check_speeds(t: _Table, is2d: np.ndarray, probs: _Problems) -> None:
    """Speed bands are required on pressure_speed rows and must be blank on pressure rows."""
    for f in ("speed_low", "speed_high"):
        v = t.num[f]
        given = ~np.isnan(v)
        rows = np.flatnonzero(is2d & ~given)
        probs.add_rows(rows, f, t, "a `pressure_speed` row needs a speed band [rpm]")
        rows = np.flatnonzero(~is2d & given)
        probs.add_rows(
            rows, f, t, "a `pressure` row has no speed band: leave it blank or use `pressure_speed`"
        )
        _check_numbers(t, f, U.SPEED, probs, required=False)
    _check_numbers(t, "mean_speed", U.SPEED, probs, required=False)


def _check_band_edges(
    t: _Table, lo_f: str, hi_f: str, rows_mask: np.ndarray, probs: _Problems
) -> None:
    lo, hi = t.num[lo_f], t.num[hi_f]
    with np.errstate(invalid="ignore"):
        bad = rows_mask & (lo >= hi)
    name = lo_f.split("_")[0]

    def m(r: int) -> str:
        return (
            f"{name} band {_fmt(t.raw[lo_f][r])}-{_fmt(t.raw[hi_f][r])}: the low edge is not "
            "below the high edge; expected low < high"
        )

    probs.add_rows(np.flatnonzero(bad), lo_f, t, m)


def _group_ids(code_arrays: list[np.ndarray]) -> np.ndarray:
    """Dense int64 id per distinct combination of the code arrays (first-seen order)."""
    gid = np.asarray(code_arrays[0], dtype=np.int64)
    for c in code_arrays[1:]:
        c = np.asarray(c, dtype=np.int64)
        gid, _ = pd.factorize(gid * (int(c.max(initial=0)) + 1) + c)
        gid = gid.astype(np.int64)
    return gid


@dataclass
class _Groups:
    """Rows sorted by (group, pressure low, speed low) and each group's slice bounds."""

    order: np.ndarray
    starts: np.ndarray
    ends: np.ndarray
    first: np.ndarray = field(init=False)  # original row of each group's first sorted row
    gs: np.ndarray = field(init=False)  # group number of each sorted row

    def __post_init__(self) -> None:
        self.first = self.order[self.starts]
        self.gs = np.repeat(np.arange(len(self.starts)), self.ends - self.starts)


def _check_group_constants(t: _Table, g: _Groups, probs: _Problems) -> None:
    """Hour meter and mean speed must be the same on every row of one histogram."""
    for f in ("hour_meter_start", "hour_meter_end", "mean_speed"):
        v = t.num[f][g.order]
        ref = t.num[f][g.first][g.gs]
        differ = ~((v == ref) | (np.isnan(v) & np.isnan(ref)))
        rows = np.sort(g.order[differ])
        probs.add_rows(
            rows,
            f,
            t,
            f"`{f}` differs from the first row of the same histogram (same unit, position, "
            "period and quantity): give one value per histogram",
        )


def _check_overlaps(t: _Table, g: _Groups, is2d: np.ndarray, probs: _Problems) -> None:
    """Bands of one histogram may leave gaps but must not overlap (nor repeat a cell)."""
    o = g.order
    same = np.r_[False, g.gs[1:] == g.gs[:-1]]
    pl, ph = t.num["pressure_low"][o], t.num["pressure_high"][o]
    sl = t.num["speed_low"][o]
    d2 = is2d[o]
    prev = np.r_[0, np.arange(len(o) - 1)]
    with np.errstate(invalid="ignore"):
        # 1-D: consecutive bands after sorting by low edge
        bad1 = same & ~d2 & (pl < ph[prev])
        # 2-D: distinct pressure bands (a new low edge) and the repeat of a cell
        newp = ~same | (pl != pl[prev])
        pfirst = np.maximum.accumulate(np.where(newp, np.arange(len(o)), 0))
        bad_hi = d2 & (ph != ph[pfirst])
        prev_band = np.r_[0, pfirst[:-1]]
        bad2 = same & d2 & newp & (pl < ph[prev_band])
        dup = same & d2 & ~newp & (sl == sl[prev])
    for mask, what in ((bad1 | bad2 | bad_hi, "pressure"), (dup, "cell")):
        rows = np.flatnonzero(mask)
        other = np.where(bad_hi[rows], pfirst[rows], prev[rows]) if what == "pressure" else None

        def m(i: int, rows=rows, other=other, what=what) -> str:
            k = int(np.searchsorted(rows, i))
            if what == "cell":
                also = t.locate(o[i - 1], "hours")[0]
                return (
                    f"pressure-speed cell given twice (also on line {also}): give each "
                    "pressure band x speed band cell once"
                )
            j = int(other[k])
            return (
                f"pressure band {_fmt(t.raw['pressure_low'][o[i]])}-"
                f"{_fmt(t.raw['pressure_high'][o[i]])} overlaps the band "
                f"{_fmt(t.raw['pressure_low'][o[j]])}-{_fmt(t.raw['pressure_high'][o[j]])} "
                f"(line {t.locate(o[j], 'pressure_low')[0]}): bands may leave gaps but must "
                "not overlap"
            )

        for i in rows[:MAX_PROBLEMS].tolist():
            line, column = t.locate(int(o[i]), "pressure_low")
            probs.add(line, column, t.value(int(o[i]), "pressure_low"), m(i))
        probs.more += max(0, len(rows) - MAX_PROBLEMS)
    _check_speed_overlaps(t, g, d2, probs)


def _check_speed_overlaps(t: _Table, g: _Groups, d2: np.ndarray, probs: _Problems) -> None:
    """Distinct speed bands of one pressure-by-speed histogram must not overlap."""
    rows2 = g.order[d2]
    if rows2.size == 0:
        return
    gs2 = g.gs[d2]
    sl, sh = t.num["speed_low"][rows2], t.num["speed_high"][rows2]
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


def _check_periods(
    t: _Table, g: _Groups, start: np.ndarray, end: np.ndarray, probs: _Problems
) -> None:
    """Per histogram: period order, hour meter order, hours vs hour-meter advance."""
    f = g.first
    s, e = start[f], end[f]
    hs, he = t.num["hour_meter_start"][f], t.num["hour_meter_end"][f]
    nat = np.iinfo(np.int64).min
    rows = f[(s != nat) & (e != nat) & (e <= s)]
    probs.add_rows(
        rows,
        "period_end",
        t,
        "period_end is not after period_start: a period must end after it starts",
    )
    with np.errstate(invalid="ignore"):
        back = he < hs
    probs.add_rows(
        f[back],
        "hour_meter_end",
        t,
        lambda r: (
            f"hour_meter_end {_fmt(t.raw['hour_meter_end'][r])} is below hour_meter_start "
            f"{_fmt(t.raw['hour_meter_start'][r])}: the hour meter must not run backwards "
            "within a period (a replaced meter is recorded in the fleet registry)"
        ),
    )
    total = np.add.reduceat(t.num["hours"][g.order], g.starts)
    dh = he - hs
    tol = np.maximum(HOURS_TOLERANCE_H, HOURS_TOLERANCE_FRACTION * dh)
    with np.errstate(invalid="ignore"):
        off = (np.abs(total - dh) > tol) & ~back
    k_of = {int(r): k for k, r in enumerate(f.tolist())}
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


def _where(t: _Table, r: int, f: str) -> str:
    """``line N`` for CSV rows, the field path for JSON values."""
    line, column = t.locate(r, f)
    return f"line {line}" if line is not None else column


def _check_period_overlaps(
    t: _Table, g: _Groups, start: np.ndarray, end: np.ndarray, probs: _Problems
) -> None:
    """Two histograms of one unit, position and quantity must not share time in one file."""
    f = g.first
    key = _group_ids([t.text[k][0][f] for k in ("unit", "position", "quantity")])
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
            f"period overlaps the histogram at {_where(t, other[r], 'period_start')} of the "
            "same unit, position and quantity: each hour may be counted only once"
        ),
    )


def _build(
    t: _Table, g: _Groups, is2d: np.ndarray, start: np.ndarray, end: np.ndarray
) -> list[Histogram]:
    """Histogram records from array slices, one per group (no loop per row)."""
    o = g.order
    pl, ph = t.num["pressure_low"][o], t.num["pressure_high"][o]
    sl, sh = t.num["speed_low"][o], t.num["speed_high"][o]
    hours = t.num["hours"][o]
    f = g.first
    ts = _to_datetimes(np.r_[start[f], end[f]])
    n = len(f)
    unit = t.strings("unit")[f].tolist()
    pos = t.strings("position")[f].tolist()
    hm0, hm1 = t.num["hour_meter_start"][f].tolist(), t.num["hour_meter_end"][f].tolist()
    ms = [None if np.isnan(x) else x for x in t.num["mean_speed"][f].tolist()]
    lines = np.minimum.reduceat(t.line0[o], g.starts) if t.line0 is not None else None
    lines = lines.tolist() if lines is not None else [None] * n
    flat2d = is2d[f].tolist()
    out = []
    for k, (a, b) in enumerate(zip(g.starts.tolist(), g.ends.tolist(), strict=True)):
        h = Histogram(
            unit[k],
            pos[k],
            QUANTITY_PRESSURE,
            ts[k],
            ts[n + k],
            hm0[k],
            hm1[k],
            pl[a:b],
            ph[a:b],
            hours[a:b],
            mean_speed_rpm=ms[k],
            line=lines[k],
        )
        if flat2d[k]:
            _make_matrix(h, pl[a:b], ph[a:b], sl[a:b], sh[a:b], hours[a:b])
        out.append(h)
    return out


def _make_matrix(h: Histogram, pl, ph, sl, sh, hours) -> None:
    """Turn cells (sorted by pressure low, speed low) into a pressure-by-speed matrix."""
    pu, pi = np.unique(pl, return_inverse=True)
    su, si = np.unique(sl, return_index=False, return_inverse=True)
    pfirst = np.searchsorted(pl, pu)
    shigh = np.empty(len(su))
    shigh[si] = sh
    m = np.zeros((len(pu), len(su)))
    m[pi, si] = hours
    h.quantity = QUANTITY_PRESSURE_SPEED
    h.pressure_low_bar, h.pressure_high_bar = pu, ph[pfirst]
    h.speed_low_rpm, h.speed_high_rpm, h.hours = su, shigh, m


def _to_datetimes(ns: np.ndarray) -> list:
    """int64 ns since the epoch -> UTC-aware datetimes (each distinct value converted once)."""
    uniq, inv = np.unique(ns, return_inverse=True)
    dts = pd.DatetimeIndex(uniq.astype("datetime64[ns]"), tz="UTC").to_pydatetime()
    return dts[inv].tolist()


# ---------------------------------------------------------------- readings


def _readings(t: _Table, probs: _Problems) -> list[Reading]:
    """Validate a readings table and build Reading records (one per service check)."""
    if t.n == 0:
        probs.add(None, None, None, "the file has a header but no rows of data")
        return []
    _check_text(t, ("unit", "position"), probs)
    taken = _times(t, "taken_at", probs)
    _check_numbers(t, "hour_meter", None, probs, required=True)
    for f, kind in READ_UNIT_COLUMNS.items():
        if f in t.num:
            minimum = U.RANGES[kind][0]
            _check_numbers(t, f, kind, probs, required=False, minimum=minimum)
    codes = None
    if "iso4406" in t.text:
        c, q = t.text["iso4406"]
        q = np.array([str(x).replace(" ", "") for x in q], dtype=object)
        t.text["iso4406"] = (c, q)
        ok = np.array([v == "" or _iso4406_ok(v) for v in q], dtype=bool)
        _first_rows(
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
        codes = [None if v == "" else v for v in q[c].tolist()]
    if probs:
        return []
    when = _to_datetimes(taken)
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


# ---------------------------------------------------------------- JSON

DOC_KEYS = (
    "unit",
    "period_start",
    "period_end",
    "hour_meter_start",
    "hour_meter_end",
    "histograms",
    "readings",
)
HIST_KEYS = (
    "position",
    "quantity",
    "pressure_unit",
    "pressure_edges",
    "speed_edges_rpm",
    "hours",
    "mean_speed_rpm",
)
READING_KEYS = (
    "position",
    "taken_at",
    "hour_meter",
    "case_drain",
    "case_drain_unit",
    "test_pressure",
    "test_pressure_unit",
    "oil_temp",
    "oil_temp_unit",
    "iso4406",
)
_JSON_FIELD = {
    "pressure_low": "pressure_edges",
    "pressure_high": "pressure_edges",
    "speed_low": "speed_edges_rpm",
    "speed_high": "speed_edges_rpm",
    "mean_speed": "mean_speed_rpm",
}


def _parse_json(text: str, probs: _Problems, out: ParsedFile) -> None:
    try:
        doc = json.loads(text.lstrip("\ufeff"))
    except json.JSONDecodeError as e:
        probs.add(
            e.lineno,
            f"column {e.colno}",
            None,
            f"invalid JSON at line {e.lineno}, column {e.colno}: {e.msg}; expected one "
            "document `{...}` or a list of documents `[{...}, ...]`",
        )
        return
    docs = doc if isinstance(doc, list) else [doc]
    prefix = [f"[{d}]" if isinstance(doc, list) else "" for d in range(len(docs))]
    bands, reads = _Rows(), _Rows()
    for d, item in enumerate(docs):
        if not isinstance(item, dict):
            probs.add(None, prefix[d] or "$", None, "expected a JSON object `{...}` per upload")
            continue
        _json_doc(item, prefix[d], bands, reads, probs)
    if bands.n:
        out.histograms = _histograms(bands.table(HIST_TEXT), probs)
    if reads.n:
        out.readings = _readings(reads.table(READ_TEXT), probs)
    if not bands.n and not reads.n:
        probs.add(None, None, None, "the JSON holds no histograms and no readings")


class _Rows:
    """Row-wise collector for JSON values; becomes a _Table with one path per value."""

    def __init__(self) -> None:
        self.n = 0
        self.cols: dict[str, list] = {}
        self.raw: dict[str, list] = {}
        self.units: dict[str, list] = {}
        self.paths: dict[str, list] = {}

    def add(self, values: dict[str, tuple]) -> None:
        """values: column -> (canonical or text value, raw value, unit, path)."""
        for f, (v, raw, unit, path) in values.items():
            for store, x in (
                (self.cols, v),
                (self.raw, raw),
                (self.units, unit),
                (self.paths, path),
            ):
                store.setdefault(f, [None] * self.n).append(x)
        self.n += 1
        for store in (self.cols, self.raw, self.units, self.paths):
            for lst in store.values():
                if len(lst) < self.n:
                    lst.append(None)

    def table(self, text_cols: tuple[str, ...]) -> _Table:
        text, num, raw, unit = {}, {}, {}, {}
        for f, vals in self.cols.items():
            if f in text_cols:
                codes, uniq = pd.factorize(
                    pd.Series(["" if v is None else str(v).strip() for v in vals], dtype=object)
                )
                text[f] = (codes, np.asarray(uniq, dtype=object))
            else:
                num[f] = np.array([np.nan if v is None else v for v in vals], dtype=np.float64)
                raw[f] = np.array([np.nan if v is None else v for v in self.raw[f]], dtype=float)
                unit[f] = np.array(self.units[f], dtype=object)
        paths = self.paths
        return _Table(
            self.n,
            text,
            num,
            raw,
            unit,
            lambda r, f: (None, paths[f][r] if f in paths else f),
            labels=dict(_JSON_FIELD),
        )


def _check_keys(obj: dict, known: tuple[str, ...], path: str, probs: _Problems) -> None:
    for k in obj:
        if k not in known:
            probs.add(
                None,
                f"{path}.{k}" if path else k,
                None,
                f"unknown field `{k}`: known fields are {', '.join(known)}",
            )


def _json_num(obj: dict, key: str, path: str, probs: _Problems, required: bool) -> float | None:
    v = obj.get(key)
    if v is None:
        if required:
            probs.add(None, f"{path}.{key}", None, f"`{key}` is missing: expected a number")
        return None
    if isinstance(v, bool) or not isinstance(v, int | float):
        probs.add(None, f"{path}.{key}", str(v), f"`{key}` must be a number")
        return None
    return float(v)


def _json_unit(obj: dict, key: str, kind: str, path: str, probs: _Problems) -> str | None:
    try:
        return U.normalise_unit(kind, obj.get(key, ""))
    except ValueError as e:
        probs.add(None, f"{path}.{key}", str(obj.get(key)), str(e))
        return None


def _json_doc(item: dict, p: str, bands: _Rows, reads: _Rows, probs: _Problems) -> None:
    dot = "." if p else ""
    _check_keys(item, DOC_KEYS, p, probs)
    hists, rdgs = item.get("histograms") or [], item.get("readings") or []
    if not isinstance(item.get("unit"), str):
        probs.add(None, f"{p}{dot}unit", None, "`unit` is missing: expected the unit tag as text")
    common = {"unit": (item.get("unit"), None, None, f"{p}{dot}unit")}
    if hists:
        for k in ("period_start", "period_end"):
            common[k] = (item.get(k), None, None, f"{p}{dot}{k}")
        for k in ("hour_meter_start", "hour_meter_end"):
            v = _json_num(item, k, p, probs, required=True)
            common[k] = (v, v, "", f"{p}{dot}{k}")
    for key, lst, fn in (("histograms", hists, _json_hist), ("readings", rdgs, _json_reading)):
        if not isinstance(lst, list):
            probs.add(None, f"{p}{dot}{key}", None, f"`{key}` must be a list")
            continue
        for i, obj in enumerate(lst):
            path = f"{p}{dot}{key}[{i}]"
            if not isinstance(obj, dict):
                probs.add(None, path, None, "expected a JSON object `{...}`")
            else:
                fn(obj, path, common, bands if key == "histograms" else reads, probs)


def _edges(obj: dict, key: str, path: str, probs: _Problems) -> list[float] | None:
    e = obj.get(key)
    if (
        not isinstance(e, list)
        or len(e) < 2
        or not all(isinstance(x, int | float) and not isinstance(x, bool) for x in e)
    ):
        probs.add(
            None,
            f"{path}.{key}",
            None,
            f"`{key}` must be a list of at least two numbers (N+1 edges for N bands)",
        )
        return None
    return [float(x) for x in e]


def _json_hist(obj: dict, path: str, common: dict, rows: _Rows, probs: _Problems) -> None:
    _check_keys(obj, HIST_KEYS, path, probs)
    q = str(obj.get("quantity", "")).lower()
    if q not in QUANTITIES:
        probs.add(
            None,
            f"{path}.quantity",
            str(obj.get("quantity")),
            "unknown quantity: use `pressure` or `pressure_speed`",
        )
        return
    pu = _json_unit(obj, "pressure_unit", U.PRESSURE, path, probs)
    pe = _edges(obj, "pressure_edges", path, probs)
    se = _edges(obj, "speed_edges_rpm", path, probs) if q == QUANTITY_PRESSURE_SPEED else [0, 0]
    ms = _json_num(obj, "mean_speed_rpm", path, probs, required=False)
    hours = obj.get("hours")
    if pu is None or pe is None or se is None:
        return
    shape = (len(pe) - 1,) if q == QUANTITY_PRESSURE else (len(pe) - 1, len(se) - 1)
    try:
        h = np.asarray(hours, dtype=np.float64)
        ok = h.shape == shape
    except (TypeError, ValueError):
        ok = False
    if not ok:
        probs.add(
            None,
            f"{path}.hours",
            None,
            f"`hours` must be {'a list' if len(shape) == 1 else 'a list of rows'} of "
            f"numbers of shape {shape} (one per band)",
        )
        return
    pb = U.to_bar(pe, pu)
    base = dict(common)
    base["position"] = (obj.get("position"), None, None, f"{path}.position")
    base["quantity"] = (q, None, None, f"{path}.quantity")
    base["mean_speed"] = (ms, ms, "rpm", f"{path}.mean_speed_rpm")
    for idx in np.ndindex(*shape):
        i = idx[0]
        row = dict(base)
        row["pressure_low"] = (pb[i], pe[i], pu, f"{path}.pressure_edges[{i}]")
        row["pressure_high"] = (pb[i + 1], pe[i + 1], pu, f"{path}.pressure_edges[{i + 1}]")
        if len(idx) == 2:
            j = idx[1]
            row["speed_low"] = (se[j], se[j], "rpm", f"{path}.speed_edges_rpm[{j}]")
            row["speed_high"] = (se[j + 1], se[j + 1], "rpm", f"{path}.speed_edges_rpm[{j + 1}]")
        hv = float(h[idx])
        row["hours"] = (hv, hv, "", f"{path}.hours" + "".join(f"[{k}]" for k in idx))
        rows.add(row)


def _json_reading(obj: dict, path: str, common: dict, rows: _Rows, probs: _Problems) -> None:
    _check_keys(obj, READING_KEYS, path, probs)
    row = {"unit": common["unit"]}
    for k in ("position", "taken_at", "iso4406"):
        v = obj.get(k)
        row[k] = (v, None, None, f"{path}.{k}")
    hm = _json_num(obj, "hour_meter", path, probs, required=True)
    row["hour_meter"] = (hm, hm, "", f"{path}.hour_meter")
    for f, kind in READ_UNIT_COLUMNS.items():
        v = _json_num(obj, f, path, probs, required=False)
        if v is None:
            row[f] = (None, None, None, f"{path}.{f}")
            continue
        u = _json_unit(obj, f + "_unit", kind, path, probs)
        conv = float(U.convert([v], kind, u)[0]) if u else None
        row[f] = (conv, v, u, f"{path}.{f}")
    rows.add(row)
