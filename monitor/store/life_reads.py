"""Store reads behind calibration: each component's ledger rows and life-starting events.

Nothing is computed here; :mod:`monitor.fleet.lives` cuts the rows into lives. The
convention is that of :mod:`monitor.store.status_reads`: a rebuild or replacement at
time t ends a life, and ledger rows with ``period_end <= t`` belong to that life.
"""

from __future__ import annotations

import pandas as pd
from sqlalchemy import Connection, func, literal, select

from monitor.domain.vocabulary import MISSING_REASON
from monitor.store import db
from monitor.store.status_reads import LIFE_START_KINDS


def _filters(q, model: str | None, site: str | None):  # noqa: ANN001, ANN202 - a select
    if model is not None:
        q = q.where(db.component_model.c.name == model)
    if site is not None:
        q = q.where(db.site.c.name == site)
    return q


def _joined(*cols):  # noqa: ANN002, ANN202 - columns -> a select over component/unit/model/site
    c, u, m, s = db.component, db.unit, db.component_model, db.site
    return (
        select(*cols)
        .select_from(c)
        .join(u, u.c.id == c.c.unit_id)
        .join(m, m.c.id == c.c.model_id)
        .join(s, s.c.id == u.c.site_id)
    )


def life_ledger(conn: Connection, model: str | None = None, site: str | None = None):  # noqa: ANN201
    """Ledger rows of every component (optionally of one model and site), in order.

    Returns
    -------
    pandas.DataFrame
        ``component_id, unit, position, component_model, site, period_end [UTC],
        hours [h], damage [-] (a1 = 1)``, ordered by component and period end.
    """
    c, u, m, s, lg = db.component, db.unit, db.component_model, db.site, db.ledger
    cols = [
        c.c.id.label("component_id"),
        u.c.tag.label("unit"),
        c.c.position,
        m.c.name.label("component_model"),
        s.c.name.label("site"),
        lg.c.period_end,
        lg.c.hours,
        lg.c.damage,
    ]
    q = _joined(*cols).join(lg, lg.c.component_id == c.c.id)
    q = _filters(q, model, site).order_by(c.c.id, lg.c.period_end, lg.c.upload_id)
    df = pd.DataFrame(conn.execute(q).all(), columns=[col.name for col in cols])
    df["period_end"] = pd.to_datetime(df["period_end"], utc=True)
    for col in ("hours", "damage"):
        df[col] = pd.to_numeric(df[col]).astype(float)
    return df


def life_events(conn: Connection, model: str | None = None, site: str | None = None):  # noqa: ANN201
    """Rebuilds and replacements of every component (optionally of one model and site).

    Returns
    -------
    pandas.DataFrame
        ``component_id, at [UTC], kind, reason`` (a missing reason reads ``other``),
        ordered by component and time.
    """
    c, se = db.component, db.service_event
    cols = [
        c.c.id.label("component_id"),
        se.c.at,
        se.c.kind,
        func.coalesce(se.c.reason, literal(MISSING_REASON)).label("reason"),
    ]
    q = _joined(*cols).join(se, se.c.component_id == c.c.id)
    q = _filters(q, model, site).where(se.c.kind.in_(LIFE_START_KINDS))
    q = q.order_by(c.c.id, se.c.at, se.c.id)
    df = pd.DataFrame(conn.execute(q).all(), columns=[col.name for col in cols])
    df["at"] = pd.to_datetime(df["at"], utc=True)
    return df
