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

from dataclasses import dataclass

import numpy as np
from sqlalchemy import Connection, Table

from monitor.records import QUANTITY_PRESSURE_SPEED, Histogram


@dataclass
class Group:
    """Rows of a batch with equal quantity and band counts, their bands stacked.

    ``rows`` are positions in the batch; ``p_lo``/``p_hi`` (k, P) [bar], ``s_lo``/``s_hi``
    (k, S) [rpm] or None, ``hours`` (k, P) or (k, P, S) [h], ``mean_speed`` (k,) [rpm],
    nan where not given.
    """

    quantity: str
    rows: np.ndarray
    p_lo: np.ndarray
    p_hi: np.ndarray
    s_lo: np.ndarray | None
    s_hi: np.ndarray | None
    hours: np.ndarray
    mean_speed: np.ndarray


@dataclass
class Batch:
    """One histogram per (upload, component), as arrays of equal length N.

    ``period_end`` holds the upload's period end per row, either as datetimes
    (ingest) or as the database's own stored value (recompute reads it raw and
    writes it back unchanged).
    """

    component_id: np.ndarray
    upload_id: np.ndarray
    period_end: list
    hour_meter_start: np.ndarray
    hour_meter_end: np.ndarray
    groups: list[Group]

    def __len__(self) -> int:
        return int(self.component_id.size)


def _group_key(quantity: str, n_p: int, n_s: int) -> tuple:
    return (quantity, n_p, n_s)


def batch_from_histograms(items: list[tuple[Histogram, int, int]]) -> Batch:
    """A batch of (histogram, component id, upload id) items, in item order."""
    by_key: dict[tuple, list[int]] = {}
    for i, (h, _, _) in enumerate(items):
        n_s = 0 if h.speed_low_rpm is None else len(h.speed_low_rpm)
        by_key.setdefault(_group_key(h.quantity, len(h.pressure_low_bar), n_s), []).append(i)
    groups = []
    for (quantity, _, n_s), idx in by_key.items():
        hs = [items[i][0] for i in idx]
        groups.append(
            Group(
                quantity=quantity,
                rows=np.asarray(idx, dtype=np.int64),
                p_lo=np.stack([np.asarray(h.pressure_low_bar, float) for h in hs]),
                p_hi=np.stack([np.asarray(h.pressure_high_bar, float) for h in hs]),
                s_lo=np.stack([np.asarray(h.speed_low_rpm, float) for h in hs]) if n_s else None,
                s_hi=np.stack([np.asarray(h.speed_high_rpm, float) for h in hs]) if n_s else None,
                hours=np.stack([np.asarray(h.hours, float) for h in hs]),
                mean_speed=np.array([h.mean_speed_rpm for h in hs], dtype=float),
            )
        )
    return Batch(
        component_id=np.array([it[1] for it in items], dtype=np.int64),
        upload_id=np.array([it[2] for it in items], dtype=np.int64),
        period_end=[it[0].period_end for it in items],
        hour_meter_start=np.array([it[0].hour_meter_start for it in items], dtype=float),
        hour_meter_end=np.array([it[0].hour_meter_end for it in items], dtype=float),
        groups=groups,
    )


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
    "hour_meter_start",
    "hour_meter_end",
    "period_end",
)
"""Columns of :data:`STORED_SQL`, in order."""

STORED_SQL = (
    "SELECT h.id, h.component_id, h.upload_id, h.quantity, h.n_pressure, h.n_speed, "
    "h.pressure_bands, h.speed_bands, h.hours, h.mean_speed_rpm, "
    "u.hour_meter_start, u.hour_meter_end, u.period_end "
    "FROM histogram h JOIN upload u ON u.id = h.upload_id "
    "WHERE h.component_id IN :ids "
    "ORDER BY h.component_id, u.period_end, h.upload_id, h.id"
)
"""Stored histograms of some components joined to their uploads, in ledger order.

Read untyped (raw driver values), so timestamps are not parsed per row."""


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


def batch_from_rows(rows: list) -> Batch:
    """A batch from :data:`STORED_SQL` rows: one histogram per (upload, component)."""
    cols = dict(zip(STORED_COLUMNS, zip(*rows, strict=True), strict=True))
    comp = np.array(cols["component_id"], dtype=np.int64)
    upload = np.array(cols["upload_id"], dtype=np.int64)
    quantity = np.array(cols["quantity"], dtype=object)
    keep = _ledger_choice(comp, upload, quantity == QUANTITY_PRESSURE_SPEED)
    n_p = np.array(cols["n_pressure"], dtype=np.int64)[keep]
    n_s = np.array(cols["n_speed"], dtype=np.int64)[keep]
    is_ps = (quantity[keep] == QUANTITY_PRESSURE_SPEED).astype(np.int64)
    code = (is_ps << 40) | (n_p << 20) | n_s
    groups = []
    for c in np.unique(code):
        rows_g = np.flatnonzero(code == c)
        src = keep[rows_g]
        k, p, s = rows_g.size, int(n_p[rows_g[0]]), int(n_s[rows_g[0]])
        pb = _unblob([cols["pressure_bands"][i] for i in src], k, 2 * p)
        hours = _unblob([cols["hours"][i] for i in src], k, p * max(s, 1))
        s_lo = s_hi = None
        if s:
            sb = _unblob([cols["speed_bands"][i] for i in src], k, 2 * s)
            s_lo, s_hi = sb[:, :s], sb[:, s:]
            hours = hours.reshape(k, p, s)
        groups.append(
            Group(
                quantity=QUANTITY_PRESSURE_SPEED if c >> 40 else cols["quantity"][src[0]],
                rows=rows_g,
                p_lo=pb[:, :p],
                p_hi=pb[:, p:],
                s_lo=s_lo,
                s_hi=s_hi,
                hours=hours,
                mean_speed=np.array([cols["mean_speed_rpm"][i] for i in src], dtype=float),
            )
        )
    period_end = cols["period_end"]
    return Batch(
        component_id=comp[keep],
        upload_id=upload[keep],
        period_end=[period_end[i] for i in keep.tolist()],
        hour_meter_start=np.array(cols["hour_meter_start"], dtype=float)[keep],
        hour_meter_end=np.array(cols["hour_meter_end"], dtype=float)[keep],
        groups=groups,
    )


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


def insert_rows(conn: Connection, table: Table, columns: list[str], rows: list[tuple]) -> None:
    """``INSERT`` plain tuples (values already in the driver's types) in one executemany."""
    if not rows:
        return
    mark = _placeholder(conn)
    sql = (
        f"INSERT INTO {table.name} ({', '.join(columns)}) "
        f"VALUES ({', '.join([mark] * len(columns))})"
    )
    cur = conn.connection.dbapi_connection.cursor()
    try:
        cur.executemany(sql, rows)
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
