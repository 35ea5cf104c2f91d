"""The damage ledger: one row per upload and component, written at ingest.

Damage is additive, so it is computed once per upload with the life models and
kept; a ranking is then a few index seeks per component over running totals
(the ``cum_*`` columns) instead of a re-read of every histogram. ``recompute``
rebuilds the whole ledger from the stored histograms after a model or registry
change; its result equals what ingest wrote.

Damage is stored at the 90 % reliability reference (a1 = 1): the planning
reliability is applied when a status is computed, so it can change per request.
"""

from __future__ import annotations

from collections.abc import Callable, Iterator
from contextlib import contextmanager

import numpy as np
import pandas as pd
from sqlalchemy import Connection, delete, select

from monitor.domain.batch import group_ids
from monitor.domain.records import QUANTITY_PRESSURE_SPEED
from monitor.domain.specs import ComponentModelSpec
from monitor.ledger.batch import Batch, ComponentTable, batch_from_columns
from monitor.store import blocks, db, queries, rating_changes
from monitor.store.bulk import bind_times, insert_columns, ledger_choice, update_rows

CUM_COLUMNS = {
    "cum_meter_hours": "meter_hours",
    "cum_hours": "hours",
    "cum_damage": "damage",
    "cum_relief_hours": "relief_hours",
    "cum_cutoff_hours": "cutoff_hours",
    "cum_relief_heat_kwh": "relief_heat_kwh",
    "cum_kappa_floor_hours": "kappa_floor_hours",
}
RECOMPUTE_CHUNK = 200  # components per read/compute/write round of recompute

Compute = Callable[["Batch", "ComponentTable"], dict[str, np.ndarray]]
"""The life-model results of a batch: ``compute(batch, table)`` returns one array per
:data:`METRIC_COLUMNS` name (see :func:`monitor.ledger.batch_metrics.batch_metrics`, with
the stored settings it needs already bound). Storage computes no engineering results
itself: the use cases pass this function in."""


# --- component data, looked up once per write ----------------------------------------


def component_table(conn: Connection, ids: list[int] | None = None) -> ComponentTable:
    """The :class:`ComponentTable` of the registry as stored now: every component, or
    those of ``ids``."""
    c, u, m, o, s = db.component, db.unit, db.component_model, db.oil, db.site
    q = (
        select(
            c.c.id.label("component_id"),
            m.c.id.label("model_id"),
            *[col.label(f"m_{col.name}") for col in m.c if col.name != "id"],
            *[col.label(f"oil_{col.name}") for col in o.c if col.name != "id"],
            c.c.operating_temp_c.label("c_operating_temp_c"),
            u.c.operating_temp_c.label("u_operating_temp_c"),
            s.c.contamination_level.label("site_contamination_level"),
        )
        .join(u, c.c.unit_id == u.c.id)
        .join(s, u.c.site_id == s.c.id)
        .join(m, c.c.model_id == m.c.id)
        .join(o, u.c.oil_id == o.c.id)
    )
    if ids is not None:
        q = q.where(c.c.id.in_([int(x) for x in ids]))
    recs = [dict(r) for r in conn.execute(q).mappings()]
    models: dict[int, ComponentModelSpec] = {}
    for r in recs:
        if r["model_id"] not in models:
            models[r["model_id"]] = queries.model_spec(r)
    return ComponentTable(
        {r["component_id"]: r["model_id"] for r in recs},
        models,
        {r["component_id"]: r for r in recs},
        {r["component_id"]: queries.oil_spec(r) for r in recs},
        rating_changes.factors_by_model_id(conn),
    )


def _metrics(conn: Connection, batch: Batch, table: ComponentTable, compute: Compute) -> dict:
    """The caller's life-model results of ``batch`` (the store computes none itself)."""
    values = compute(batch, table)
    missing = set(METRIC_COLUMNS) - set(values)
    if missing:
        raise ValueError(f"ledger compute returned no {sorted(missing)}")
    return values


_KEY_COLUMNS = ("upload_id", "component_id", "period_end", "hour_meter_end", "meter_hours")
METRIC_COLUMNS = tuple(
    c.name
    for c in db.ledger.c
    if c.name != "id" and c.name not in _KEY_COLUMNS and c.name not in CUM_COLUMNS
)
"""Life-model results per ledger row, computed by the caller's ``compute`` function."""

LEDGER_COLUMNS = [*_KEY_COLUMNS, *METRIC_COLUMNS, *CUM_COLUMNS]
"""Columns of a ledger row as written, in order (``id`` is assigned by the database)."""


def _ordered(batch: Batch, ends_ns: np.ndarray) -> np.ndarray:
    """Positions in ledger order: component, period end, upload."""
    return np.lexsort((batch.upload_id, ends_ns, batch.component_id))


def _running_totals(comp: np.ndarray, values: dict[str, np.ndarray]) -> dict:
    """Running totals per component of rows in ledger order (from zero)."""
    frame = pd.DataFrame({col: values[col] for col in CUM_COLUMNS.values()})
    sums = frame.groupby(comp, sort=False).cumsum()
    return {cum: sums[col].to_numpy() for cum, col in CUM_COLUMNS.items()}


def _ledger_columns(conn: Connection, batch: Batch, values: dict, order: np.ndarray) -> list[list]:
    """Columns of the ledger rows in ``order``."""
    ends = bind_times(conn, db.ledger, "period_end", batch.period_end_ns[order])
    return [
        batch.upload_id[order].tolist(),
        batch.component_id[order].tolist(),
        ends,
        *(np.asarray(values[c])[order].tolist() for c in LEDGER_COLUMNS[3:]),
    ]


# --- writing at ingest --------------------------------------------------------------


def write_upload(conn: Connection, file_id: int, plan, compute: Compute) -> None:  # noqa: ANN001
    """Store a checked file's uploads, histograms, readings and their ledger rows.

    ISO 4406 samples only suggest a contamination level (the registry chooses it), so a
    new sample changes no ledger row.
    """
    with page_cache(conn, INGEST_CACHE_KIB):
        _write_upload(conn, file_id, plan, compute)


INGEST_CACHE_KIB = 65_536
"""SQLite page cache while a file's rows are written [KiB]. With the default 2 MB, a
large file's new table and index pages spill to the WAL before the commit and are
written again (a 1 M-band file: 2.0 s -> 1.9 s)."""


@contextmanager
def page_cache(conn: Connection, kib: int) -> Iterator[None]:
    """SQLite: a page cache of ``kib`` KiB for a while, the previous size afterwards.
    Other databases: nothing."""
    if conn.dialect.name != "sqlite":
        yield
        return
    before = conn.exec_driver_sql("PRAGMA cache_size").scalar()
    conn.exec_driver_sql(f"PRAGMA cache_size = -{int(kib)}")
    try:
        yield
    finally:
        conn.exec_driver_sql(f"PRAGMA cache_size = {int(before)}")


def _write_upload(conn: Connection, file_id: int, plan, compute: Compute) -> None:  # noqa: ANN001
    table = component_table(conn, sorted(plan.component_unit))
    upload_ids = _insert_uploads(conn, file_id, plan)
    every = batch_from_columns(
        plan.batch, np.arange(plan.n_histograms), plan.component_id, upload_ids
    )
    blocks.insert_blocks(conn, file_id, plan.batch, plan.component_id, upload_ids)
    _insert_readings(conn, file_id, plan)
    chosen = _select_for_ledger(plan, upload_ids, set())
    if not chosen.size:
        return
    if chosen.size == len(every):  # one histogram per upload and component, none skipped
        batch = every
    else:
        batch = batch_from_columns(
            plan.batch, chosen, plan.component_id[chosen], upload_ids[chosen]
        )
    _append_ledger(conn, batch, table, compute)


def _insert_uploads(conn: Connection, file_id: int, plan) -> np.ndarray:  # noqa: ANN001
    """Insert one upload row per upload of the plan; return the upload id per histogram."""
    first = plan.upload_first
    if not first.size:
        return np.zeros(0, dtype=np.int64)
    t, b = db.upload, plan.batch
    values = [
        [file_id] * first.size,
        plan.unit_id[first].tolist(),
        bind_times(conn, t, "period_start", b.period_start_ns[first]),
        bind_times(conn, t, "period_end", b.period_end_ns[first]),
        b.hour_meter_start[first].tolist(),
        b.hour_meter_end[first].tolist(),
    ]
    cols = ["file_id", "unit_id", "period_start", "period_end"]
    insert_columns(conn, t, [*cols, "hour_meter_start", "hour_meter_end"], values)
    # ids rise in insert order (SQLite rowids; one session's sequence values in PostgreSQL);
    # a file stored in parts has the uploads of its earlier parts before these
    q = select(t.c.id).where(t.c.file_id == file_id).order_by(t.c.id.desc()).limit(first.size)
    ids = np.array(conn.execute(q).scalars().all()[::-1], dtype=np.int64)
    return ids[plan.upload]


def _insert_readings(conn: Connection, file_id: int, plan) -> None:  # noqa: ANN001
    rows = [
        dict(
            file_id=file_id,
            component_id=comp,
            taken_at=r.taken_at,
            hour_meter=r.hour_meter,
            case_drain_lpm=r.case_drain_lpm,
            test_pressure_bar=r.test_pressure_bar,
            oil_temp_c=r.oil_temp_c,
            iso4406=r.iso4406,
        )
        for r, comp in plan.readings
    ]
    if rows:
        conn.execute(db.reading.insert(), rows)


def _select_for_ledger(plan, upload_ids: np.ndarray, skip: set[int]) -> np.ndarray:  # noqa: ANN001
    """Histograms for the ledger, one per (upload, component) not in ``skip``: the last
    pressure-by-speed matrix if there is one, else the first histogram; in order of
    first appearance of the (upload, component)."""
    rows = np.flatnonzero(~np.isin(plan.component_id, list(skip)))
    if not rows.size:
        return rows
    key = group_ids([pd.factorize(upload_ids[rows])[0], pd.factorize(plan.component_id[rows])[0]])
    first = np.unique(key, return_index=True)[1]
    chosen = rows[first]
    ps = np.flatnonzero(plan.batch.quantity[rows] == QUANTITY_PRESSURE_SPEED)
    if ps.size:
        last = np.full(first.size, -1, dtype=np.int64)
        np.maximum.at(last, key[ps], ps)
        chosen = np.where(last >= 0, rows[np.maximum(last, 0)], chosen)
    return chosen


def _append_ledger(conn: Connection, batch: Batch, table: ComponentTable, compute: Compute) -> None:
    """Ledger rows of new uploads, with running totals continued from each component's
    last earlier row; components with stored rows after a new one are refreshed."""
    values = _metrics(conn, batch, table, compute)
    values["hour_meter_end"] = batch.hour_meter_end
    values["meter_hours"] = batch.hour_meter_end - batch.hour_meter_start
    ends_ns = batch.period_end_ns
    order = _ordered(batch, ends_ns)
    comp = batch.component_id[order]
    since = pd.Series(ends_ns[order]).groupby(comp).min()
    base, behind = _tails(conn, since)
    sorted_values = {k: np.asarray(v)[order] for k, v in values.items()}
    cum = _running_totals(comp, sorted_values)
    at = pd.Index(list(base), dtype=np.int64).get_indexer(comp)  # -1: no earlier row
    for c in CUM_COLUMNS:
        b = np.array([totals[c] for totals in base.values()] + [0.0])[at]
        values[c] = np.empty(len(batch))
        values[c][order] = cum[c] + b
    cols = _ledger_columns(conn, batch, values, order)
    insert_columns(conn, db.ledger, LEDGER_COLUMNS, cols)
    if behind:
        first = pd.Timestamp(int(since[list(behind)].min()), tz="UTC").to_pydatetime()
        refresh_cumulative(conn, sorted(behind), first)


def _tails(conn: Connection, since: pd.Series) -> tuple[dict[int, dict], set[int]]:
    """Per component: the running totals of its last row before ``since`` (ns since the
    epoch, per component) and whether it has stored rows at or after ``since``."""
    base: dict[int, dict] = {}
    behind: set[int] = set()
    t, c = db.ledger, db.component
    for bound_ns, comps in since.groupby(since.to_numpy()).groups.items():
        bound = pd.Timestamp(int(bound_ns), tz="UTC").to_pydatetime()
        ids = [int(x) for x in comps]
        la, lb = t.alias("la"), t.alias("lb")
        last = (
            select(la.c.id)
            .where(la.c.component_id == c.c.id, la.c.period_end < bound)
            .order_by(la.c.period_end.desc(), la.c.upload_id.desc())
            .limit(1)
            .correlate(c)
            .scalar_subquery()
        )
        later = select(lb.c.id).where(lb.c.component_id == c.c.id, lb.c.period_end >= bound)
        pts = select(c.c.id.label("cid"), last.label("last_id"), later.exists().label("later"))
        pts = pts.where(c.c.id.in_(ids)).subquery()
        q = select(pts.c.cid, pts.c.later, *[t.c[k] for k in CUM_COLUMNS]).select_from(
            pts.outerjoin(t, t.c.id == pts.c.last_id)
        )
        for row in conn.execute(q).all():
            if row[1]:
                behind.add(int(row[0]))
            if row[2] is not None:
                base[int(row[0])] = dict(zip(CUM_COLUMNS, row[2:], strict=True))
    return base, behind


# --- running totals -----------------------------------------------------------------


def refresh_cumulative(conn: Connection, component_ids: list[int], since) -> None:  # noqa: ANN001
    """Recalculate the running totals of some components from ``since`` on."""
    t = db.ledger
    cols = [
        t.c.id,
        t.c.component_id,
        t.c.period_end,
        t.c.upload_id,
        *[t.c[v] for v in CUM_COLUMNS.values()],
    ]
    ids = [int(c) for c in component_ids]
    later = pd.DataFrame(
        conn.execute(select(*cols).where(t.c.component_id.in_(ids), t.c.period_end >= since)).all(),
        columns=[c.name for c in cols],
    )
    if later.empty:
        return
    base = _base_totals(conn, ids, since)
    later = later.sort_values(["component_id", "period_end", "upload_id"])
    g = later.groupby("component_id")
    for cum, col in CUM_COLUMNS.items():
        later[cum] = g[col].cumsum() + later["component_id"].map(base[cum]).fillna(0.0)
    rows = list(zip(*[later[c].tolist() for c in CUM_COLUMNS], later["id"].tolist(), strict=True))
    update_rows(conn, t, "id", list(CUM_COLUMNS), rows)


def _base_totals(conn: Connection, ids: list[int], since) -> pd.DataFrame:  # noqa: ANN001
    """Running totals of each component's last ledger row before ``since`` (one seek each)."""
    t, c = db.ledger, db.component
    la = t.alias("la")
    last = (
        select(la.c.id)
        .where(la.c.component_id == c.c.id, la.c.period_end < since)
        .order_by(la.c.period_end.desc(), la.c.upload_id.desc())
        .limit(1)
        .correlate(c)
        .scalar_subquery()
    )
    pts = select(c.c.id.label("cid"), last.label("last_id")).where(c.c.id.in_(ids)).subquery()
    q = select(t.c.component_id, *[t.c[k] for k in CUM_COLUMNS]).join(pts, pts.c.last_id == t.c.id)
    df = pd.DataFrame(conn.execute(q).all(), columns=["component_id", *CUM_COLUMNS])
    return df.set_index("component_id")


# --- recompute ----------------------------------------------------------------------


def recompute(
    conn: Connection, compute: Compute, progress: Callable[[int, int], None] | None = None
) -> int:
    """Rebuild the whole ledger from the stored histograms; return the row count."""
    table = component_table(conn)
    ids = sorted(table.model_of)
    written = 0
    with _bulk_phase(conn):
        for start in range(0, len(ids), RECOMPUTE_CHUNK):
            written += _rebuild(conn, ids[start : start + RECOMPUTE_CHUNK], table, compute)
            if progress is not None:
                progress(min(start + RECOMPUTE_CHUNK, len(ids)), len(ids))
    return written


BULK_CACHE_KIB = 262_144
"""SQLite page cache during recompute [KiB]: the ledger's pages being written stay in memory."""

_BULK_INDEXES = ("ix_ledger_component_period", "ix_ledger_component_cum_hours")
"""Ledger indexes built once after a SQLite recompute instead of row by row."""


@contextmanager
def _bulk_phase(conn: Connection) -> Iterator[None]:
    """An empty ledger to fill. SQLite: the table is dropped and created again (a
    ``DELETE`` visits every row, since the table has foreign keys), its secondary
    indexes are built after the fill, and the page cache is larger meanwhile; all of it
    inside the caller's transaction. Elsewhere: ``DELETE``."""
    if conn.dialect.name != "sqlite":
        conn.execute(delete(db.ledger))
        yield
        return
    raw = conn.connection.dbapi_connection
    if not raw.in_transaction:  # the sqlite3 module opens one only before DML, not DDL
        raw.execute("BEGIN")
    db.ledger.drop(conn)
    db.ledger.create(conn)
    later = [ix for ix in db.ledger.indexes if ix.name in _BULK_INDEXES]
    for ix in later:
        ix.drop(conn)
    with page_cache(conn, BULK_CACHE_KIB):
        yield
        for ix in later:
            ix.create(conn)


def _rebuild(conn: Connection, chunk: list[int], table: ComponentTable, compute: Compute) -> int:
    """Write the ledger rows of some components (none stored yet) from their histograms."""
    stored = blocks.of_components(conn, chunk)
    if not len(stored):
        return 0
    batch = ledger_batch(stored)
    values = _metrics(conn, batch, table, compute)
    values["hour_meter_end"] = batch.hour_meter_end
    values["meter_hours"] = batch.hour_meter_end - batch.hour_meter_start
    values.update(_running_totals(batch.component_id, values))
    order = np.arange(len(batch))
    cols = _ledger_columns(conn, batch, values, order)
    insert_columns(conn, db.ledger, LEDGER_COLUMNS, cols)
    return len(batch)


def ledger_batch(stored: blocks.StoredHistograms) -> Batch:
    """The ledger's histograms of stored ones: one per (component, upload), the last
    pressure-by-speed matrix if there is one, else the first histogram; in ledger order
    (component, period end, upload, store order)."""
    b = stored.batch
    comp, upload = stored.component_id, stored.upload_id
    order = np.lexsort((stored.seq, upload, b.period_end_ns, comp))
    is_ps = b.quantity[order] == QUANTITY_PRESSURE_SPEED
    rows = order[ledger_choice(comp[order], upload[order], is_ps)]
    return batch_from_columns(b, rows, comp[rows], upload[rows])


def rebuild_components(
    conn: Connection, comp_ids: list[int], table: ComponentTable, compute: Compute
) -> None:
    """Delete and rewrite the ledger rows of some components from their histograms."""
    conn.execute(delete(db.ledger).where(db.ledger.c.component_id.in_(comp_ids)))
    _rebuild(conn, comp_ids, table, compute)
