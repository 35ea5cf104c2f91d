"""Reads and writes of accepted life factors (table ``rating_change``).

A row is a dated change of one component model's rated L10: the factor that multiplies
the registry's rating, who or what proposed it and on which data. The newest row of a
model that is not undone is in force; undoing marks it, so the one before applies again.
Nothing is computed here.
"""

from __future__ import annotations

from datetime import UTC, datetime

import pandas as pd
from sqlalchemy import Connection, select

from monitor.store import db


def model_ids(conn: Connection) -> dict[str, int]:
    """Component model id by name."""
    m = db.component_model
    return dict(conn.execute(select(m.c.name, m.c.id)).all())


def registry_rating_h(conn: Connection, model: str) -> float | None:
    """The registry's rated L10 of a component model [h] (no factor applied), or None."""
    m = db.component_model
    value = conn.execute(select(m.c.rated_l10_h).where(m.c.name == model)).scalar()
    return None if value is None else float(value)


def history(conn: Connection) -> pd.DataFrame:
    """Every rating change, oldest first: ``id, component_model, factor, proposed_by,
    data_summary, accepted_at, undone_at`` (timestamps UTC)."""
    r, m = db.rating_change, db.component_model
    q = (
        select(
            r.c.id,
            m.c.name.label("component_model"),
            r.c.factor,
            r.c.proposed_by,
            r.c.data_summary,
            r.c.accepted_at,
            r.c.undone_at,
        )
        .join(m, m.c.id == r.c.model_id)
        .order_by(r.c.id)
    )
    df = pd.DataFrame(conn.execute(q).all(), columns=[c.name for c in q.selected_columns])
    for col in ("accepted_at", "undone_at"):
        df[col] = pd.to_datetime(df[col], utc=True)
    return df


def in_force(conn: Connection) -> pd.DataFrame:
    """The change in force per component model (newest not undone), as :func:`history`
    rows; models without one are absent."""
    df = history(conn)
    live = df[df["undone_at"].isna()]
    return live.drop_duplicates("component_model", keep="last").reset_index(drop=True)


def factors_by_model_id(conn: Connection) -> dict[int, float]:
    """The life factor in force per component model id (models without one absent)."""
    r = db.rating_change
    rows = conn.execute(
        select(r.c.model_id, r.c.factor).where(r.c.undone_at.is_(None)).order_by(r.c.id)
    ).all()
    return {int(mid): float(f) for mid, f in rows}  # later rows overwrite earlier ones


def insert(
    conn: Connection, model_id: int, factor: float, proposed_by: str, data_summary: str
) -> datetime:
    """Record an accepted factor for a model; return the time it was accepted (UTC)."""
    now = datetime.now(UTC)
    conn.execute(
        db.rating_change.insert().values(
            model_id=model_id,
            factor=factor,
            proposed_by=proposed_by,
            data_summary=data_summary,
            accepted_at=now,
        )
    )
    return now


def undo_latest(conn: Connection, model_id: int) -> tuple[float, datetime] | None:
    """Mark the model's change in force as undone; return its factor and when it was
    accepted, or None when no change is in force."""
    r = db.rating_change
    row = conn.execute(
        select(r.c.id, r.c.factor, r.c.accepted_at)
        .where(r.c.model_id == model_id, r.c.undone_at.is_(None))
        .order_by(r.c.id.desc())
        .limit(1)
    ).first()
    if row is None:
        return None
    conn.execute(r.update().where(r.c.id == row.id).values(undone_at=datetime.now(UTC)))
    return float(row.factor), row.accepted_at
