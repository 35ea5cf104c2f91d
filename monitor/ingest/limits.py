"""Bounds on what ingest accepts, so that no file (mistaken or hostile) can make a parse
run without end, fill the memory, or store a value the rest of the program cannot hold.

Every limit is listed for users in ``docs/formats.md`` ("Limits"); a change here is a
change there. The plausible ranges are choices (common practice, no source): wide
enough for any real machine, narrow enough to catch a typo or a corrupted field.
"""

from __future__ import annotations

import reprlib
from datetime import UTC, datetime

MAX_JSON_BYTES = 16 * 1024 * 1024
"""Largest telemetry JSON file [bytes] (16 MiB, about 400 000 bands: a year of daily
exports of a 50-machine site). Parsed JSON takes up to about 25 times its size in memory
(measured: a 16 MiB file of empty objects peaks near 0.55 GB), so the limit keeps every
JSON file well inside the 1.5 GB budget; a larger export is split (e.g. one file per
month) or sent as CSV."""

MAX_JSON_DEPTH = 16
"""Deepest nesting of JSON lists and objects. The format needs 5 (a list of documents,
a document, its ``histograms`` list, a histogram, a pressure-by-speed ``hours`` matrix)."""

MAX_YAML_BYTES = 8 * 1024 * 1024
"""Largest fleet registry file [bytes] (8 MiB; a registry of 5 000 units is about 2 MiB)."""

MAX_YAML_DEPTH = 16
"""Deepest nesting of YAML mappings and lists in a fleet registry (the schema needs 5)."""

EARLIEST_TIME = datetime(1970, 1, 1, tzinfo=UTC)
"""Earliest plausible timestamp (inclusive): no machine logged hours before it."""

LATEST_TIME = datetime(2100, 1, 1, tzinfo=UTC)
"""First implausible timestamp (exclusive): later dates are typos or corrupted fields."""

MAX_HOUR_METER_H = 1_000_000.0
"""Largest plausible hour-meter reading or histogram band [h]: 114 years of running day
and night. Anything above is a typo, a counter in the wrong unit or a corrupted field."""

MAX_TEXT_CHARS = {
    "tag": 80,
    "unit": 80,
    "serial": 80,
    "position": 40,
    "name": 120,
    "site": 120,
    "oil": 120,
    "model": 120,
    "machine_type": 120,
}
"""Longest identifier of each kind [characters] (the store's column sizes): a unit tag
(``unit`` in exports, ``tag`` in the registry), a drive position, names of sites, oils
and component models, a machine type and a serial number."""

MAX_ECHO_CHARS = 60
"""Longest piece of a file echoed back in a message [characters]; longer values are cut
and end in an ellipsis, so a huge bad cell cannot flood the output."""

TIME_RANGE_TEXT = f"{EARLIEST_TIME:%Y-%m-%d} to {LATEST_TIME:%Y-%m-%d} (UTC, end excluded)"
"""The plausible time range, as shown in messages."""


def shorten(value: object, limit: int = MAX_ECHO_CHARS) -> str:
    """``str(value)`` cut to ``limit`` characters (the last one an ellipsis) if longer.

    Parameters
    ----------
    value : object
        Anything echoed from a file (a cell, a key, a header).
    limit : int, default MAX_ECHO_CHARS
        Longest result [characters].

    Returns
    -------
    str
        The text, at most ``limit`` characters long.
    """
    text = value if isinstance(value, str) else _bounded_str(value, limit)
    return text if len(text) <= limit else text[: limit - 1] + "\u2026"


_REPR = reprlib.Repr()
_REPR.maxlevel, _REPR.maxlist, _REPR.maxdict = 3, 8, 8
_REPR.maxstring = _REPR.maxother = MAX_ECHO_CHARS


def _bounded_str(value: object, limit: int) -> str:
    """``str`` of a scalar; a bounded ``repr`` of a container (never rendered in full)."""
    if isinstance(value, list | tuple | dict | set):
        return _REPR.repr(value)
    if isinstance(value, int) and value.bit_length() > 4 * limit:
        return f"<an integer of about {int(value.bit_length() * 0.30103)} digits>"
    return str(value)


STREAM_THRESHOLD_BYTES = 64 * 1024 * 1024
"""Files larger than this [bytes] (64 MiB) are read from disk in parts
(:mod:`monitor.ingest.stream`) instead of whole; smaller ones, and every dashboard upload,
are read whole (that takes about 0.2 GB + 4.3 times the file size)."""

STREAM_BLOCK_BYTES = 16 * 1024 * 1024
"""Size of one part of a large CSV [bytes] (16 MiB of whole lines, about 150 000 rows).
Checking a part takes about 0.1 GB."""

MAX_STREAM_BYTES = 2 * 1024**3
"""Largest CSV file read in parts [bytes] (2 GiB). The per-file bookkeeping that spans
the parts (where each unit and period ends, every histogram's period, every reading's
time) grows with the file, at most about 0.03 GB per 100 MB, so this keeps a file of
any content inside the 1.5 GB memory budget."""

MAX_STREAM_LINE_BYTES = 16 * 1024 * 1024
"""Longest line (or quoted value spanning lines) of a CSV read in parts [bytes]."""

MAX_OPEN_ROWS = 1_000_000
"""Rows a CSV read in parts may hold back, waiting for the rest of their unit and period
(whose rows the file may spread out). The rows of one unit and period must lie within
this many rows of each other; exports write them together."""

MAX_STREAM_COMPONENTS = 200_000
"""Distinct (unit, position, quantity) of a CSV read in parts: far above any fleet."""
