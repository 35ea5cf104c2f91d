"""Seeded mutations of the sample files in tests/data, for the ingest fuzz test.

Each mutation takes the bytes of a file and a ``random.Random`` and returns new bytes: the
ways real exports get broken (cut off, re-saved in another encoding or line-end style,
rows lost or doubled) and the ways a hostile file is built (deep nesting, numbers no
float holds, booleans and ``nan`` where numbers belong, formula text, alias bombs).
"""

from __future__ import annotations

import random
import re
from collections.abc import Callable

Mutation = Callable[[bytes, random.Random], bytes]

_NUMBER = re.compile(rb"(?<![\w.-])-?\d+(?:\.\d+)?(?:[eE][-+]?\d+)?(?![\w.])")
_TEXT_CELL = re.compile(rb"(?<=[,;\n])[A-Za-z][\w-]*(?=[,;\r\n])|\"[A-Za-z][^\"\n]*\"")
_TIMESTAMP = re.compile(rb"\d{4}-\d{2}-\d{2}[T ]\d{2}:\d{2}(?::\d{2})?")


def _lines(data: bytes) -> list[bytes]:
    return data.splitlines(keepends=True)


def _replace_match(data: bytes, rng: random.Random, pattern: re.Pattern, new: bytes) -> bytes:
    """``data`` with one random match of ``pattern`` replaced by ``new``."""
    hits = list(pattern.finditer(data))
    if not hits:
        return data + new
    m = rng.choice(hits)
    return data[: m.start()] + new + data[m.end() :]


def truncate(data: bytes, rng: random.Random) -> bytes:
    return data[: rng.randrange(len(data) + 1)] if data else data


def byte_flips(data: bytes, rng: random.Random) -> bytes:
    out = bytearray(data)
    for _ in range(rng.randint(1, 8)):
        if out:
            out[rng.randrange(len(out))] = rng.randrange(256)
    return bytes(out)


def cr_only(data: bytes, rng: random.Random) -> bytes:
    return data.replace(b"\r\n", b"\n").replace(b"\n", b"\r")


def mixed_line_ends(data: bytes, rng: random.Random) -> bytes:
    ends = (b"\n", b"\r\n", b"\r")
    return b"".join(line.rstrip(b"\r\n") + rng.choice(ends) for line in _lines(data))


def utf16(data: bytes, rng: random.Random) -> bytes:
    text = data.decode("utf-8", "replace")
    return text.encode(rng.choice(["utf-16", "utf-16-le", "utf-16-be", "utf-32"]))


def latin1(data: bytes, rng: random.Random) -> bytes:
    text = data.decode("utf-8", "replace").replace("-", "\u2013", 1) + "Mühlbach Säge"
    return text.encode("cp1252", "replace")


def deep_nesting(data: bytes, rng: random.Random) -> bytes:
    depth = rng.choice([17, 100, 1000, 100_000])
    opener = rng.choice([b"[", b'{"a":'])
    closer = b"]" if opener == b"[" else b"}"
    inner = opener * depth + b"1" + closer * depth
    if data.lstrip().startswith((b"{", b"[")):
        return _replace_match(data, rng, _NUMBER, inner)
    return inner  # a CSV becomes a deep JSON document


def huge_numbers(data: bytes, rng: random.Random) -> bytes:
    new = rng.choice([b"1e400", b"-1e400", b"1" + b"0" * 400, b"9" * 5000, b"1e308", b"4e-400"])
    return _replace_match(data, rng, _NUMBER, new)


def booleans(data: bytes, rng: random.Random) -> bytes:
    return _replace_match(data, rng, _NUMBER, rng.choice([b"true", b"false", b"null"]))


def nan_text(data: bytes, rng: random.Random) -> bytes:
    new = rng.choice([b"nan", b"NaN", b"inf", b"-Infinity", b"Infinity", b"NAN", b"  nan "])
    return _replace_match(data, rng, _NUMBER, new)


def short_rows(data: bytes, rng: random.Random) -> bytes:
    lines = _lines(data)
    if len(lines) < 2:
        return data
    k = rng.randrange(1, len(lines))
    cut = lines[k].rstrip(b"\r\n")
    seps = [i for i, c in enumerate(cut) if c in b",;"]
    if seps:
        cut = cut[: rng.choice(seps)]
    lines[k] = cut + b"\n"
    return b"".join(lines)


def duplicated_rows(data: bytes, rng: random.Random) -> bytes:
    lines = _lines(data)
    if len(lines) < 2:
        return data + data
    k = rng.randrange(1, len(lines))
    row = lines[k] if lines[k].endswith(b"\n") else lines[k] + b"\n"
    lines.insert(rng.randrange(1, len(lines) + 1), row)
    return b"".join(lines)


def formula_strings(data: bytes, rng: random.Random) -> bytes:
    new = rng.choice([b"=1+1", b" =HYPERLINK(1)", b"@SUM(A1)", b"+cmd|' /C calc'!A0", b"-2+3"])
    return _replace_match(data, rng, _TEXT_CELL, new)


def odd_years(data: bytes, rng: random.Random) -> bytes:
    year = rng.choice([b"9999", b"0001", b"1969", b"2100", b"1677", b"2262"])
    return _replace_match(data, rng, _TIMESTAMP, year + b"-03-02T06:00:00")


def huge_cell(data: bytes, rng: random.Random) -> bytes:
    return _replace_match(data, rng, _TEXT_CELL, b"X" * rng.choice([100, 5_000, 300_000]))


def unbalanced_quote(data: bytes, rng: random.Random) -> bytes:
    lines = _lines(data)
    k = rng.randrange(len(lines)) if lines else 0
    if lines:
        lines[k] = lines[k].replace(b",", b',"', 1)
    return b"".join(lines)


def yaml_aliases(data: bytes, rng: random.Random) -> bytes:
    bomb = b"x0: &a0 [1, 1, 1, 1, 1, 1, 1, 1, 1]\n" + b"".join(
        b"x%d: &a%d [*a%d, *a%d, *a%d, *a%d, *a%d, *a%d, *a%d, *a%d, *a%d]\n"
        % ((i, i) + (i - 1,) * 9)
        for i in range(1, 9)
    )
    return bomb + data if rng.random() < 0.5 else data.replace(b"units:", b"units: *a8\nu:", 1)


MUTATIONS: dict[str, Mutation] = {
    f.__name__: f
    for f in (
        truncate,
        byte_flips,
        cr_only,
        mixed_line_ends,
        utf16,
        latin1,
        deep_nesting,
        huge_numbers,
        booleans,
        nan_text,
        short_rows,
        duplicated_rows,
        formula_strings,
        odd_years,
        huge_cell,
        unbalanced_quote,
        yaml_aliases,
    )
}
"""Every mutation by name."""


def mutate(data: bytes, rng: random.Random) -> tuple[bytes, list[str]]:
    """``data`` after one to three random mutations, and their names in order."""
    names = rng.sample(sorted(MUTATIONS), rng.choice([1, 1, 2, 3]))
    for name in names:
        data = MUTATIONS[name](data, rng)
    return data, names
