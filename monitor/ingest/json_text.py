"""Load JSON text within bounds: size, nesting depth and number range.

:func:`load_json` refuses a text over :data:`~monitor.ingest.limits.MAX_JSON_BYTES` and
one nested deeper than :data:`~monitor.ingest.limits.MAX_JSON_DEPTH` *before* the text
is parsed (a vectorised scan of its brackets, linear in the size), so a hostile file can
neither exhaust the recursion of the parser nor its memory. Numbers that no float can
hold (an integer of 400 digits) and the non-standard constants ``NaN`` and ``Infinity``
that Python's parser accepts become :class:`BadNumber` markers, which the field checks
report with the field path.
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass

import numpy as np

from monitor.ingest.common import ProblemList
from monitor.ingest.limits import MAX_JSON_BYTES, MAX_JSON_DEPTH, shorten

FAILED = object()
"""Returned by :func:`load_json` when the text cannot be used (the reason is in ``probs``)."""

_FLOAT_MAX_DIGITS = 309  # 1.8e308, the largest float64, has 309 digits


@dataclass(frozen=True)
class BadNumber:
    """A JSON number that is not a finite float64: its text as written."""

    text: str

    def __str__(self) -> str:
        return self.text

    def message(self, key: str) -> str:
        if self.text.lstrip("-").lower() in ("nan", "infinity"):
            what = f"`{self.text}`, which JSON does not allow"
        else:
            what = "a number beyond the range of a float (about ±1.8e308)"
        return f"`{key}` is {what}: expected a finite number"


def too_large(n_bytes: int) -> str:
    """The message for a JSON file of ``n_bytes`` bytes, above :data:`MAX_JSON_BYTES`."""
    return (
        f"the JSON file is {n_bytes / 2**20:.1f} MiB, larger than the "
        f"{MAX_JSON_BYTES / 2**20:.0f} MiB limit for JSON: split it into smaller files "
        "(for example one per month) or export CSV, which has no such limit"
    )


def load_json(data: bytes, probs: ProblemList) -> object:
    """The parsed JSON of UTF-8 ``data`` (a leading byte-order mark is skipped), or
    :data:`FAILED` with the reason in ``probs``."""
    if len(data) > MAX_JSON_BYTES:
        probs.add(None, None, None, too_large(len(data)))
        return FAILED
    if data.startswith(b"\xef\xbb\xbf"):
        data = data[3:]
    deep = _first_too_deep(data)
    if deep is not None:
        line, col = _line_col(data, deep)
        probs.add(
            line,
            f"column {col}",
            None,
            f"the JSON is nested more than {MAX_JSON_DEPTH} levels deep at line {line}, "
            f"column {col}: expected a document or a list of documents, whose fields nest "
            "at most 5 levels",
        )
        return FAILED
    try:
        return json.loads(data.decode("utf-8"), parse_int=_int, parse_constant=BadNumber)
    except json.JSONDecodeError as e:
        probs.add(
            e.lineno,
            f"column {e.colno}",
            None,
            f"invalid JSON at line {e.lineno}, column {e.colno}: {e.msg}; expected one "
            "document `{...}` or a list of documents `[{...}, ...]`",
        )
    except RecursionError:  # not reached after the depth scan; kept as a last guard
        probs.add(None, None, None, f"the JSON is nested more than {MAX_JSON_DEPTH} levels deep")
    return FAILED


def _int(text: str) -> int | BadNumber:
    """An integer literal, or a BadNumber when no float can hold it."""
    if len(text.lstrip("-")) > _FLOAT_MAX_DIGITS:
        return BadNumber(text)
    v = int(text)
    try:
        float(v)
    except OverflowError:
        return BadNumber(text)
    return v


_SCAN_CHUNK = 1 << 20
"""Bytes scanned per step by :func:`_first_too_deep` (bounds its working memory)."""


def _first_too_deep(data: bytes) -> int | None:
    """Byte offset of the first bracket that opens level MAX_JSON_DEPTH + 1, or None.

    Only the structural bytes are looked at: quotes (not escaped), backslashes and
    brackets. A quote is escaped when an odd run of backslashes precedes it; brackets
    between an opening and a closing quote are text. UTF-8 continuation bytes are never
    ASCII, so scanning bytes is exact. The text is scanned in chunks; the depth, whether
    a string is open and whether the next byte is escaped carry over between chunks.
    """
    b = np.frombuffer(data, dtype=np.uint8)
    state = (0, False, False)  # depth, inside a string, next byte escaped
    for start in range(0, len(b), _SCAN_CHUNK):
        found, state = _scan_chunk(b[start : start + _SCAN_CHUNK], *state)
        if found is not None:
            return start + found
    return None


def _scan_chunk(b: np.ndarray, depth0: int, inside0: bool, escaped0: bool) -> tuple:
    """(offset of the first too-deep bracket or None, state after the chunk)."""
    pos = np.flatnonzero(
        (b == 0x22) | (b == 0x5C) | (b == 0x5B) | (b == 0x5D) | (b == 0x7B) | (b == 0x7D)
    )
    c = b[pos]
    if escaped0 and pos.size and pos[0] == 0 and c[0] in (0x22, 0x5C):
        c = c.copy()
        c[0] = 0  # escaped by the backslash that ended the previous chunk: plain text
    if pos.size == 0:
        return None, (depth0, inside0, False)
    bs = c == 0x5C
    follows_bs = np.r_[False, bs[:-1] & (pos[1:] - pos[:-1] == 1)]
    idx = np.arange(len(pos))
    run_start = np.maximum.accumulate(np.where(bs & ~follows_bs, idx, 0))
    run_len = np.where(follows_bs, idx - np.r_[0, run_start[:-1]], 0)  # backslashes before
    quote = (c == 0x22) & (run_len % 2 == 0)
    inside = (np.cumsum(quote) - quote + inside0) % 2 == 1
    opens = ~inside & ((c == 0x5B) | (c == 0x7B))
    closes = ~inside & ((c == 0x5D) | (c == 0x7D))
    depth = depth0 + np.cumsum(opens.astype(np.int64) - closes)
    over = np.flatnonzero(depth > MAX_JSON_DEPTH)
    if over.size:
        return int(pos[over[0]]), None
    last = len(pos) - 1
    escaped = bool(bs[last] and pos[last] == len(b) - 1 and (last - run_start[last]) % 2 == 0)
    inside_end = bool((int(quote.sum()) + inside0) % 2)
    return None, (int(depth[-1]), inside_end, escaped)


def _line_col(data: bytes, offset: int) -> tuple[int, int]:
    """1-based line and character column of byte ``offset``."""
    line_start = data.rfind(b"\n", 0, offset) + 1
    col = len(data[line_start:offset].decode("utf-8", errors="replace")) + 1
    return data.count(b"\n", 0, offset) + 1, col


def is_number(v: object) -> bool:
    """True for a finite JSON number (``true``/``false`` are not numbers)."""
    return type(v) is int or (type(v) is float and math.isfinite(v))


def number_problem(v: object, key: str) -> str:
    """Why ``v`` is not a finite number, phrased for field ``key``."""
    if isinstance(v, BadNumber):
        return v.message(key)
    if isinstance(v, float):
        return BadNumber("1e309").message(key)  # only an overflowing literal gives inf
    if isinstance(v, bool):
        return f"`{key}` is {str(v).lower()}, a boolean: expected a number"
    if isinstance(v, str):
        return f"`{key}` is text: expected a number (written without quotes)"
    return f"`{key}` must be a number"


def shown(v: object) -> str:
    """A JSON value as the file wrote it (``true``, not ``True``), cut to a short length."""
    if isinstance(v, bool) or v is None:
        return json.dumps(v)
    return shorten(v)
