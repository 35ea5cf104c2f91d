"""Read a large telemetry CSV in parts, so that memory stays bounded whatever its size.

:func:`monitor.ingest.parse.parse_file` holds a whole file and its parsed columns at
once (about 0.2 GB + 4.3 times the file size). A file above
:data:`~monitor.ingest.limits.STREAM_THRESHOLD_BYTES` is instead read from a seekable
binary stream in blocks of whole lines (:data:`~monitor.ingest.limits.STREAM_BLOCK_BYTES`),
each parsed and checked by the same code as a whole file, in three passes:

1. :func:`check_stream`, first pass: the content hash, the text checks (UTF-8, no NUL),
   the header, and an index of where each *group* ends, a group being the rows of one
   unit and period (``unit``, ``period_start``, ``period_end`` as written). A group holds
   every histogram of one upload (both loops, both quantities), so a group is never
   split between two parts: the uploads, and the histogram chosen for the ledger, are
   the same as when the file is read whole.
2. :func:`check_stream`, second pass: every part is checked; rows of a group that goes on
   in a later block are held back (at most :data:`~monitor.ingest.limits.MAX_OPEN_ROWS`)
   and checked with the rest of it. The checks that span the whole file are made on
   small arrays kept per histogram or reading: histograms of one unit, position and
   quantity sharing time, and a component measured twice at one moment.
3. :func:`stream_parts`, only for a file without problems: the parts again, as
   :class:`~monitor.domain.parsed.ParsedFile` records to store one after the other in
   one transaction. It raises :class:`StreamChanged` if the file changed since it was
   checked.

Rows of one group may be anywhere in a file read whole; in a file read in parts they
must lie within :data:`~monitor.ingest.limits.MAX_OPEN_ROWS` rows of each other. Files
are described for users in ``docs/formats.md``.
"""

from __future__ import annotations

import hashlib
import io
import logging
import warnings
from collections.abc import Iterator
from dataclasses import dataclass, field
from typing import BinaryIO

import numpy as np
import pandas as pd

from monitor.domain.batch import HistogramBatch
from monitor.domain.parsed import ParsedFile
from monitor.domain.records import Problem, Reading
from monitor.ingest.common import ProblemList, Table, group_ids
from monitor.ingest.csv_tables import (
    HISTOGRAM,
    Layout,
    csv_layout,
    csv_rows_table,
    factorize_text,
    read_csv_rows,
)
from monitor.ingest.histograms import histograms
from monitor.ingest.json_text import too_large
from monitor.ingest.limits import (
    MAX_JSON_BYTES,
    MAX_OPEN_ROWS,
    MAX_STREAM_BYTES,
    MAX_STREAM_COMPONENTS,
    MAX_STREAM_LINE_BYTES,
    STREAM_BLOCK_BYTES,
    shorten,
)
from monitor.ingest.parse import UNEXPECTED, is_text, line_ends
from monitor.ingest.readings import readings

GROUP = ("unit", "period_start", "period_end")
"""Columns whose values (as written) make the group of a row: one unit and period."""

log = logging.getLogger(__name__)


class StreamChanged(Exception):
    """The file read in parts is not the one checked: it changed in between."""


@dataclass
class _Scan:
    """What the first pass learnt: the header and where each group ends."""

    layout: Layout
    header_line: bytes
    block_bytes: int
    keys: np.ndarray = field(default_factory=lambda: np.zeros(0, np.uint64))  # sorted
    last: np.ndarray = field(default_factory=lambda: np.zeros(0, np.int64))  # line

    def last_line(self, keys: np.ndarray) -> np.ndarray:
        """The last line of each group ``keys`` (a large number for an unknown group)."""
        at = np.minimum(np.searchsorted(self.keys, keys), max(len(self.keys) - 1, 0))
        known = self.keys[at] == keys if len(self.keys) else np.zeros(len(keys), bool)
        return np.where(known, self.last[at] if len(self.keys) else 0, np.iinfo(np.int64).max)


@dataclass
class StreamCheck:
    """The result of checking a file read in parts (:func:`check_stream`).

    ``content_sha256`` is the hash of the raw bytes (as for a file read whole);
    ``problems`` every problem found (the file is then refused whole); ``units`` the unit
    tags the file writes to; ``n_histograms`` and ``n_readings`` its records.
    """

    name: str
    content_sha256: str
    problems: list[Problem]
    units: set[str] = field(default_factory=set)
    n_histograms: int = 0
    n_readings: int = 0
    scan: _Scan | None = None


def check_stream(stream: BinaryIO, name: str, block_bytes: int = STREAM_BLOCK_BYTES) -> StreamCheck:
    """Check a telemetry CSV read from a seekable binary stream in parts.

    Parameters
    ----------
    stream : seekable binary file-like
        The file, e.g. ``open(path, "rb")``; read from its start (twice).
    name : str
        File name shown in problems.
    block_bytes : int, default STREAM_BLOCK_BYTES
        Size of one part [bytes] (whole lines; a part grows to the end of a quoted value).

    Returns
    -------
    StreamCheck
        The hash, the problems (first 200 listed, as for a file read whole) and what the
        file holds. No exception escapes for any content: an unexpected error becomes a
        problem of the file (and is logged with its traceback).
    """
    if block_bytes < 1:
        raise ValueError(f"block_bytes must be at least 1, got {block_bytes}")
    probs = ProblemList(name)
    out = StreamCheck(name, "", [])
    try:
        scan = _first_pass(stream, name, block_bytes, probs, out)
        if scan is not None and not probs:
            _second_pass(stream, scan, probs, out)
            out.scan = scan
    except Exception:  # noqa: BLE001 - the file is refused, the developer gets the trace
        log.exception("unexpected error while reading %s in parts", name)
        probs.add(None, None, None, UNEXPECTED)
    out.problems = probs.result()
    if out.problems:
        out.scan = None
    return out


def stream_parts(stream: BinaryIO, check: StreamCheck) -> Iterator[ParsedFile]:
    """The records of a checked file without problems, part by part (the third pass).

    Each :class:`~monitor.domain.parsed.ParsedFile` holds whole groups (all histograms of
    an upload) or a block of readings, with the file's name and hash. Raises
    :class:`StreamChanged` if the file no longer reads as it was checked (its hash is
    compared after the last part).
    """
    if check.scan is None:
        raise ValueError("stream_parts needs a StreamCheck without problems")
    probs, digest = ProblemList(check.name), hashlib.sha256()
    tables = _tables(stream, check.scan, probs, digest)
    if check.scan.layout.kind == HISTOGRAM:
        for batch in _histogram_parts(tables, check.scan, probs):
            _unchanged(probs)
            yield ParsedFile(check.name, check.content_sha256, batch=batch)
    else:
        for recs in _reading_parts(tables, probs):
            _unchanged(probs)
            yield ParsedFile(check.name, check.content_sha256, readings=recs)
    _unchanged(probs)
    if digest.hexdigest() != check.content_sha256:
        raise StreamChanged("the file's content hash changed since it was checked")


def _unchanged(probs: ProblemList) -> None:
    if probs:
        raise StreamChanged(f"the file changed since it was checked: {probs.items[:1]}")


# --- blocks of whole lines -------------------------------------------------------------


@dataclass
class _Block:
    first_line: int  # line number of the block's first line in the file
    data: bytes  # whole lines, line ends read as in a file read whole

    @property
    def next_line(self) -> int:
        """The line number of the first line after the block."""
        return self.first_line + self.data.count(b"\n")

    @property
    def last_line(self) -> int:
        """The line number of the block's last line."""
        return self.next_line - (1 if self.data.endswith(b"\n") else 0)


def _blocks(
    stream: BinaryIO, block_bytes: int, probs: ProblemList, digest: object | None = None
) -> Iterator[_Block]:
    """The file in blocks of about ``block_bytes`` bytes of whole lines.

    A block ends at a line end outside quotes (an even number of ``"`` before it), so a
    quoted value spanning lines stays in one block; a line or quoted value longer than
    :data:`~monitor.ingest.limits.MAX_STREAM_LINE_BYTES` is a problem. ``digest`` (a
    hashlib object) is fed every byte read.
    """
    stream.seek(0)
    buf, line, eof, want = bytearray(), 1, False, block_bytes
    while True:
        while not eof and len(buf) < want:
            piece = stream.read(want - len(buf))
            eof = not piece
            if digest is not None:
                digest.update(piece)
            buf += piece
        if not buf:
            return
        cut = len(buf) if eof else _cut(buf)
        if not eof and (cut == 0 or buf.count(b'"', 0, cut) % 2):
            if len(buf) >= block_bytes + MAX_STREAM_LINE_BYTES:
                probs.add(line, None, None, _LONG_LINE.format(line=line))
                return
            want = len(buf) + block_bytes
            continue
        block = _Block(line, line_ends(bytes(buf[:cut])))
        del buf[:cut]
        want = block_bytes
        yield block
        line = block.next_line


_LONG_LINE = (
    f"a line (or a quoted value) longer than {MAX_STREAM_LINE_BYTES // 2**20} MiB starts at "
    "or after line {line}: a file this large is read in parts of whole lines; check for a "
    'quote `"` that is never closed, or split the file'
)


def _cut(buf: bytearray) -> int:
    """Bytes up to and including the last line end of ``buf`` (0 if none). A carriage
    return as the very last byte waits for the next read: it may start a CRLF pair."""
    return max(buf.rfind(b"\n"), buf.rfind(b"\r", 0, len(buf) - 1)) + 1


def _block_data(block: _Block, header_line: bytes) -> tuple[bytes, int]:
    """The bytes to parse (a later block preceded by the header line) and the offset of
    its line numbers."""
    if block.first_line == 1:
        return block.data, 0
    return header_line + b"\n" + block.data, block.first_line - 2


# --- first pass: hash, text, header, where each group ends ------------------------------


def _first_pass(
    stream: BinaryIO, name: str, block_bytes: int, probs: ProblemList, out: StreamCheck
) -> _Scan | None:
    size = stream.seek(0, io.SEEK_END)
    if size > MAX_STREAM_BYTES:
        probs.add(None, None, None, _TOO_LARGE.format(mib=size / 2**20))
        return None
    digest, scan, parts = hashlib.sha256(), None, []
    for block in _blocks(stream, block_bytes, probs, digest):
        if not is_text(block.data, probs, block.first_line):
            return None
        if scan is None:
            scan = _header(block, block_bytes, size, probs)
            if scan is None:
                return None
        if scan.layout.kind == HISTOGRAM:
            data, offset = _block_data(block, scan.header_line)
            part = _index_block(data, scan.layout, offset)
            if part is None:  # the rows cannot be read: the reader says why
                if read_csv_rows(data, scan.layout, probs, offset) is not None:
                    probs.add(block.first_line, None, None, "cannot read the CSV")
                return None
            parts.append(part)
    if scan is None and not probs:
        probs.add(None, None, None, _EMPTY)
    if scan is None or probs:
        return None
    out.content_sha256 = digest.hexdigest()
    if parts:
        keys = np.concatenate([k for k, _ in parts])
        last = pd.Series(np.concatenate([v for _, v in parts])).groupby(keys).max()
        scan.keys, scan.last = last.index.to_numpy(np.uint64), last.to_numpy(np.int64)
    return scan


_EMPTY = "file is empty: expected a histogram CSV or a readings CSV"
_TOO_LARGE = (
    f"the file is {{mib:.0f}} MiB, larger than the {MAX_STREAM_BYTES // 2**20} MiB limit for "
    "one CSV: split it into smaller files (for example one per month)"
)


def _header(block: _Block, block_bytes: int, size: int, probs: ProblemList) -> _Scan | None:
    """The layout of the file from its first block (a JSON file this large is refused)."""
    head = block.data[:65536].decode("utf-8", errors="ignore").lstrip("\ufeff \t\r\n")
    if head.startswith(("{", "[")):
        if size > MAX_JSON_BYTES:
            probs.add(None, None, None, too_large(size))
        else:
            probs.add(None, None, None, _JSON_WHOLE)
        return None
    layout = csv_layout(head, probs)
    if layout is None:
        return None
    return _Scan(layout, block.data.split(b"\n", 1)[0], block_bytes)


_JSON_WHOLE = (
    "a JSON file is not read in parts: it is read whole (up to the JSON size limit) by the "
    "ordinary upload"
)


def _index_block(data: bytes, layout: Layout, offset: int) -> tuple | None:
    """The groups of a block and the last line of each, or None if its rows cannot be
    read (only the group columns are read)."""
    names = [f"c{i}" for i in range(len(layout.header))]
    use = [names[layout.cols[k][0]] for k in GROUP]
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("error", pd.errors.ParserWarning)
            frame = pd.read_csv(
                io.BytesIO(data),
                sep=layout.sep,
                header=0,
                names=names,
                usecols=use,
                dtype=object,
                index_col=False,
                keep_default_na=False,
                na_values=[""],
                skip_blank_lines=False,
                engine="c",
            )
    except (ValueError, pd.errors.ParserWarning):  # ParserError is a ValueError
        return None
    keys = _group_keys([factorize_text(frame[c]) for c in use])
    lines = np.arange(len(frame), dtype=np.int64) + 2 + offset
    last = pd.Series(lines).groupby(keys).max()
    return last.index.to_numpy(np.uint64), last.to_numpy(np.int64)


def _group_keys(columns: list[tuple[np.ndarray, np.ndarray]]) -> np.ndarray:
    """A 64-bit hash per row of the group columns (factorized ``(codes, uniques)``,
    blanks around values removed). Equal values give equal hashes in every block; two
    groups sharing a hash (chance about 1e-8 for a million groups) are only held back
    until both end."""
    gid = group_ids([c for c, _ in columns])
    first = np.unique(gid, return_index=True)[1]
    frame = pd.DataFrame(
        {str(k): np.asarray(u, dtype=object)[c[first]] for k, (c, u) in enumerate(columns)}
    )
    return pd.util.hash_pandas_object(frame, index=False).to_numpy(np.uint64)[gid]


# --- second and third pass: the parts ---------------------------------------------------


def _tables(
    stream: BinaryIO, scan: _Scan, probs: ProblemList, digest: object | None = None
) -> Iterator[tuple[Table, int]]:
    """The column table of each block and the last line of the block; stops at a block
    that cannot be read or once the problem list is full."""
    for block in _blocks(stream, scan.block_bytes, probs, digest):
        data, offset = _block_data(block, scan.header_line)
        t = read_csv_rows(data, scan.layout, probs, offset)
        if t is None:
            return
        yield t, block.last_line
        if probs.full:
            probs.stopped = True
            return


def _histogram_parts(
    tables: Iterator[tuple[Table, int]], scan: _Scan, probs: ProblemList
) -> Iterator[HistogramBatch]:
    """Validated histograms of whole groups, part by part; rows of a group that goes on
    in a later block are held back for it."""
    carry, seen = None, False
    for t, end_line in tables:
        seen = seen or t.n > 0
        t = t if carry is None else _concat(carry, t)
        done = scan.last_line(_group_keys([t.text[k] for k in GROUP])) <= end_line
        ready, carry = (t, None) if done.all() else (_take(t, done), _take(t, ~done))
        if carry is not None and carry.n > MAX_OPEN_ROWS:
            _spread(carry, probs)
            return
        if ready.n:
            batch = histograms(ready, probs, period_overlaps=False)
            if batch is not None:
                yield batch
    if carry is not None and carry.n:  # a group the first pass did not see end
        batch = histograms(carry, probs, period_overlaps=False)
        if batch is not None:
            yield batch
    if not seen and not probs:
        probs.add(None, None, None, "the file has a header but no rows of data")


def _spread(carry: Table, probs: ProblemList) -> None:
    r = int(np.argmin(carry.line0))
    unit, start = carry.value(r, "unit"), carry.value(r, "period_start")
    probs.add(
        int(carry.line0[r]),
        carry.labels.get("unit", "unit"),
        unit,
        f"the rows of unit `{shorten(unit or '')}` for the period starting "
        f"`{shorten(start or '')}` are spread over more than {MAX_OPEN_ROWS:,} rows of the "
        "file: a file this large is read in parts, and the rows of one unit and period "
        "must lie within that many rows of each other; sort the file by unit and period, "
        "or split it",
    )
    probs.stopped = True


def _reading_parts(tables: Iterator[tuple[Table, int]], probs: ProblemList) -> Iterator[list]:
    """Validated readings, block by block."""
    seen = False
    for t, _ in tables:
        seen = seen or t.n > 0
        if t.n:
            recs = readings(t, probs, repeats=False)
            if recs:
                yield recs
    if not seen and not probs:
        probs.add(None, None, None, "the file has a header but no rows of data")


def _take(t: Table, rows: np.ndarray) -> Table:
    """The rows of mask ``rows`` of a CSV table, as a table of their own."""
    text = {}
    for k, (codes, uniq) in t.text.items():
        c, used = pd.factorize(codes[rows])
        text[k] = (c.astype(np.int64), np.asarray(uniq, dtype=object)[used])
    part = csv_rows_table(
        text,
        {k: v[rows] for k, v in t.num.items()},
        {k: v[rows] for k, v in t.raw.items()},
        dict(t.unit),
        t.line0[rows],
        t.labels,
    )
    part.refused = {k: v[rows] for k, v in t.refused.items()}
    return part


def _concat(a: Table, b: Table) -> Table:
    """The rows of two CSV tables of one file (same columns), ``a``'s first."""
    text = {}
    for k, (ca, ua) in a.text.items():
        cb, ub = b.text[k]
        codes = np.r_[ca, cb + len(ua)]
        remap, uniq = pd.factorize(np.r_[np.asarray(ua, object), np.asarray(ub, object)])
        text[k] = (remap[codes].astype(np.int64), np.asarray(uniq, dtype=object))
    both = csv_rows_table(
        text,
        {k: np.r_[v, b.num[k]] for k, v in a.num.items()},
        {k: np.r_[v, b.raw[k]] for k, v in a.raw.items()},
        dict(a.unit),
        np.r_[a.line0, b.line0],
        a.labels,
    )
    for k in set(a.refused) | set(b.refused):
        both.refused[k] = np.r_[
            a.refused.get(k, np.zeros(a.n, bool)), b.refused.get(k, np.zeros(b.n, bool))
        ]
    return both


# --- second pass: the checks over the whole file ---------------------------------------


def _second_pass(stream: BinaryIO, scan: _Scan, probs: ProblemList, out: StreamCheck) -> None:
    whole = _WholeFile(scan.layout, probs)
    tables = _tables(stream, scan, probs)
    if scan.layout.kind == HISTOGRAM:
        for batch in _histogram_parts(tables, scan, probs):
            if not whole.add_histograms(batch):
                break
        whole.check_periods()
        out.n_histograms = whole.n
    else:
        for recs in _reading_parts(tables, probs):
            if not whole.add_readings(recs):
                break
        whole.check_repeats()
        out.n_readings = whole.n
    out.units = whole.units()


class _WholeFile:
    """Per histogram (or reading) of the file, what the checks spanning the whole file
    need: a code of its unit, position (and quantity), its period (or time) and line."""

    def __init__(self, layout: Layout, probs: ProblemList) -> None:
        self.labels = {lg: layout.header[i] for lg, (i, _) in layout.cols.items()}
        self.probs = probs
        self.codes: dict[tuple, int] = {}
        self.parts: list[tuple[np.ndarray, ...]] = []
        self.n = 0

    def _code(self, keys: list[tuple]) -> np.ndarray | None:
        for k in keys:
            self.codes.setdefault(k, len(self.codes))
        if len(self.codes) > MAX_STREAM_COMPONENTS:
            self.probs.add(None, None, None, _MANY.format(n=MAX_STREAM_COMPONENTS))
            self.probs.stopped = True
            return None
        return np.array([self.codes[k] for k in keys], dtype=np.int64)

    def add_histograms(self, b: HistogramBatch) -> bool:
        """Note a part's histograms; False once there are too many components."""
        keys = zip(b.unit.tolist(), b.position.tolist(), b.quantity.tolist(), strict=True)
        code = self._code(list(keys))
        if code is None:
            return False
        self.parts.append((code, b.period_start_ns, b.period_end_ns, b.line))
        self.n += len(b)
        return True

    def add_readings(self, recs: list[Reading]) -> bool:
        """Note a part's readings; False once there are too many components."""
        code = self._code([(r.unit, r.position) for r in recs])
        if code is None:
            return False
        us = pd.DatetimeIndex([r.taken_at for r in recs]).as_unit("us").asi8
        self.parts.append((code, us, np.array([r.line for r in recs], dtype=np.int64)))
        self.n += len(recs)
        return True

    def units(self) -> set[str]:
        return {str(k[0]) for k in self.codes}

    def _columns(self) -> list[np.ndarray]:
        return [np.concatenate(c) for c in zip(*self.parts, strict=True)]

    def check_periods(self) -> None:
        """Histograms of one unit, position and quantity must not share time."""
        if not self.parts:
            return
        code, start, end, line = self._columns()
        o = np.lexsort((start, code))
        bad = np.flatnonzero((code[o][1:] == code[o][:-1]) & (start[o][1:] < end[o][:-1]))
        rows, prev = o[1:][bad], o[:-1][bad]
        for k in np.argsort(line[rows], kind="stable").tolist():
            r, p = int(rows[k]), int(prev[k])
            self.probs.add(
                int(line[r]),
                self.labels.get("period_start", "period_start"),
                pd.Timestamp(int(start[r]), tz="UTC").isoformat(),
                f"period overlaps the histogram at line {int(line[p])} of the same unit, "
                "position and quantity: each hour may be counted only once",
            )

    def check_repeats(self) -> None:
        """A component is measured once at a given moment."""
        if not self.parts:
            return
        code, us, line = self._columns()
        o = np.lexsort((line, us, code))
        again = np.r_[False, (code[o][1:] == code[o][:-1]) & (us[o][1:] == us[o][:-1])]
        first = np.maximum.accumulate(np.where(~again, np.arange(len(o)), 0))
        rows, other = o[again], o[first[again]]
        for k in np.argsort(line[rows], kind="stable").tolist():
            r = int(rows[k])
            self.probs.add(
                int(line[r]),
                self.labels.get("taken_at", "taken_at"),
                pd.Timestamp(int(us[r]), unit="us", tz="UTC").isoformat(),
                f"the same unit, position and time as the reading at line "
                f"{int(line[other[k]])}: give each reading once (a component is measured "
                "once at a given moment)",
            )


_MANY = (
    "the file names more than {n:,} distinct units and positions: no fleet has that many; "
    "check the unit and position columns, or split the file"
)
