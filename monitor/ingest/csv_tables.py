"""Read a telemetry CSV (histogram or readings) into a column table.

One ``pandas.read_csv`` with the C engine and explicit float64 dtypes for the numeric
columns; text columns are factorized once, so every later check works on small arrays
of distinct values and integer codes. The header decides what the file holds and maps
each column to its logical name and unit. Formats: ``docs/formats.md``.
"""

from __future__ import annotations

import csv
import io
import re
import warnings
from dataclasses import dataclass

import numpy as np
import pandas as pd

from monitor.ingest import units as U
from monitor.ingest.common import (
    HIST_NUMBERS,
    HIST_REQUIRED,
    HIST_TEXT,
    HIST_UNIT_COLUMNS,
    MAX_PROBLEMS,
    READ_NUMBERS,
    READ_REQUIRED,
    READ_TEXT,
    READ_UNIT_COLUMNS,
    ROW,
    ProblemList,
    Table,
)
from monitor.ingest.limits import shorten

HISTOGRAM = "histogram"
READINGS = "readings"

Columns = dict[str, tuple[int, str | None]]
"""Logical column -> (position in the header, unit spelling or None)."""


@dataclass(frozen=True)
class Layout:
    """What the header line of a CSV says: the kind of file, the separator, the header
    cells, each logical column's position and unit, and the text columns."""

    kind: str
    sep: str
    header: list[str]
    cols: Columns
    text_cols: tuple[str, ...]


def read_csv_table(data: bytes, head: str, probs: ProblemList) -> tuple[str, Table] | None:
    """The kind of CSV (:data:`HISTOGRAM` or :data:`READINGS`) and its column table.

    Returns None (with the reasons in ``probs``) if the header or the rows cannot be read.
    """
    layout = csv_layout(head, probs)
    if layout is None:
        return None
    t = read_csv_rows(data, layout, probs)
    return None if t is None else (layout.kind, t)


def csv_layout(head: str, probs: ProblemList) -> Layout | None:
    """The :class:`Layout` of a CSV from the start of its text ``head``, or None (with
    the reasons in ``probs``) if the header line cannot be used."""
    first = head.split("\n", 1)[0].rstrip("\r")
    sep = ";" if first.count(";") > first.count(",") else ","
    try:
        header = [h.strip() for h in next(csv.reader([first], delimiter=sep))]
    except csv.Error as e:
        probs.add(1, None, None, f"cannot read the header line: {e}")
        return None
    spec = _spec(header, first, probs)
    if spec is None:
        return None
    cols = _resolve_header(header, spec, probs)
    if probs:
        return None
    return Layout(spec[4], sep, header, cols, spec[0])


def read_csv_rows(
    data: bytes, layout: Layout, probs: ProblemList, line_offset: int = 0
) -> Table | None:
    """The column table of the rows of ``data`` (its first line, the header, is skipped),
    or None (with the reason in ``probs``) if the rows cannot be read.

    ``line_offset`` is added to every line number (in the table and in messages): a part
    of a large file, preceded by the header line, starts at line ``2 + line_offset``.
    """
    lay = layout
    frame = _read_frame(data, lay.sep, lay.header, lay.cols, lay.text_cols, probs, line_offset)
    if frame is None:
        return None
    return _csv_table(data, frame, lay, probs, line_offset)


def _spec(header: list[str], first: str, probs: ProblemList) -> tuple | None:
    """Column spec of the file kind named by the header, or None with a problem."""
    keys = [h.lower() for h in header]
    if "taken_at" in keys:
        return (READ_TEXT, READ_NUMBERS, READ_UNIT_COLUMNS, READ_REQUIRED, READINGS)
    if "period_start" in keys or any(k.startswith("pressure_") for k in keys):
        return (HIST_TEXT, HIST_NUMBERS, HIST_UNIT_COLUMNS, HIST_REQUIRED, HISTOGRAM)
    probs.add(
        1,
        None,
        first,
        "cannot tell what this file holds: a histogram CSV needs the columns "
        f"{', '.join(HIST_REQUIRED)} (pressure columns with a unit suffix such as "
        "`pressure_low_bar`); a readings CSV needs "
        f"{', '.join(READ_REQUIRED)}; JSON must start with `{{` or `[`",
    )
    return None


def _resolve_header(header: list[str], spec: tuple, probs: ProblemList) -> Columns:
    """Map logical column -> (position in header, unit spelling or None)."""
    text, numbers, unit_cols, required, kind = spec
    plain = (*text, *numbers)
    cols: Columns = {}
    for i, h in enumerate(header):
        resolved = _resolve_column(h, plain, unit_cols, kind, probs)
        if resolved is None:
            continue
        logical, unit = resolved
        if logical in cols:
            probs.add(
                1, h, None, f"column `{h}` repeats `{header[cols[logical][0]]}`: keep only one"
            )
            continue
        cols[logical] = (i, unit)
    _check_required(cols, required, unit_cols, kind, probs)
    return cols


def _resolve_column(
    h: str, plain: tuple[str, ...], unit_cols: dict, kind: str, probs: ProblemList
) -> tuple[str, str | None] | None:
    """(logical name, unit) of one header cell, or None with a problem."""
    key = h.lower()
    if key in plain:
        return key, None
    prefix = next((p for p in unit_cols if key == p or key.startswith(p + "_")), None)
    if prefix is None:
        known = [*plain] + [f"{p}_<{'|'.join(U.SHORT_SPELLINGS[k])}>" for p, k in unit_cols.items()]
        msg = f"unknown column `{shorten(h)}` in a {kind} CSV: known columns are {', '.join(known)}"
        probs.add(1, shorten(h), None, msg)
        return None
    names = " or ".join(f"`{prefix}_{s}`" for s in U.SHORT_SPELLINGS[unit_cols[prefix]])
    if key == prefix:
        probs.add(1, h, None, f"column `{h}` has no unit: name it {names}")
        return None
    suffix = h[len(prefix) + 1 :]
    try:
        return prefix, U.normalise_unit(unit_cols[prefix], suffix)
    except ValueError:
        probs.add(
            1,
            shorten(h),
            None,
            f"column `{shorten(h)}` has unknown unit `{shorten(suffix)}`: name it {names}",
        )
        return None


def _check_required(
    cols: Columns, required: tuple[str, ...], unit_cols: dict, kind: str, probs: ProblemList
) -> None:
    """One problem per required column that is absent and not already reported."""
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


def _read_frame(
    data: bytes,
    sep: str,
    header: list[str],
    cols: Columns,
    text_cols: tuple[str, ...],
    probs: ProblemList,
    line_offset: int = 0,
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
        engine="c",  # the C tokenizer skips a UTF-8 byte-order mark itself
    )
    floats = {c: k for c, k in kinds.items() if k is not object}
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("error", pd.errors.ParserWarning)
            return _read_typed(data, kinds, floats, kw)
    except pd.errors.ParserWarning:  # the first data row is longer than the header
        probs.add(
            2 + line_offset,
            None,
            None,
            f"line {2 + line_offset} has more fields than the header has columns "
            f"({len(header)}): every row needs one value per column, separated by `{sep}`",
        )
        return None
    except pd.errors.ParserError as e:
        _ragged(e, data, sep, header, probs, line_offset)
        return None


def _ragged(
    e: pd.errors.ParserError,
    data: bytes,
    sep: str,
    header: list[str],
    probs: ProblemList,
    line_offset: int = 0,
) -> None:
    """The problem for a row with the wrong number of fields, an unbalanced quote, or any
    other read error, with its line (and column where it can be told)."""
    m = re.search(r"Expected (\d+) fields in line (\d+), saw (\d+)", str(e))
    if m:
        line = int(m.group(2)) + line_offset
        probs.add(
            line,
            None,
            None,
            f"line {line} has {m.group(3)} fields but the header has {m.group(1)}: "
            f"every row needs one value per column, separated by `{sep}`",
        )
        return
    m = re.search(r"EOF inside string starting at row (\d+)", str(e))
    if m:
        column = _quote_column(data, int(m.group(1)) + 1, sep, header)
        line = int(m.group(1)) + 1 + line_offset
        probs.add(
            line,
            column,
            None,
            f"line {line}{f', column `{column}`' if column else ''}: a value opens a quote "
            '`"` that is never closed: close the quote or remove it (a quote inside a '
            'quoted value is written twice: `""`)',
        )
        return
    probs.add(None, None, None, f"cannot read the CSV: {shorten(str(e), 200)}")


def _quote_column(data: bytes, line: int, sep: str, header: list[str]) -> str | None:
    """Header name of the field where the first quote of ``line`` (1-based) opens."""
    start = 0
    for _ in range(line - 1):
        start = data.find(b"\n", start) + 1
        if start == 0:
            return None
    end = data.find(b"\n", start)
    text = data[start : end if end >= 0 else len(data)].decode("utf-8", errors="replace")
    q = text.find('"')
    if q < 0:
        return None
    k = text.count(sep, 0, q)
    return header[k] if k < len(header) else None


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
        vals = col.to_numpy()
        return vals, np.isinf(vals)  # `inf` text, or a number beyond the float range
    s = col.str.strip()
    if sep == ";":
        s = s.str.replace(",", ".", regex=False)
    vals = pd.to_numeric(s, errors="coerce").to_numpy(dtype=np.float64, na_value=np.nan)
    given = (s.notna() & (s != "")).to_numpy(dtype=bool)
    return vals, ~np.isfinite(vals) & given


def factorize_text(values: pd.Series) -> tuple[np.ndarray, np.ndarray]:
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
    data: bytes, frame: pd.DataFrame, lay: Layout, probs: ProblemList, line_offset: int
) -> Table:
    """Column arrays of a CSV frame in canonical units; blank lines dropped."""
    header, cols, sep = lay.header, lay.cols, lay.sep
    text, num, raw, unit, notnum = _columns(frame, cols, lay.text_cols, sep)
    blank = _blank_rows(len(frame), text, raw, notnum)
    keep = np.flatnonzero(~blank) if blank.any() else None
    if keep is not None:
        text = {k: (c[keep], q) for k, (c, q) in text.items()}
        num = {k: v[keep] for k, v in num.items()}
        raw = {k: v[keep] for k, v in raw.items()}
        notnum = {k: v[keep] for k, v in notnum.items()}
    lines = (keep if keep is not None else np.arange(len(frame))) + 2 + line_offset
    names = {lg: header[i] for lg, (i, _) in cols.items()}
    t = csv_rows_table(text, num, raw, unit, lines, names)
    for lg, bad in notnum.items():
        if bad.any():
            cells = frame[f"c{cols[lg][0]}"].to_numpy(dtype=object)
            cells = cells[keep] if keep is not None else cells
            _add_cells(probs, t, lg, np.flatnonzero(bad), cells, NOT_A_NUMBER.format(names[lg]))
            t.refuse(lg, bad)
    _check_short_rows(data, sep, len(header), frame, keep, t, probs, line_offset)
    return t


def csv_rows_table(
    text: dict, num: dict, raw: dict, unit: dict, lines: np.ndarray, labels: dict[str, str]
) -> Table:
    """A :class:`Table` of CSV rows: each value located by its row's source line
    ``lines`` and its column's name in the header ``labels``."""
    t = Table(len(lines), text, num, raw, unit, lambda r, f: (int(lines[r]), labels.get(f, f)))
    t.line0 = lines
    t.labels = labels
    return t


NOT_A_NUMBER = "`{}` must be a number (not text, `nan` or `inf`, and within ±1.8e308)"


def _add_cells(
    probs: ProblemList, t: Table, f: str, rows: np.ndarray, cells: np.ndarray, message: str
) -> None:
    """One problem per row in ``rows``, showing the cell text of column ``f``."""
    room = max(0, MAX_PROBLEMS - len(probs.items))
    for r in rows[:room].tolist():
        line, column = t.locate(r, f)
        probs.add(line, column, cells[r], message)
    probs.more += max(0, len(rows) - room)


def _check_short_rows(
    data: bytes,
    sep: str,
    width: int,
    frame: pd.DataFrame,
    keep: np.ndarray | None,
    t: Table,
    probs: ProblemList,
    line_offset: int = 0,
) -> None:
    """Refuse rows with fewer fields than the header (the reader pads them with blanks).

    A short row always lacks the last column, so fields are only counted (one pass over
    the bytes) when some non-blank row has no value in the last column.
    """
    last = frame[f"c{width - 1}"]
    empty = last.isna().to_numpy(dtype=bool).copy()
    if not pd.api.types.is_numeric_dtype(last):
        empty |= (last.astype(str).str.strip() == "").to_numpy(dtype=bool)
    empty = empty[keep] if keep is not None else empty
    if not empty.any():
        return
    counts = _field_counts(data, sep)
    rows = np.flatnonzero(empty)
    line_index = t.line0[rows] - 1 - line_offset  # 0-based line of each row in ``data``
    known = line_index < len(counts)
    rows, line_index = rows[known], line_index[known]
    short = rows[counts[line_index] < width]
    if short.size == 0:
        return
    room = max(0, MAX_PROBLEMS - len(probs.items))
    for r in short[:room].tolist():
        line = int(t.line0[r])
        fields = counts[line - 1 - line_offset]
        probs.add(
            line,
            None,
            None,
            f"line {line} has {fields} fields but the header has {width}: the row "
            f"is cut short; give every column a value (an empty one keeps its `{sep}`)",
        )
    probs.more += max(0, short.size - room)
    mask = np.zeros(t.n, dtype=bool)
    mask[short] = True
    t.refuse(ROW, mask)


_COUNT_CHUNK = 1 << 20
"""Bytes per step of :func:`_field_counts` (bounds its working memory)."""


def _field_counts(data: bytes, sep: str) -> np.ndarray:
    """Number of fields on each line of ``data`` (0-based line index).

    Without quotes in the file the separators are counted with numpy, a chunk of bytes
    at a time; with quotes (which may hold separators and line ends) the standard
    ``csv`` reader counts them, one record per line as the pandas reader sees them.
    """
    if b'"' in data:
        text = io.StringIO(data.decode("utf-8-sig"), newline="")
        counts = []
        for rec in csv.reader(text, delimiter=sep):
            counts.append(len(rec))
        return np.asarray(counts, dtype=np.int64)
    b = np.frombuffer(data, dtype=np.uint8)
    code = ord(sep)
    at_newline, offset = [], 0
    for start in range(0, len(b), _COUNT_CHUNK):
        c = b[start : start + _COUNT_CHUNK]
        seps = np.cumsum(c == code)
        at_newline.append(offset + seps[c == 0x0A])
        offset += int(seps[-1])
    cum = np.concatenate([np.zeros(1, np.int64), *at_newline, [offset]])
    return np.diff(cum) + 1


def _blank_rows(n: int, text: dict, raw: dict, notnum: dict) -> np.ndarray:
    """Mask of rows with every cell empty (blank lines in the file)."""
    blank = np.ones(n, dtype=bool)
    for codes, uniq in text.values():
        blank &= (uniq == "")[codes]
        if not blank.any():
            return blank  # a column has no empty cell on any row still in question
    for lg, vals in raw.items():
        blank &= np.isnan(vals) & ~notnum[lg]
    return blank


def _columns(frame: pd.DataFrame, cols: Columns, text_cols: tuple[str, ...], sep: str) -> tuple:
    """Factorized text and canonical numbers of each column, with not-a-number masks."""
    text, num, raw, unit, notnum = {}, {}, {}, {}, {}
    for lg, (i, u) in cols.items():
        col = frame[f"c{i}"]
        if lg in text_cols:
            text[lg] = factorize_text(col)
            continue
        vals, notnum[lg] = _numbers(col, sep)
        kind = HIST_UNIT_COLUMNS.get(lg) or READ_UNIT_COLUMNS.get(lg)
        raw[lg] = vals
        num[lg] = U.convert(vals, kind, u) if kind else vals
        unit[lg] = u or ""
    return text, num, raw, unit, notnum
