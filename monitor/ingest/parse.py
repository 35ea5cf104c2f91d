"""Parse telemetry exports (histogram CSV, readings CSV, JSON) into records and problems.

Pure: bytes or a binary file-like object in, a :class:`~monitor.records.ParsedFile` out.
Values are converted to the canonical units of :mod:`monitor.ingest.units` and validated; every
problem found is collected (up to :data:`MAX_PROBLEMS` listed) so the person fixing the
file sees all of them at once. A file with any problem is rejected whole and then carries
no records. The formats are described for users in ``docs/formats.md``.

This module detects what a file holds and hands it on:

- :mod:`monitor.ingest.csv_tables` reads a CSV into a column table,
- :mod:`monitor.ingest.json_tables` reads JSON documents into column tables (the text
  loaded within bounds by :mod:`monitor.ingest.json_text`),
- :mod:`monitor.ingest.histograms` validates band tables and cuts them into histograms
  (records built by :mod:`monitor.ingest.assemble`),
- :mod:`monitor.ingest.readings` validates readings tables,
- :mod:`monitor.ingest.common` holds the column specs, the problem list and the checks
  shared by all of them; :mod:`monitor.ingest.limits` the bounds on what is accepted.

Before any of that, the bytes must be UTF-8 text (UTF-16 and Latin-1 are named), and a
carriage return that does not end a CRLF pair is read as a line end.
"""

from __future__ import annotations

import hashlib
import logging
import re
from concurrent.futures import ThreadPoolExecutor
from typing import BinaryIO

from monitor.domain.parsed import ParsedFile
from monitor.ingest.common import (
    HIST_NUMBERS,
    HIST_REQUIRED,
    HIST_TEXT,
    HIST_UNIT_COLUMNS,
    HOURS_TOLERANCE_FRACTION,
    HOURS_TOLERANCE_H,
    MAX_PROBLEMS,
    READ_NUMBERS,
    READ_REQUIRED,
    READ_TEXT,
    READ_UNIT_COLUMNS,
    ProblemList,
)
from monitor.ingest.csv_tables import HISTOGRAM, read_csv_table
from monitor.ingest.histograms import histograms
from monitor.ingest.json_tables import read_json_tables
from monitor.ingest.readings import readings

__all__ = [
    "HIST_NUMBERS",
    "HIST_REQUIRED",
    "HIST_TEXT",
    "HIST_UNIT_COLUMNS",
    "HOURS_TOLERANCE_FRACTION",
    "HOURS_TOLERANCE_H",
    "MAX_PROBLEMS",
    "READ_NUMBERS",
    "READ_REQUIRED",
    "READ_TEXT",
    "READ_UNIT_COLUMNS",
    "parse_file",
]

_NONBLANK_RE = re.compile(rb"[^\xef\xbb\xbf \t\r\n]")
log = logging.getLogger(__name__)

UNEXPECTED = (
    "drivespan could not read this file because of an internal error (logged for the "
    "developers); nothing from it was stored: check the file against docs/formats.md, and "
    "report the problem with the file if it looks right"
)
"""The message of a file whose parsing failed in an unexpected way."""


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
        problem the record lists are empty. No exception escapes for any content: an
        unexpected error becomes a problem of the file (and is logged with its
        traceback for the developers).
    """
    data = stream if isinstance(stream, bytes | bytearray) else stream.read()
    data = bytes(data)
    with ThreadPoolExecutor(max_workers=1) as pool:
        # hashlib releases the GIL on large buffers: hash on the second core while parsing
        digest = pool.submit(lambda: hashlib.sha256(data).hexdigest())
        out = ParsedFile(name=name, content_sha256="")
        probs = ProblemList(name)
        try:
            if is_text(data, probs):
                _parse_text(line_ends(data), probs, out)
        except Exception:  # noqa: BLE001 - the file is refused, the developer gets the trace
            log.exception("unexpected error while parsing %s", name)
            probs.add(None, None, None, UNEXPECTED)
        out.content_sha256 = digest.result()
    out.problems = probs.result()
    if out.problems:
        out.histograms, out.readings, out.batch = [], [], None
    return out


def line_ends(data: bytes) -> bytes:
    """``data`` with every carriage return that does not end a CRLF pair taken as a line
    end (CR-only files from old spreadsheet programs, or mixed line ends); line numbers
    in messages then count lines as a text editor shows them."""
    if b"\r" not in data or data.count(b"\r") == data.count(b"\r\n"):
        return data
    return data.replace(b"\r\n", b"\n").replace(b"\r", b"\n")


def _parse_text(data: bytes, probs: ProblemList, out: ParsedFile) -> None:
    """JSON if the text starts with ``{`` or ``[``, else CSV; records go into ``out``."""
    head = data[:65536].decode("utf-8", errors="ignore").lstrip("\ufeff \t\r\n")
    if head.startswith(("{", "[")):
        bands, reads = read_json_tables(data, probs)
        if bands is not None:
            out.batch = histograms(bands, probs)
        if reads is not None:
            out.readings = readings(reads, probs)
        return
    read = read_csv_table(data, head, probs)
    if read is None:
        return
    kind, table = read
    if kind == HISTOGRAM:
        out.batch = histograms(table, probs)
    else:
        out.readings = readings(table, probs)


def is_text(data: bytes, probs: ProblemList, first_line: int = 1) -> bool:
    """True if ``data`` is non-blank UTF-8 text; else record why it is unusable.

    ``first_line`` is the line number of the first line of ``data``: a part of a large
    file (read in blocks of whole lines) after the first is checked for NUL bytes and
    UTF-8 only, with its lines numbered as in the file.
    """
    if first_line > 1:
        if not _no_nul(data, probs, first_line):
            return False
        return data.isascii() or _is_utf8(data, probs, first_line)
    if data.startswith((b"\xff\xfe", b"\xfe\xff")) or b"\x00" in data[:65536]:
        probs.add(
            1,
            None,
            None,
            "file is UTF-16 (or UTF-32) text, not UTF-8: export it again as UTF-8, e.g. "
            "'Save as -> CSV UTF-8' in a spreadsheet program",
        )
        return False
    if not _no_nul(data, probs, first_line):
        return False
    if not data.isascii() and not _is_utf8(data, probs):
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


def _no_nul(data: bytes, probs: ProblemList, first_line: int) -> bool:
    """True if ``data`` holds no NUL byte; else a problem naming its line."""
    if b"\x00" not in data:
        return True
    line = data.count(b"\n", 0, data.index(b"\x00")) + first_line
    probs.add(line, None, None, f"file holds a NUL byte on line {line}: it is not a text export")
    return False


def _is_utf8(data: bytes, probs: ProblemList, first_line: int = 1) -> bool:
    """True if ``data`` decodes as UTF-8; else a problem naming the first bad byte."""
    try:
        data.decode("utf-8")
    except UnicodeDecodeError as e:
        line = data.count(b"\n", 0, e.start) + first_line
        bad = f"0x{data[e.start]:02x}"
        hint = ""
        if data[e.start] >= 0xA0:
            hint = " (it looks like Latin-1 or Windows-1252 text)"
        probs.add(
            line,
            None,
            bad,
            f"file is not UTF-8 text{hint}: byte {bad} on line {line} is not valid UTF-8; "
            "export it again as UTF-8, e.g. 'Save as -> CSV UTF-8' in a spreadsheet program",
        )
        return False
    return True
