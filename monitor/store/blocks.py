"""Stored histograms in blocks: one ``histogram_block`` row per stored file (or file
part), component and quantity, its histograms as arrays.

A row per histogram cost ingest and recompute most of their time: one parameter tuple
per row built by the interpreter, one B-tree entry per row in the table and its unique
index, and band edges repeated in every row. A block is written with a handful of
``tobytes`` calls and read back with ``frombuffer``; when every histogram of a block has
the same band edges (the usual export), the edges are kept once (``bands_shared``).

Reads give a :class:`StoredHistograms`: the histograms as a
:class:`~monitor.domain.batch.HistogramBatch` (the form ingest parses into), with the
component, upload and content hash of each. Writes take the same form, so ingest,
recompute and the checks at ingest share one layout.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd
from sqlalchemy import Connection, and_, func, select

from monitor.domain.batch import HistogramBatch, group_ids
from monitor.domain.records import Histogram
from monitor.store import db
from monitor.store.bulk import bind_times, insert_columns

PER_HISTOGRAM = (
    ("upload_id", "<i8"),
    ("period_start_ns", "<i8"),
    ("period_end_ns", "<i8"),
    ("hour_meter_start", "<f8"),
    ("hour_meter_end", "<f8"),
    ("mean_speed_rpm", "<f8"),
    ("oil_temp_c", "<f8"),
    ("n_pressure", "<i4"),
    ("n_speed", "<i4"),
)
"""Block arrays with one value per histogram, and their stored dtype."""

EDGES = ("pressure_low_bar", "pressure_high_bar", "speed_low_rpm", "speed_high_rpm")
"""Block arrays of band edges (runs of n_pressure or n_speed values per histogram)."""

BLOCK_COLUMNS = [
    "file_id",
    "component_id",
    "quantity",
    "n_histograms",
    "first_start",
    "last_end",
    "bands_shared",
    *(name for name, _ in PER_HISTOGRAM),
    *EDGES,
    "hours",
]
"""Columns written per block, in order."""


@dataclass
class StoredHistograms:
    """Stored histograms as columns: ``batch`` (unit and position left empty) and, per
    histogram, its ``component_id``, ``upload_id``, ``file_id`` and ``seq`` (its place in
    store order: block id, then place in the block).

    No content hash is stored: a block holds everything a histogram's hash is made of,
    so the checks at ingest hash the few stored histograms a new file overlaps when they
    need them (:func:`monitor.store.checks.batch_shas`)."""

    batch: HistogramBatch
    component_id: np.ndarray
    upload_id: np.ndarray
    file_id: np.ndarray
    seq: np.ndarray

    def __len__(self) -> int:
        return len(self.batch)

    def take(self, rows: np.ndarray) -> StoredHistograms:
        """The histograms ``rows`` (positions, in the order given)."""
        rows = np.asarray(rows, dtype=np.int64)
        return StoredHistograms(
            batch=self.batch.take(rows),
            component_id=self.component_id[rows],
            upload_id=self.upload_id[rows],
            file_id=self.file_id[rows],
            seq=self.seq[rows],
        )


# --- writing ----------------------------------------------------------------------------


def insert_blocks(
    conn: Connection,
    file_id: int,
    batch: HistogramBatch,
    component_id: np.ndarray,
    upload_id: np.ndarray,
) -> int:
    """Store the histograms of ``batch`` (per histogram its component and upload) as one
    block per component and quantity; return the block count.

    Within a block the histograms keep their order in ``batch``."""
    n = len(batch)
    if not n:
        return 0
    gid = group_ids([pd.factorize(component_id)[0], pd.factorize(batch.quantity)[0]])
    order = np.argsort(gid, kind="stable")
    b = batch.take(order)
    cut = np.r_[0, np.flatnonzero(np.diff(gid[order])) + 1, n]
    per = {name: getattr(b, name, None) for name, _ in PER_HISTOGRAM}
    per["upload_id"] = np.asarray(upload_id, dtype=np.int64)[order]
    comp = np.asarray(component_id, dtype=np.int64)[order]
    rows: list[list] = [[] for _ in BLOCK_COLUMNS]
    for lo, hi in zip(cut[:-1].tolist(), cut[1:].tolist(), strict=True):
        values = _block_values(b, per, lo, hi)
        for j, v in enumerate((file_id, int(comp[lo]), b.quantity[lo], *values)):
            rows[j].append(v)
    t = db.histogram_block
    rows[4] = bind_times(conn, t, "first_start", np.array(rows[4], dtype=np.int64))
    rows[5] = bind_times(conn, t, "last_end", np.array(rows[5], dtype=np.int64))
    insert_columns(conn, t, BLOCK_COLUMNS, rows)
    return len(cut) - 1


def _block_values(b: HistogramBatch, per: dict, lo: int, hi: int) -> list:
    """Column values (after file, component and quantity) of the block of histograms
    ``lo:hi`` of ``b``."""
    starts, ends = b.period_start_ns[lo:hi], b.period_end_ns[lo:hi]
    n_p, n_s = b.n_pressure[lo:hi], b.n_speed[lo:hi]
    p0, p1 = int(b.pressure_offset[lo]), int(b.pressure_offset[hi])
    s0, s1 = int(b.speed_offset[lo]), int(b.speed_offset[hi])
    edges = {
        "pressure_low_bar": b.pressure_low_bar[p0:p1],
        "pressure_high_bar": b.pressure_high_bar[p0:p1],
        "speed_low_rpm": b.speed_low_rpm[s0:s1],
        "speed_high_rpm": b.speed_high_rpm[s0:s1],
    }
    shared = _shared(edges, n_p, n_s)
    if shared and hi - lo > 1:
        p, s = int(n_p[0]), int(n_s[0])
        for k in EDGES:
            edges[k] = edges[k][: p if k.startswith("pressure") else s]
    h0, h1 = int(b.hours_offset[lo]), int(b.hours_offset[hi])
    return [
        hi - lo,
        int(starts.min()),
        int(ends.max()),
        shared,
        *(np.ascontiguousarray(per[name][lo:hi], dtype=dt).tobytes() for name, dt in PER_HISTOGRAM),
        *(np.ascontiguousarray(edges[k], dtype="<f8").tobytes() for k in EDGES),
        np.ascontiguousarray(b.hours[h0:h1], dtype="<f8").tobytes(),
    ]


def _shared(edges: dict, n_p: np.ndarray, n_s: np.ndarray) -> bool:
    """True when every histogram has the same band edges as the first."""
    if (n_p != n_p[0]).any() or (n_s != n_s[0]).any():
        return False
    k = n_p.size
    for name in EDGES:
        run = edges[name].reshape(k, -1)
        if run.shape[1] and not (run == run[0]).all():
            return False
    return True


# --- reading ----------------------------------------------------------------------------

_READ = [
    "id",
    "file_id",
    "component_id",
    "quantity",
    "n_histograms",
    "bands_shared",
    *(name for name, _ in PER_HISTOGRAM),
    *EDGES,
    "hours",
]


def _select(*conditions):  # noqa: ANN001, ANN202
    t = db.histogram_block
    return select(*[t.c[k] for k in _READ]).where(and_(*conditions)).order_by(t.c.id)


def _decode(rows: list) -> StoredHistograms:
    """Block rows (columns :data:`_READ`) -> one :class:`StoredHistograms`, in block order.

    Each array is joined over the blocks as bytes and read with one ``frombuffer``; the
    band edges of blocks that keep them once are repeated by index arithmetic."""
    cols = dict(zip(_READ, zip(*rows, strict=True), strict=True)) if rows else {}
    if not rows:
        cols = {k: () for k in _READ}
    n_block = np.array(cols["n_histograms"], dtype=np.int64)
    per = {
        name: np.frombuffer(b"".join(map(bytes, cols[name])), dtype=dt).astype(
            np.float64 if dt == "<f8" else np.int64
        )
        for name, dt in PER_HISTOGRAM
    }
    shared = np.array(cols["bands_shared"], dtype=bool) & (n_block > 1)
    block_of = np.repeat(np.arange(n_block.size), n_block)
    first = np.cumsum(n_block) - n_block  # each block's first histogram
    edges = {
        k: _edges(
            cols[k],
            per["n_pressure" if k.startswith("pressure") else "n_speed"],
            shared,
            block_of,
            first,
        )
        for k in EDGES
    }
    quantity = np.empty(n_block.size, dtype=object)
    quantity[:] = list(cols["quantity"])
    n = int(n_block.sum())
    blank = np.full(n, "", dtype=object)
    batch = HistogramBatch(
        unit=blank,
        position=blank,
        quantity=quantity[block_of],
        period_start_ns=per["period_start_ns"],
        period_end_ns=per["period_end_ns"],
        hour_meter_start=per["hour_meter_start"],
        hour_meter_end=per["hour_meter_end"],
        mean_speed_rpm=per["mean_speed_rpm"],
        line=None,
        n_pressure=per["n_pressure"],
        n_speed=per["n_speed"],
        hours=np.frombuffer(b"".join(map(bytes, cols["hours"])), dtype="<f8").astype(np.float64),
        oil_temp_c=per["oil_temp_c"],
        **edges,
    )
    ids = np.array(cols["id"], dtype=np.int64)
    return StoredHistograms(
        batch=batch,
        component_id=np.array(cols["component_id"], dtype=np.int64)[block_of],
        upload_id=per["upload_id"],
        file_id=np.array(cols["file_id"], dtype=np.int64)[block_of],
        seq=(ids[block_of] << 32) | (np.arange(n, dtype=np.int64) - first[block_of]),
    )


def _edges(blobs, counts, shared, block_of, first) -> np.ndarray:  # noqa: ANN001
    """One band-edge array over all blocks: runs of ``counts`` values per histogram, the
    run of a block with ``shared`` edges stored once and read for each histogram."""
    src = np.frombuffer(b"".join(map(bytes, blobs)), dtype="<f8").astype(np.float64)
    if not shared.any():
        return src
    stored = np.where(shared[block_of], 0, counts)  # values each histogram has stored
    stored[first[shared]] = counts[first[shared]]  # a shared block's one run
    at = np.r_[0, np.cumsum(stored)[:-1]]  # where each histogram's stored values start
    start = np.where(shared[block_of], at[first[block_of]], at)  # where its run is read
    total = int(counts.sum())
    out_at = np.r_[0, np.cumsum(counts)[:-1]]
    return src[np.arange(total) + np.repeat(start - out_at, counts)]


def of_components(conn: Connection, component_ids: list[int]) -> StoredHistograms:
    """Every stored histogram of some components, in store order."""
    t = db.histogram_block
    ids = [int(c) for c in component_ids]
    return _decode(conn.execute(_select(t.c.component_id.in_(ids))).all())


def overlapping(conn: Connection, component_ids: list[int], start, end) -> StoredHistograms:  # noqa: ANN001
    """Stored histograms of some components whose periods overlap ``[start, end)``
    (UTC datetimes), in store order."""
    t = db.histogram_block
    q = _select(
        t.c.component_id.in_([int(c) for c in component_ids]),
        t.c.first_start < end,
        t.c.last_end > start,
    )
    stored = _decode(conn.execute(q).all())
    lo, hi = _ns(start), _ns(end)
    b = stored.batch
    return stored.take(np.flatnonzero((b.period_start_ns < hi) & (b.period_end_ns > lo)))


def of_uploads(conn: Connection, component_id: int, upload_ids: list[int]) -> list[Histogram]:
    """Stored histograms of one component for some uploads, as records in order of
    quantity and period start."""
    if not upload_ids:
        return []
    u, t = db.upload, db.histogram_block
    ids = [int(i) for i in upload_ids]
    span = conn.execute(
        select(func.min(u.c.period_start), func.max(u.c.period_end)).where(u.c.id.in_(ids))
    ).one()
    if span[0] is None:
        return []
    start, end = (_utc(v) for v in span)
    q = _select(t.c.component_id == int(component_id), t.c.first_start < end, t.c.last_end > start)
    stored = _decode(conn.execute(q).all())
    b = stored.batch
    rows = np.flatnonzero(np.isin(stored.upload_id, ids))
    rows = rows[np.lexsort((b.period_start_ns[rows], b.quantity[rows].astype(str)))]
    return b.histograms(rows)


def last_ends(conn: Connection, component_ids: list[int], quantity: str) -> dict[int, object]:
    """Per component with stored histograms of ``quantity``: the latest period end."""
    t, c = db.histogram_block, db.component
    last = (
        select(t.c.last_end)
        .where(t.c.component_id == c.c.id, t.c.quantity == quantity)
        .order_by(t.c.last_end.desc())
        .limit(1)
        .correlate(c)
        .scalar_subquery()
    )
    q = select(c.c.id, last).where(c.c.id.in_([int(x) for x in component_ids]))
    return {int(cid): end for cid, end in conn.execute(q).all() if end is not None}


def file_names(conn: Connection, file_ids: list[int]) -> dict[int, str]:
    """Name of each stored file."""
    f = db.upload_file
    q = select(f.c.id, f.c.name).where(f.c.id.in_([int(i) for i in file_ids]))
    return {int(i): name for i, name in conn.execute(q).all()}


def count(conn: Connection) -> int:
    """Number of stored histograms."""
    t = db.histogram_block
    return int(conn.execute(select(func.coalesce(func.sum(t.c.n_histograms), 0))).scalar())


def _utc(t) -> pd.Timestamp:  # noqa: ANN001
    """A stored or given time (naive: UTC; SQLite returns text) as a UTC timestamp."""
    ts = pd.Timestamp(t)
    return ts.tz_localize("UTC") if ts.tz is None else ts.tz_convert("UTC")


def _ns(t) -> int:  # noqa: ANN001
    """A datetime (naive: UTC) -> int64 ns since the epoch."""
    return int(_utc(t).as_unit("ns").value)
