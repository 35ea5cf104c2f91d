"""Read a logged pressure trace (CSV) chunk by chunk into histograms, cycles, peaks, stalls.

Format (for users in ``docs/formats.md``): UTF-8 text, comma-separated (or semicolon-separated
with a decimal comma, told apart by the header line); one row per sample, with

- a time column: ``time_s`` (elapsed seconds, any start) or ``timestamp`` (ISO 8601 with a
  UTC offset), strictly increasing from row to row; sampling may be irregular;
- ``pressure_a_<u>`` and ``pressure_b_<u>``: gauge pressure of the two sides of the loop,
  ``<u>`` one of ``bar``, ``psi``, ``mpa``, ``kpa`` (any case);
- optionally ``speed_rpm``: shaft speed.

The file is read ``settings.chunk_rows`` rows at a time and never held whole: memory is
bounded by the chunk size and the (small) running results. Clean files go through a fast
path that reads numbers straight to float64; a file with any cell that is not a plain
finite number is read again as text so that every problem can be named (line, column,
value, what is expected; the first 200, then a count). A file with any problem gives no
results. Units are converted with :mod:`monitor.ingest.units`.
"""

from __future__ import annotations

import csv
import io
import re
import shutil
import tempfile
import warnings
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from typing import BinaryIO

import numpy as np
import pandas as pd

from monitor.domain.batch import utc_datetimes
from monitor.ingest import units as U
from monitor.ingest.common import MAX_PROBLEMS, ProblemList, fmt
from monitor.ingest.trace_accumulate import (
    TraceAccumulator,
    TraceResult,
    TraceSettings,
    trace_histograms,
)

TIME_COLUMNS = ("time_s", "timestamp")
UNIT_COLUMNS = {"pressure_a": U.PRESSURE, "pressure_b": U.PRESSURE, "speed": U.SPEED}
REQUIRED = ("pressure_a", "pressure_b")
SHOWN_CHARS = 60
"""Longest value echoed in a problem; longer values are cut with an ellipsis."""
HEADER_LIMIT_BYTES = 65536
"""Longest header line read."""
LINE_LIMIT_BYTES = 65536
"""Longest data line accepted: a row of a trace is well under 100 bytes, and the CSV reader
would hold a longer line whole, whatever the chunk size."""
_SCAN_BLOCK_BYTES = 1 << 22

_KNOWN = "time_s or timestamp, pressure_a_<unit>, pressure_b_<unit>, speed_rpm (optional)"
_TS_RE = r"^\d{4}-\d{2}-\d{2}[T ]\d{2}:\d{2}(?::\d{2}(?:[.,]\d+)?)?(?:[Zz]|[+-]\d{2}(?::?\d{2})?)$"
_TS_NO_OFFSET_RE = re.compile(r"^\d{4}-\d{2}-\d{2}(?:[T ]\d{2}:\d{2}(?::\d{2}(?:[.,]\d+)?)?)?$")
_TS_HELP = "write ISO 8601 with an offset, e.g. 2026-03-02T10:00:00Z or 2026-03-02T12:00:00+02:00"

Columns = dict[str, tuple[int, str | None]]
"""Logical column -> (position in the header, unit spelling or None)."""

__all__ = ["TraceResult", "TraceSettings", "read_trace", "trace_histograms"]


class _NeedText(Exception):
    """The fast path met a cell that is not a plain finite number."""


def shown(value: object) -> str | None:
    """A value as echoed in a problem: text, cut to :data:`SHOWN_CHARS` characters."""
    if value is None:
        return None
    text = value if isinstance(value, str) else fmt(value)
    return text if len(text) <= SHOWN_CHARS else text[: SHOWN_CHARS - 3] + "..."


def read_trace(
    stream: BinaryIO | bytes, name: str = "trace.csv", settings: TraceSettings | None = None
) -> TraceResult:
    """Read one trace CSV and reduce it to histograms, turning points, peaks and stalls.

    Parameters
    ----------
    stream : binary file-like or bytes
        The file content. A stream that cannot seek is first copied to a temporary file.
    name : str
        File name shown in problems.
    settings : TraceSettings, optional
        Band edges, relief and cut-off settings, gap limit and the other choices; defaults
        as documented there.

    Returns
    -------
    TraceResult
        Results in bar, rpm, h and s, or (with any problem) only the problems.
    """
    settings = settings or TraceSettings()
    with _seekable(stream) as fh:
        origin = fh.tell()
        head = ProblemList(name)
        header = _read_header(fh, head)
        cols = _resolve_header(header[1], head) if header else None
        if not head:
            _check_line_lengths(fh, origin, head)
        if head:
            return TraceResult(name, tuple(head.result()), settings)
        for typed in (True, False):
            fh.seek(origin)
            reader = _Reader(name, header, cols, settings)
            try:
                reader.run(fh, typed)
            except _NeedText:
                continue
            return reader.result()
    raise AssertionError("the text path never asks for itself")  # pragma: no cover


@contextmanager
def _seekable(stream: BinaryIO | bytes) -> Iterator[BinaryIO]:
    if isinstance(stream, bytes | bytearray | memoryview):
        yield io.BytesIO(bytes(stream))
        return
    if getattr(stream, "seekable", lambda: False)():
        yield stream
        return
    with tempfile.SpooledTemporaryFile(max_size=32 << 20) as tmp:
        shutil.copyfileobj(stream, tmp, 1 << 20)
        tmp.seek(0)
        yield tmp


def _check_line_lengths(fh: BinaryIO, origin: int, probs: ProblemList) -> None:
    """A problem for the first line longer than :data:`LINE_LIMIT_BYTES` (one pass in
    blocks; line ends are LF, CR or CR LF)."""
    fh.seek(origin)
    since_end, lines, after_cr = 0, 1, False
    while chunk := fh.read(_SCAN_BLOCK_BYTES):
        b = np.frombuffer(chunk, dtype=np.uint8)
        is_end = (b == 10) | (b == 13)
        ends = np.flatnonzero(is_end)
        starts_line = (b == 10) | ((b == 13) & (np.r_[b[1:], 0] != 10))  # one per line end
        starts_line[0] &= not (after_cr and b[0] == 10)  # a CR LF split between blocks
        after_cr = b[-1] == 13
        gaps = np.diff(ends, prepend=-1 - since_end) - 1
        tail = len(chunk) - 1 - (ends[-1] if ends.size else -1 - since_end)
        long = np.flatnonzero(gaps > LINE_LIMIT_BYTES)
        if long.size or tail > LINE_LIMIT_BYTES:
            at = ends[long[0]] if long.size else len(chunk)
            line = lines + int(np.count_nonzero(starts_line[:at]))
            probs.add(
                line,
                None,
                None,
                f"line {line} is longer than {LINE_LIMIT_BYTES} bytes: "
                "a trace has one short row per sample",
            )
            return
        lines += int(np.count_nonzero(starts_line))
        since_end = tail
    fh.seek(origin)


def _read_header(fh: BinaryIO, probs: ProblemList) -> tuple[str, list[str]] | None:
    """Separator and column labels of the header line, or None with a problem."""
    raw = fh.readline(HEADER_LIMIT_BYTES + 1)
    ends = [i for i in (raw.find(b"\r"), raw.find(b"\n")) if i >= 0]
    if not ends and len(raw) > HEADER_LIMIT_BYTES:
        probs.add(1, None, None, f"the header line is longer than {HEADER_LIMIT_BYTES} bytes")
        return None
    raw = raw[: min(ends)] if ends else raw  # the CSV reader also ends a line at a lone CR
    try:
        first = raw.decode("utf-8-sig")
    except UnicodeDecodeError:
        probs.add(1, None, None, "the header is not UTF-8 text: save the file as CSV UTF-8")
        return None
    if not first.strip():
        probs.add(1, None, None, f"the file has no header line: a trace CSV needs {_KNOWN}")
        return None
    sep = ";" if first.count(";") > first.count(",") else ","
    try:
        labels = next(csv.reader([first], delimiter=sep))
    except csv.Error as e:
        probs.add(1, None, shown(first), f"cannot read the header line ({e}): {_KNOWN}")
        return None
    return sep, [h.strip() for h in labels]


def _resolve_header(labels: list[str], probs: ProblemList) -> Columns:
    """Logical column -> (position, unit); problems for unknown, unitless, repeated and
    missing columns."""
    cols: Columns = {}
    for i, label in enumerate(labels):
        resolved = _resolve_column(label, probs)
        if resolved is None:
            continue
        if resolved[0] in cols:
            first = labels[cols[resolved[0]][0]]
            probs.add(1, label, None, f"column `{label}` repeats `{first}`: keep only one")
            continue
        cols[resolved[0]] = (i, resolved[1])
    if "time_s" in cols and "timestamp" in cols:
        probs.add(1, None, None, "the file has both `time_s` and `timestamp`: keep only one")
    if not any(t in cols for t in TIME_COLUMNS):
        probs.add(
            1,
            None,
            None,
            "missing time column: a trace CSV needs `time_s` (elapsed seconds) or `timestamp` "
            "(ISO 8601 with a UTC offset)",
        )
    for r in REQUIRED:
        if r not in cols and not any((p.column or "").lower().startswith(r) for p in probs.items):
            probs.add(
                1,
                None,
                None,
                f"missing required column `{r}_bar` (or `{r}_psi`, ...): "
                f"a trace CSV needs {_KNOWN}",
            )
    return cols


def _resolve_column(label: str, probs: ProblemList) -> tuple[str, str | None] | None:
    key = label.lower()
    if key in TIME_COLUMNS:
        return key, None
    prefix = next((p for p in UNIT_COLUMNS if key == p or key.startswith(p + "_")), None)
    if prefix is None:
        probs.add(
            1, shown(label), None, f"unknown column `{shown(label)}`: known columns are {_KNOWN}"
        )
        return None
    kind = UNIT_COLUMNS[prefix]
    names = " or ".join(f"`{prefix}_{s}`" for s in U.SHORT_SPELLINGS[kind])
    if key == prefix:
        probs.add(1, label, None, f"column `{label}` has no unit: name it {names}")
        return None
    suffix = label[len(prefix) + 1 :]
    try:
        return prefix, U.normalise_unit(kind, suffix)
    except ValueError:
        probs.add(
            1,
            shown(label),
            None,
            f"column `{shown(label)}` has unknown unit `{shown(suffix)}`: name it {names}",
        )
        return None


def _add_rows(
    probs: ProblemList,
    lines: np.ndarray,
    column: str,
    values: np.ndarray,
    message: str | Callable[[int], str],
) -> None:
    """One problem per row (position in ``lines``), at most as many as still fit."""
    room = max(0, MAX_PROBLEMS - len(probs.items))
    for k in range(min(room, lines.size)):
        text = message(k) if callable(message) else message
        probs.add(int(lines[k]), column, shown(values[k]), text)
    probs.more += max(0, lines.size - room)


class _Reader:
    """One pass over the rows: validation of every chunk, accumulation while clean."""

    def __init__(
        self, name: str, header: tuple[str, list[str]], cols: Columns, settings: TraceSettings
    ) -> None:
        self.name, (self.sep, labels), self.cols, self.s = name, header, cols, settings
        self.probs = ProblemList(name)
        self.labels = {lg: labels[i] for lg, (i, _) in cols.items()}
        self.time_col = "timestamp" if "timestamp" in cols else "time_s"
        self.acc = TraceAccumulator(settings, has_speed="speed" in cols)
        self.rows = 0  # data rows read so far, blank ones included
        self.samples = 0
        self.first: float | int | None = None  # first time (s, or ns for timestamps)
        self.last: tuple[float | int, int] | None = None  # last valid time and its line
        self.unreadable = False  # the rows could not all be read

    def run(self, fh: BinaryIO, typed: bool) -> None:
        """Read every chunk; raise :class:`_NeedText` from the fast path on an odd cell."""
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("error", pd.errors.ParserWarning)
                with pd.read_csv(fh, **self._csv_options(typed)) as chunks:
                    for chunk in chunks:
                        lines = self.rows + 2 + np.arange(len(chunk))
                        self.rows += len(chunk)
                        self._chunk(chunk, lines, typed)
        except pd.errors.ParserWarning:
            self.unreadable = True
            self.probs.add(
                2,
                None,
                None,
                "line 2 has more fields than the header has columns: every row needs one "
                f"value per column, separated by `{self.sep}`",
            )
        except UnicodeDecodeError:
            self.unreadable = True
            self.probs.add(None, None, None, "the file is not UTF-8 text: save it as CSV UTF-8")
        except pd.errors.ParserError as e:
            self.unreadable = True
            self._ragged(e)
        except ValueError as e:
            if typed:
                raise _NeedText from None
            self.unreadable = True
            self.probs.add(None, None, None, f"cannot read the CSV: {shown(str(e))}")

    def _csv_options(self, typed: bool) -> dict:
        names = [f"c{i}" for i in range(len(self.labels))]  # every column is known
        opts = dict(
            sep=self.sep,
            decimal="," if self.sep == ";" else ".",
            header=0,
            names=names,
            index_col=False,
            skip_blank_lines=False,
            chunksize=self.s.chunk_rows,
            engine="c",
            encoding="utf-8",
        )
        if not typed:
            return {**opts, "dtype": str, "keep_default_na": False, "na_filter": False}
        kinds = {
            f"c{i}": (str if lg == "timestamp" else "float64") for lg, (i, _) in self.cols.items()
        }
        return {**opts, "dtype": kinds, "keep_default_na": False, "na_values": [""]}

    def _ragged(self, e: Exception) -> None:
        m = re.search(r"Expected (\d+) fields in line (\d+), saw (\d+)", str(e))
        quote = re.search(r"EOF inside string starting at row (\d+)", str(e))
        if quote is not None:  # the row counts data rows from 1 after the header
            line = int(quote.group(1)) + 1
            self.probs.add(
                line,
                None,
                None,
                'a quote (") on this line opens a value that is '
                "never closed: remove the quote or close it",
            )
            return
        if m is None:
            self.probs.add(None, None, None, f"cannot read the CSV: {shown(str(e))}")
            return
        self.probs.add(
            int(m.group(2)),
            None,
            None,
            f"line {m.group(2)} has {m.group(3)} fields "
            f"but the header has {m.group(1)}: every row needs one value per column, "
            f"separated by `{self.sep}`",
        )

    def _chunk(self, chunk: pd.DataFrame, lines: np.ndarray, typed: bool) -> None:
        """Validate one chunk; add it to the results while the file has no problem."""
        cells = {lg: chunk[f"c{i}"] for lg, (i, _) in self.cols.items()}
        if typed:
            values = self._typed(cells)
        else:
            cells, lines = self._drop_blank(cells, lines)
            values = {
                lg: self._number(lg, c, lines) for lg, c in cells.items() if lg != "timestamp"
            }
        if self.time_col == "timestamp":
            values["timestamp"] = self._timestamps(cells["timestamp"], lines)
        for lg in ("pressure_a", "pressure_b", "speed"):
            if lg in values:
                values[lg] = self._in_range(lg, values[lg], lines)
        self._increasing(values[self.time_col], cells[self.time_col], lines)
        self.samples += lines.size
        if not self.probs and lines.size:
            self._accumulate(values)

    def _typed(self, cells: dict[str, pd.Series]) -> dict[str, np.ndarray]:
        values = {}
        for lg, c in cells.items():
            if lg == "timestamp":
                if c.isna().any():
                    raise _NeedText
                continue
            v = c.to_numpy(dtype=np.float64)
            if not np.isfinite(v).all():
                raise _NeedText
            values[lg] = v
        return values

    def _drop_blank(self, cells: dict, lines: np.ndarray) -> tuple[dict, np.ndarray]:
        """Cells as stripped text, without the rows where every cell is empty."""
        cells = {lg: c.fillna("").str.strip() for lg, c in cells.items()}
        blank = np.logical_and.reduce([(c == "").to_numpy(dtype=bool) for c in cells.values()])
        if not blank.any():
            return cells, lines
        keep = ~blank
        return {lg: c[keep] for lg, c in cells.items()}, lines[keep]

    def _number(self, lg: str, text: pd.Series, lines: np.ndarray) -> np.ndarray:
        """Float values of a text column; nan (with a problem) where a cell is not one."""
        s = text.str.replace(",", ".", regex=False) if self.sep == ";" else text
        v = pd.to_numeric(s, errors="coerce").to_numpy(dtype=np.float64, na_value=np.nan, copy=True)
        bad = np.flatnonzero(~np.isfinite(v))
        if bad.size:
            raw = text.to_numpy(dtype=object)[bad]
            label = self.labels[lg]

            def message(k: int) -> str:
                if raw[k] == "":
                    return f"`{label}` is blank: every row needs a number"
                if np.isinf(v[bad[k]]) or raw[k].lower().lstrip("+-") in ("nan", "inf", "infinity"):
                    return f"`{label}` must be a finite number"
                return f"`{label}` must be a number"

            _add_rows(self.probs, lines[bad], label, raw, message)
            v[bad] = np.nan
        return v

    def _timestamps(self, text: pd.Series, lines: np.ndarray) -> np.ndarray:
        """int64 ns since the epoch (UTC); the int64 minimum (with a problem) where invalid."""
        text = text.fillna("").astype(str).str.strip()
        shaped = text.str.match(_TS_RE).to_numpy(dtype=bool)
        parsed = pd.to_datetime(
            text.where(shaped, None), utc=True, format="ISO8601", errors="coerce"
        )
        ns = parsed.to_numpy(dtype="datetime64[ns]").astype(np.int64)
        bad = np.flatnonzero(~shaped | parsed.isna().to_numpy())
        if bad.size:
            raw = text.to_numpy(dtype=object)[bad]

            def message(k: int) -> str:
                if raw[k] == "":
                    return f"`timestamp` is blank: {_TS_HELP}"
                if _TS_NO_OFFSET_RE.match(raw[k]):
                    return "the timestamp has no UTC offset: add `Z` or an offset such as `+02:00`"
                return f"not a valid ISO 8601 timestamp: {_TS_HELP}"

            _add_rows(self.probs, lines[bad], self.labels["timestamp"], raw, message)
            ns[bad] = np.iinfo(np.int64).min
        return ns

    def _in_range(self, lg: str, raw: np.ndarray, lines: np.ndarray) -> np.ndarray:
        """Canonical values [bar or rpm]; problems for values outside the valid range."""
        kind, unit = UNIT_COLUMNS[lg], self.cols[lg][1]
        v = U.convert(raw, kind, unit)
        out = np.flatnonzero(U.out_of_range(v, kind))
        if out.size:
            lo, hi = U.RANGES[kind]
            canon = U.CANONICAL[kind]

            def message(k: int) -> str:
                got = f"{fmt(raw[out[k]])} {unit}"
                if unit != canon:
                    got += f" is {v[out[k]]:.1f} {canon},"
                return (
                    f"{got} outside the valid range {fmt(lo)}-{fmt(hi)} {canon}: check the "
                    "value and the unit"
                )

            _add_rows(self.probs, lines[out], self.labels[lg], raw[out], message)
        return v

    def _increasing(self, t: np.ndarray, text: pd.Series, lines: np.ndarray) -> None:
        """Problems for rows whose time is not later than the previous valid row's."""
        stamps = self.time_col == "timestamp"
        ok = np.flatnonzero(t != np.iinfo(np.int64).min if stamps else np.isfinite(t))
        if ok.size == 0:
            return
        v, ln = t[ok], lines[ok]
        prev = np.r_[self.last[0] if self.last else v[0], v[:-1]]
        prev_ln = np.r_[self.last[1] if self.last else 0, ln[:-1]]
        bad = np.flatnonzero(v <= prev)
        bad = bad[bad > 0] if self.last is None else bad
        self.last = (v[-1], int(ln[-1]))
        if bad.size == 0:
            return
        room = bad[:MAX_PROBLEMS]
        as_written = [str(text.iloc[ok[r]]).strip() if stamps else fmt(v[r]) for r in room]
        unit = "" if stamps else " s"

        def message(k: int) -> str:
            r = bad[k]
            if v[r] == prev[r]:
                return (
                    f"the time repeats line {prev_ln[r]}: each row's time must be later than "
                    "the row before"
                )
            was = f"{text.iloc[ok[r - 1]]}" if stamps and r > 0 else fmt(prev[r]) + unit
            if stamps and r == 0:
                was = f"line {prev_ln[r]}"
            return (
                f"time runs backwards: earlier than {shown(str(was))} on line {prev_ln[r]}; "
                "each row's time must be later than the row before"
            )

        shown_v = np.array(as_written + [""] * (bad.size - room.size), dtype=object)
        _add_rows(self.probs, ln[bad], self.labels[self.time_col], shown_v, message)

    def _accumulate(self, values: dict[str, np.ndarray]) -> None:
        t = values[self.time_col]
        if self.first is None:
            self.first = t[0]
        rel = (t - self.first).astype(np.float64)
        if self.time_col == "timestamp":
            rel /= 1e9
        self.last_s = float(rel[-1])
        self.acc.add(rel, values["pressure_a"], values["pressure_b"], values.get("speed"))

    def result(self) -> TraceResult:
        """The results, or the problems if there are any."""
        if self.samples < 2 and not self.unreadable:
            self.probs.add(
                None,
                None,
                None,
                f"the trace has {self.samples} sample(s): at least "
                "2 are needed, one row per sample of both loop pressures",
            )
        if self.probs:
            return TraceResult(self.name, tuple(self.probs.result()), self.s)
        started = ended = None
        if self.time_col == "timestamp":
            started, ended = utc_datetimes(np.array([self.first, self.last[0]], dtype=np.int64))
        units = {lg: u for lg, (_, u) in self.cols.items() if u is not None}
        return TraceResult(
            self.name,
            (),
            self.s,
            samples=self.samples,
            duration_s=self.last_s,
            started_at=started,
            ended_at=ended,
            source_units=units,
            **self.acc.finish(),
        )
