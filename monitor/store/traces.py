"""Reads and writes of pressure-trace summaries (table ``trace_summary``).

A trace is stored as an ordinary upload (its histograms go through the same checks and
ledger writes as a histogram file); what only the trace shows is kept beside it as one
JSON document per upload file and component. Nothing is computed here.
"""

from __future__ import annotations

import pandas as pd
from sqlalchemy import Connection, select

from monitor.store import db

SUMMARY_COLUMNS = ["component_id", "position", "file", "received_at", "summary"]


def drive_settings(conn: Connection, tag: str, position: str) -> dict | None:
    """The component at ``tag``/``position`` with its model's relief and cut-off settings
    (keys ``component_id``, ``model``, ``relief_bar``, ``cutoff_bar``), or None."""
    c, u, m = db.component, db.unit, db.component_model
    q = (
        select(
            c.c.id.label("component_id"),
            m.c.name.label("model"),
            m.c.relief_bar,
            m.c.cutoff_bar,
        )
        .join(u, c.c.unit_id == u.c.id)
        .join(m, c.c.model_id == m.c.id)
        .where(u.c.tag == tag, c.c.position == position)
    )
    row = conn.execute(q).mappings().first()
    return None if row is None else dict(row)


def insert_summary(conn: Connection, file_id: int, component_id: int, summary_json: str) -> None:
    """Keep a trace's summary (JSON text) with the upload file it was stored as."""
    conn.execute(
        db.trace_summary.insert().values(
            file_id=file_id, component_id=component_id, summary=summary_json
        )
    )


def unit_summaries(conn: Connection, unit_id: int) -> pd.DataFrame:
    """Trace summaries of one unit's components, oldest stored first.

    Columns :data:`SUMMARY_COLUMNS`; ``summary`` is the stored JSON text.
    """
    t, c, f = db.trace_summary, db.component, db.upload_file
    q = (
        select(
            t.c.component_id,
            c.c.position,
            f.c.name.label("file"),
            f.c.received_at,
            t.c.summary,
        )
        .join(c, t.c.component_id == c.c.id)
        .join(f, t.c.file_id == f.c.id)
        .where(c.c.unit_id == unit_id)
        .order_by(c.c.position, t.c.id)
    )
    rows = conn.execute(q).all()
    return pd.DataFrame(rows, columns=SUMMARY_COLUMNS)
