"""Bulk helpers of the store: the ledger's choice of histogram per upload, and bulk
writes.

Rows are written with the DBAPI cursor's ``executemany`` on pre-built parameter lists,
which skips SQLAlchemy's per-row parameter processing.
"""

from __future__ import annotations

import numpy as np
from sqlalchemy import Connection, Table

from monitor.domain.batch import utc_datetimes


def ledger_choice(comp: np.ndarray, upload: np.ndarray, is_ps: np.ndarray) -> np.ndarray:
    """Positions kept: one per (component, upload) run, the last pressure-by-speed
    matrix if there is one, else the first histogram (rows sorted by that key)."""
    n = comp.size
    starts = np.flatnonzero(np.r_[True, (comp[1:] != comp[:-1]) | (upload[1:] != upload[:-1])])
    if starts.size == n:
        return np.arange(n)
    ends = np.r_[starts[1:], n]
    keep = starts.copy()
    for j in np.flatnonzero(ends - starts > 1):
        ps = np.flatnonzero(is_ps[starts[j] : ends[j]])
        if ps.size:
            keep[j] = starts[j] + ps[-1]
    return keep


def runs_bytes(values: np.ndarray, bounds: np.ndarray) -> list[bytes]:
    """The bytes of each run ``values[bounds[i]:bounds[i + 1]]`` of a contiguous float64
    array (as :func:`monitor.store.db.pack` writes one run)."""
    width = np.diff(bounds)
    whole = width.size and bounds[0] == 0 and bounds[-1] == values.size
    if whole and width[0] > 0 and (width == width[0]).all():
        return values.view(f"V{8 * int(width[0])}").tolist()  # runs of one length: no slicing
    data = values.tobytes()
    cut = (8 * bounds).tolist()
    return [data[a:z] for a, z in zip(cut[:-1], cut[1:], strict=True)]


def fetch_plain(conn: Connection, statement, params: dict) -> list[tuple]:  # noqa: ANN001
    """Rows of an untyped statement as the driver's tuples (no Row objects built)."""
    res = conn.execute(statement, params)
    try:
        return list(res.cursor.fetchall()) if res.cursor is not None else []
    finally:
        res.close()


# --- bulk writes --------------------------------------------------------------------


def _placeholder(conn: Connection) -> str:
    style = conn.dialect.paramstyle
    if style == "qmark":
        return "?"
    if style in ("format", "pyformat"):
        return "%s"
    raise NotImplementedError(f"bulk insert does not support paramstyle {style!r}")


def bind_values(conn: Connection, table: Table, column: str, values: list) -> list:
    """Values of one column converted as SQLAlchemy would bind them (e.g. datetimes
    to SQLite's text form); each distinct value is converted once."""
    proc = table.c[column].type.dialect_impl(conn.dialect).bind_processor(conn.dialect)
    if proc is None:
        return values
    seen: dict = {}
    return [seen[v] if v in seen else seen.setdefault(v, proc(v)) for v in values]


def bind_times(conn: Connection, table: Table, column: str, ns: np.ndarray) -> list:
    """Timestamps [int64 ns since the epoch, UTC] as SQLAlchemy would bind them as
    datetimes; each distinct value is converted once."""
    uniq, inv = np.unique(ns, return_inverse=True)
    values = np.empty(uniq.size, dtype=object)
    values[:] = bind_values(conn, table, column, utc_datetimes(uniq))
    return values[inv.reshape(-1)].tolist()


INSERT_CHUNK = 100
"""Rows per ``INSERT ... VALUES (...), (...), ...`` statement of :func:`insert_columns`."""


def insert_columns(conn: Connection, table: Table, columns: list[str], values: list) -> None:
    """``INSERT`` rows given column by column (lists of equal length, values already in
    the driver's types), :data:`INSERT_CHUNK` rows per statement.

    One statement per row costs the driver a reset and a step per row; many rows per
    statement bind the same values with a fraction of that overhead. The columns are
    interleaved into one flat parameter list by slice assignment, with no tuple per row.
    """
    n, k = len(values[0]), len(columns)
    if not n:
        return
    flat: list = [None] * (n * k)
    for j, col in enumerate(values):
        flat[j::k] = col
    mark = _placeholder(conn)
    row = f"({', '.join([mark] * k)})"
    head = f"INSERT INTO {table.name} ({', '.join(columns)}) VALUES "
    per, full = INSERT_CHUNK, n - n % INSERT_CHUNK
    cur = conn.connection.dbapi_connection.cursor()
    try:
        if full:
            chunks = [flat[a * k : (a + per) * k] for a in range(0, full, per)]
            cur.executemany(head + ", ".join([row] * per), chunks)
        if full < n:
            cur.execute(head + ", ".join([row] * (n - full)), flat[full * k :])
    finally:
        cur.close()


def update_rows(
    conn: Connection, table: Table, key: str, columns: list[str], rows: list[tuple]
) -> None:
    """``UPDATE table SET columns WHERE key = ?`` for tuples (columns..., key)."""
    if not rows:
        return
    mark = _placeholder(conn)
    sets = ", ".join(f"{c} = {mark}" for c in columns)
    cur = conn.connection.dbapi_connection.cursor()
    try:
        cur.executemany(f"UPDATE {table.name} SET {sets} WHERE {key} = {mark}", rows)
    finally:
        cur.close()
