"""Histograms as arrays for the ledger: batches grouped by shape, and bulk writes.

The ledger needs, per upload and component, one histogram's bands and hours. Ingest
has them as :class:`~monitor.records.Histogram` records, ``recompute`` as stored
blobs; both are turned into a :class:`Batch` here: plain per-row arrays plus the
band data stacked into one 2-D (or 3-D) array per group of equal quantity and shape,
so the life models run once per group and component model instead of once per
histogram. Rows are written with the DBAPI cursor's ``executemany`` on pre-built
tuples, which skips SQLAlchemy's per-row parameter processing.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from sqlalchemy import Connection, Table

from monitor.domain.batch import utc_datetimes
from monitor.domain.records import QUANTITY_PRESSURE_SPEED
from monitor.ledger.batch import Batch, Group

STORED_COLUMNS = (
    "id",
    "component_id",
    "upload_id",
    "quantity",
    "n_pressure",
    "n_speed",
    "pressure_bands",
    "speed_bands",
    "hours",
    "mean_speed_rpm",
    "oil_temp_c",
    "hour_meter_start",
    "hour_meter_end",
    "period_end",
)
"""Columns of :data:`STORED_SQL`, in order."""

STORED_SQL = (
    "SELECT h.id, h.component_id, h.upload_id, h.quantity, h.n_pressure, h.n_speed, "
    "h.pressure_bands, h.speed_bands, h.hours, h.mean_speed_rpm, h.oil_temp_c, "
    "u.hour_meter_start, u.hour_meter_end, u.period_end "
    "FROM histogram h JOIN upload u ON u.id = h.upload_id "
    "WHERE h.component_id IN :ids "
    "ORDER BY h.component_id, h.quantity, h.period_start"
)
"""Stored histograms of some components joined to their uploads.

Read untyped (raw driver values), so timestamps are not parsed per row, and in the
order of the ``(component_id, quantity, period_start)`` index, so the database sorts
nothing; :func:`ledger_columns` puts the rows in ledger order."""


def _period_key(values: list) -> np.ndarray:
    """Sortable int64 keys [ns] of stored period ends (text in SQLite, datetimes elsewhere)."""
    ends = pd.to_datetime(pd.Series(values), utc=True)
    return ends.dt.tz_localize(None).to_numpy().astype("datetime64[ns]").view(np.int64)


def ledger_columns(rows: list) -> dict[str, list | tuple]:
    """:data:`STORED_SQL` rows as columns, sorted by component, period end, upload and
    histogram id.

    Rows of one component and quantity come in period order already (stored periods of
    a drive loop never overlap), so the common case only checks that."""
    cols = dict(zip(STORED_COLUMNS, zip(*rows, strict=True), strict=True))
    comp = np.array(cols["component_id"], dtype=np.int64)
    ends = np.array(cols["period_end"], dtype=object)
    same = comp[1:] == comp[:-1]
    if np.all(comp[1:] >= comp[:-1]) and bool(np.all((ends[1:] > ends[:-1]) | ~same)):
        return cols
    order = np.lexsort(
        (
            np.array(cols["id"], dtype=np.int64),
            np.array(cols["upload_id"], dtype=np.int64),
            _period_key(cols["period_end"]),
            comp,
        )
    ).tolist()
    return {k: [v[i] for i in order] for k, v in cols.items()}


def _ledger_choice(comp: np.ndarray, upload: np.ndarray, is_ps: np.ndarray) -> np.ndarray:
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


def _unblob(blobs: list, k: int, width: int) -> np.ndarray:
    return np.frombuffer(b"".join(blobs), dtype="<f8").reshape(k, width)


def _pick(col: tuple, idx: np.ndarray | None) -> list | tuple:
    """Values of a column at some positions (all of them when ``idx`` is None)."""
    return col if idx is None else [col[i] for i in idx.tolist()]


def batch_from_rows(rows: list) -> Batch:
    """A batch from :data:`STORED_SQL` rows (any order): one histogram per (upload,
    component), in ledger order."""
    cols = ledger_columns(rows)
    comp = np.array(cols["component_id"], dtype=np.int64)
    upload = np.array(cols["upload_id"], dtype=np.int64)
    quantity = np.array(cols["quantity"], dtype=object)
    is_ps_all = quantity == QUANTITY_PRESSURE_SPEED
    keep = _ledger_choice(comp, upload, is_ps_all)
    every = keep.size == comp.size  # the common case: one histogram per upload
    n_p = np.array(cols["n_pressure"], dtype=np.int64)
    n_s = np.array(cols["n_speed"], dtype=np.int64)
    if not every:
        n_p, n_s = n_p[keep], n_s[keep]
    code = (is_ps_all[keep].astype(np.int64) << 40) | (n_p << 20) | n_s
    src = None if every else keep
    codes = np.unique(code)
    groups = [_stored_group(cols, c, code, keep, every and codes.size == 1) for c in codes]
    return Batch(
        component_id=comp if every else comp[keep],
        upload_id=upload if every else upload[keep],
        period_end=list(_pick(cols["period_end"], None if every else keep)),
        hour_meter_start=np.array(_pick(cols["hour_meter_start"], None if every else keep), float),
        hour_meter_end=np.array(_pick(cols["hour_meter_end"], None if every else keep), float),
        groups=groups,
        oil_temp_c=np.array(
            [np.nan if x is None else x for x in _pick(cols["oil_temp_c"], src)], dtype=float
        ),
    )


def _stored_group(cols: dict, c: int, code: np.ndarray, keep: np.ndarray, whole: bool) -> Group:
    """The group of batch rows with shape code ``c`` (``whole``: every stored row)."""
    rows_g = np.arange(code.size) if whole else np.flatnonzero(code == c)
    src = None if whole else keep[rows_g]
    k, p, s = rows_g.size, int((c >> 20) & 0xFFFFF), int(c & 0xFFFFF)
    pb = _unblob(_pick(cols["pressure_bands"], src), k, 2 * p)
    hours = _unblob(_pick(cols["hours"], src), k, p * max(s, 1))
    s_lo = s_hi = None
    if s:
        sb = _unblob(_pick(cols["speed_bands"], src), k, 2 * s)
        s_lo, s_hi = sb[:, :s], sb[:, s:]
        hours = hours.reshape(k, p, s)
    first = int(rows_g[0]) if src is None else int(src[0])
    return Group(
        quantity=QUANTITY_PRESSURE_SPEED if c >> 40 else cols["quantity"][first],
        rows=rows_g,
        p_lo=pb[:, :p],
        p_hi=pb[:, p:],
        s_lo=s_lo,
        s_hi=s_hi,
        hours=hours,
        mean_speed=np.array(_pick(cols["mean_speed_rpm"], src), dtype=float),
    )


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
