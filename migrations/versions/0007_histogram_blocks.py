"""histograms stored in blocks

One ``histogram_block`` row per stored file, component and quantity holds that file's
histograms as little-endian arrays (see ``monitor.store.blocks``) instead of one
``histogram`` row each. The upgrade converts every stored histogram (component by
component, so memory stays bounded) and drops the ``histogram`` table; the downgrade
writes one row per histogram again. Ledger, uploads and readings are not touched: the
ranking, the ledger and duplicate detection are the same before and after.

Blocks keep no content hash: they hold everything a histogram's hash is made of, so
the checks at ingest compute it when a new file overlaps stored periods; the downgrade
computes it for the ``content_sha256`` column of revision 0006.

This file keeps its own copy of the block layout of revision 0007, so it converts the
same way whatever the package's code does later.

Revision ID: 0007
Revises: 0006
Create Date: 2026-12-02 12:00:00
"""

import hashlib
from datetime import UTC, datetime, timedelta

import numpy as np
import sqlalchemy as sa
from alembic import op

revision = "0007"
down_revision = "0006"
branch_labels = None
depends_on = None

TS = sa.DateTime(timezone=True)
CHUNK = 200  # components per conversion round
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
EDGES = ("pressure_low_bar", "pressure_high_bar", "speed_low_rpm", "speed_high_rpm")
_EPOCH = datetime(1970, 1, 1, tzinfo=UTC)

HISTOGRAM = sa.table(
    "histogram",
    sa.column("id", sa.Integer()),
    sa.column("upload_id", sa.Integer()),
    sa.column("component_id", sa.Integer()),
    sa.column("quantity", sa.String()),
    sa.column("period_start", TS),
    sa.column("period_end", TS),
    sa.column("n_pressure", sa.Integer()),
    sa.column("n_speed", sa.Integer()),
    sa.column("pressure_bands", sa.LargeBinary()),
    sa.column("speed_bands", sa.LargeBinary()),
    sa.column("hours", sa.LargeBinary()),
    sa.column("total_hours", sa.Float()),
    sa.column("mean_speed_rpm", sa.Float()),
    sa.column("oil_temp_c", sa.Float()),
    sa.column("content_sha256", sa.String()),
)
UPLOAD = sa.table(
    "upload",
    sa.column("id", sa.Integer()),
    sa.column("file_id", sa.Integer()),
    sa.column("hour_meter_start", sa.Float()),
    sa.column("hour_meter_end", sa.Float()),
)
BLOCK_ARRAYS = [n for n, _ in PER_HISTOGRAM] + list(EDGES) + ["hours"]
BLOCK = sa.table(
    "histogram_block",
    sa.column("id", sa.Integer()),
    sa.column("file_id", sa.Integer()),
    sa.column("component_id", sa.Integer()),
    sa.column("quantity", sa.String()),
    sa.column("n_histograms", sa.Integer()),
    sa.column("first_start", TS),
    sa.column("last_end", TS),
    sa.column("bands_shared", sa.Boolean()),
    *(sa.column(n, sa.LargeBinary()) for n in BLOCK_ARRAYS),
)


def _keys(table: str, column: str, target: str) -> list:
    """The foreign key ``table.column`` -> ``target.id`` (deleted with its target)."""
    name = op.f(f"fk_{table}_{column}_{target}")
    return [sa.ForeignKeyConstraint([column], [f"{target}.id"], name=name, ondelete="CASCADE")]


def _ns(t: datetime) -> int:
    """A stored time (naive in SQLite: UTC) -> int64 ns since the epoch."""
    if t.tzinfo is None:
        t = t.replace(tzinfo=UTC)
    return (t - _EPOCH) // timedelta(microseconds=1) * 1000


def _dt(ns: int) -> datetime:
    return _EPOCH + timedelta(microseconds=int(ns) // 1000)


def _f8(values) -> bytes:  # noqa: ANN001
    return np.ascontiguousarray(values, dtype="<f8").tobytes()


def _block(rows: list) -> dict:
    """One block from histogram rows (mappings with the upload's file and meters) of one
    file, component and quantity, in id order."""
    n = len(rows)
    n_p = np.array([r["n_pressure"] for r in rows], dtype=np.int64)
    n_s = np.array([r["n_speed"] for r in rows], dtype=np.int64)
    pb = [np.frombuffer(r["pressure_bands"], dtype="<f8") for r in rows]
    sb = [np.frombuffer(r["speed_bands"] or b"", dtype="<f8") for r in rows]
    edges = {
        "pressure_low_bar": [a[: len(a) // 2] for a in pb],
        "pressure_high_bar": [a[len(a) // 2 :] for a in pb],
        "speed_low_rpm": [a[: len(a) // 2] for a in sb],
        "speed_high_rpm": [a[len(a) // 2 :] for a in sb],
    }
    shared = bool((n_p == n_p[0]).all() and (n_s == n_s[0]).all()) and all(
        np.array_equal(a, v[0]) for v in edges.values() for a in v
    )
    starts = [_ns(r["period_start"]) for r in rows]
    ends = [_ns(r["period_end"]) for r in rows]
    per = {
        "upload_id": [r["upload_id"] for r in rows],
        "period_start_ns": starts,
        "period_end_ns": ends,
        "hour_meter_start": [r["hour_meter_start"] for r in rows],
        "hour_meter_end": [r["hour_meter_end"] for r in rows],
        "mean_speed_rpm": [
            np.nan if r["mean_speed_rpm"] is None else r["mean_speed_rpm"] for r in rows
        ],
        "oil_temp_c": [np.nan if r["oil_temp_c"] is None else r["oil_temp_c"] for r in rows],
        "n_pressure": n_p,
        "n_speed": n_s,
    }
    out = {
        "file_id": rows[0]["file_id"],
        "component_id": rows[0]["component_id"],
        "quantity": rows[0]["quantity"],
        "n_histograms": n,
        "first_start": _dt(min(starts)),
        "last_end": _dt(max(ends)),
        "bands_shared": shared,
        "hours": b"".join(r["hours"] for r in rows),
    }
    for name, dt in PER_HISTOGRAM:
        out[name] = np.ascontiguousarray(per[name], dtype=dt).tobytes()
    for k, runs in edges.items():
        out[k] = _f8(runs[0] if shared else np.concatenate(runs) if runs else [])
    return out


def upgrade() -> None:
    op.create_table(
        "histogram_block",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("file_id", sa.Integer(), nullable=False),
        sa.Column("component_id", sa.Integer(), nullable=False),
        sa.Column("quantity", sa.String(length=16), nullable=False),
        sa.Column("n_histograms", sa.Integer(), nullable=False),
        sa.Column("first_start", TS, nullable=False),
        sa.Column("last_end", TS, nullable=False),
        sa.Column("bands_shared", sa.Boolean(), nullable=False),
        *(sa.Column(n, sa.LargeBinary(), nullable=False) for n in BLOCK_ARRAYS),
        *_keys("histogram_block", "file_id", "upload_file"),
        *_keys("histogram_block", "component_id", "component"),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_histogram_block")),
    )
    op.create_index(
        "ix_histogram_block_first",
        "histogram_block",
        ["component_id", "quantity", "first_start"],
        unique=True,
    )
    op.create_index(
        "ix_histogram_block_last", "histogram_block", ["component_id", "quantity", "last_end"]
    )
    bind = op.get_bind()
    h, u = HISTOGRAM, UPLOAD
    comps = [
        r[0]
        for r in bind.execute(sa.select(h.c.component_id).distinct().order_by(h.c.component_id))
    ]
    for i in range(0, len(comps), CHUNK):
        q = (
            sa.select(h, u.c.file_id, u.c.hour_meter_start, u.c.hour_meter_end)
            .join(u, u.c.id == h.c.upload_id)
            .where(h.c.component_id.in_(comps[i : i + CHUNK]))
            .order_by(u.c.file_id, h.c.component_id, h.c.quantity, h.c.id)
        )
        out, group, key = [], [], None
        for r in bind.execute(q).mappings():
            k = (r["file_id"], r["component_id"], r["quantity"])
            if k != key and group:
                out.append(_block(group))
                group = []
            key = k
            group.append(r)
        if group:
            out.append(_block(group))
        if out:
            bind.execute(BLOCK.insert(), out)
    op.drop_index("ix_histogram_component_period", table_name="histogram")
    op.drop_table("histogram")


def _digest(quantity: str, start: datetime, end: datetime, meters, arrays: list) -> str:  # noqa: ANN001
    """A histogram's content hash as revision 0006 stored it: quantity, period, hour
    meters, then its band edges and hours rounded to 9 decimals."""
    m = hashlib.sha256()
    m.update(f"{quantity}|{start.isoformat()}|{end.isoformat()}|".encode())
    m.update(f"{meters[0]:.6f}|{meters[1]:.6f}|".encode())
    for a in arrays:
        m.update(np.round(np.asarray(a, dtype=float), 9).tobytes())
    return m.hexdigest()


def _rows(r) -> list[dict]:  # noqa: ANN001 - a block row mapping
    """The histogram rows (revision 0006) of one block."""
    n = r["n_histograms"]
    per = {name: np.frombuffer(r[name], dtype=dt) for name, dt in PER_HISTOGRAM}
    n_p, n_s = per["n_pressure"].astype(np.int64), per["n_speed"].astype(np.int64)
    edges = {k: np.frombuffer(r[k], dtype="<f8") for k in EDGES}
    if r["bands_shared"] and n > 1:
        edges = {k: np.tile(v, n) for k, v in edges.items()}
    hours = np.frombuffer(r["hours"], dtype="<f8")
    p_off = np.r_[0, np.cumsum(n_p)]
    s_off = np.r_[0, np.cumsum(n_s)]
    h_off = np.r_[0, np.cumsum(n_p * np.maximum(n_s, 1))]
    out = []
    for i in range(n):
        p = slice(p_off[i], p_off[i + 1])
        s = slice(s_off[i], s_off[i + 1])
        h = hours[h_off[i] : h_off[i + 1]]
        mean, oil = float(per["mean_speed_rpm"][i]), float(per["oil_temp_c"][i])
        start, end = _dt(per["period_start_ns"][i]), _dt(per["period_end_ns"][i])
        meters = float(per["hour_meter_start"][i]), float(per["hour_meter_end"][i])
        band_runs = [edges[k][p if k.startswith("pressure") else s] for k in EDGES]
        out.append(
            {
                "upload_id": int(per["upload_id"][i]),
                "component_id": r["component_id"],
                "quantity": r["quantity"],
                "period_start": start,
                "period_end": end,
                "n_pressure": int(n_p[i]),
                "n_speed": int(n_s[i]),
                "pressure_bands": _f8(
                    np.r_[edges["pressure_low_bar"][p], edges["pressure_high_bar"][p]]
                ),
                "speed_bands": _f8(np.r_[edges["speed_low_rpm"][s], edges["speed_high_rpm"][s]])
                if n_s[i]
                else None,
                "hours": _f8(h),
                "total_hours": float(np.sum(h)),
                "mean_speed_rpm": None if mean != mean else mean,
                "oil_temp_c": None if oil != oil else oil,
                "content_sha256": _digest(r["quantity"], start, end, meters, [*band_runs, h]),
            }
        )
    return out


def downgrade() -> None:
    op.create_table(
        "histogram",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("upload_id", sa.Integer(), nullable=False),
        sa.Column("component_id", sa.Integer(), nullable=False),
        sa.Column("quantity", sa.String(length=16), nullable=False),
        sa.Column("period_start", TS, nullable=False),
        sa.Column("period_end", TS, nullable=False),
        sa.Column("n_pressure", sa.Integer(), nullable=False),
        sa.Column("n_speed", sa.Integer(), nullable=False),
        sa.Column("pressure_bands", sa.LargeBinary(), nullable=False),
        sa.Column("speed_bands", sa.LargeBinary()),
        sa.Column("hours", sa.LargeBinary(), nullable=False),
        sa.Column("total_hours", sa.Float(), nullable=False),
        sa.Column("mean_speed_rpm", sa.Float()),
        sa.Column("oil_temp_c", sa.Float()),
        sa.Column("content_sha256", sa.String(length=64), nullable=False),
        *_keys("histogram", "upload_id", "upload"),
        *_keys("histogram", "component_id", "component"),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_histogram")),
    )
    op.create_index(
        "ix_histogram_component_period",
        "histogram",
        ["component_id", "quantity", "period_start"],
        unique=True,
    )
    bind = op.get_bind()
    ids = [r[0] for r in bind.execute(sa.select(BLOCK.c.id).order_by(BLOCK.c.id))]
    for i in range(0, len(ids), CHUNK):
        q = sa.select(BLOCK).where(BLOCK.c.id.in_(ids[i : i + CHUNK])).order_by(BLOCK.c.id)
        rows = [x for r in bind.execute(q).mappings() for x in _rows(r)]
        if rows:
            bind.execute(HISTOGRAM.insert(), rows)
    op.drop_index("ix_histogram_block_last", table_name="histogram_block")
    op.drop_index("ix_histogram_block_first", table_name="histogram_block")
    op.drop_table("histogram_block")
