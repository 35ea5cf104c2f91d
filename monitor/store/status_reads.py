"""Store reads behind a fleet status: running totals at a few points in time.

A status needs, per component, the ledger's running totals (``cum_*``) at four
points: at the as-of instant, at the last rebuild, at the start of the rate window
and one utilisation period before the as-of instant. Each point is the latest
ledger row at or before some bound, found with a correlated sub-select per
component that the ``(component_id, period_end)`` and ``(component_id, cum_hours)``
indexes answer with one seek each, so the cost grows with the number of
components, not with the number of uploads.

Nothing is computed here beyond differences' inputs; the engineering is in
:mod:`monitor.fleet`. Timestamps go in and come out as timezone-aware UTC.

Conventions
-----------
- Uploads with ``period_end <= as_of`` count; a rebuild or replacement at or
  before ``as_of`` starts a new life: uploads with ``period_end <= rebuilt_at`` and
  readings with ``taken_at < rebuilt_at`` belong to the old one.
"""

from __future__ import annotations

from datetime import UTC, datetime, timedelta
from itertools import chain

import numpy as np
import pandas as pd
from sqlalchemy import Connection, and_, case, func, literal, null, select

from monitor.domain.vocabulary import MISSING_REASON
from monitor.store import blocks, db, queries

LIFE_START_KINDS = ("rebuild", "replacement")
"""Service-event kinds that start a new life of a component."""

TOTALS = (
    "cum_meter_hours",
    "cum_hours",
    "cum_damage",
    "cum_relief_hours",
    "cum_cutoff_hours",
    "cum_relief_heat_kwh",
    "cum_kappa_floor_hours",
)
"""Running-total columns of the ledger read at each point."""

EARLY_DAYS = 30
"""Logged days whose damage rate charges the hours between the last known rebuild and the
first upload (``last_rebuild_hour_meter`` in the registry) [d]."""

_POINTS = ("now", "base", "win", "month")


def _utc(ts: datetime) -> datetime:
    return ts.replace(tzinfo=UTC) if ts.tzinfo is None else ts.astimezone(UTC)


def _rebuilt_at(as_of: datetime, comp_id):  # noqa: ANN001, ANN202 - SQL expressions
    """Correlated sub-select: time of the component's last rebuild at or before as_of."""
    se = db.service_event.alias("se")
    return (
        select(func.max(se.c.at))
        .where(se.c.component_id == comp_id, se.c.kind.in_(LIFE_START_KINDS), se.c.at <= as_of)
        .correlate_except(se)
        .scalar_subquery()
    )


def _latest_id(comp_id, bound):  # noqa: ANN001, ANN202 - SQL expressions
    """Correlated sub-select: id of the last ledger row with period_end <= bound."""
    la = db.ledger.alias()
    return (
        select(la.c.id)
        .where(la.c.component_id == comp_id, la.c.period_end <= bound)
        .order_by(la.c.period_end.desc(), la.c.upload_id.desc())
        .limit(1)
        .correlate_except(la)
        .scalar_subquery()
    )


def _first_meter(comp_id):  # noqa: ANN001, ANN202 - SQL expressions
    """Correlated sub-select: hour meter at the start of the component's first ledger row."""
    la = db.ledger.alias()
    return (
        select(la.c.hour_meter_end - la.c.meter_hours)
        .where(la.c.component_id == comp_id)
        .order_by(la.c.period_end, la.c.upload_id)
        .limit(1)
        .correlate_except(la)
        .scalar_subquery()
    )


def early_rates(conn: Connection, component_ids: list[int]) -> pd.DataFrame:
    """Damage [-] and hour-meter hours [h] of each component's first :data:`EARLY_DAYS`
    logged days (rows whose period ends within that many days of the first row's end)."""
    t = db.ledger
    out = []
    for cid in component_ids:
        q = (
            select(t.c.period_end, t.c.damage, t.c.meter_hours)
            .where(t.c.component_id == int(cid))
            .order_by(t.c.period_end, t.c.upload_id)
            .limit(40 * EARLY_DAYS)
        )
        df = pd.DataFrame(conn.execute(q).all(), columns=["period_end", "damage", "meter_hours"])
        if df.empty:
            continue
        ends = pd.to_datetime(df["period_end"], utc=True)
        early = df[ends <= ends.iloc[0] + pd.Timedelta(days=EARLY_DAYS)]
        out.append((int(cid), early["damage"].sum(), early["meter_hours"].sum()))
    return pd.DataFrame(out, columns=["component_id", "early_damage", "early_meter_hours"])


def _point_ids(as_of: datetime, utilisation_days: float, component_ids: list[int] | None):
    """Sub-query: component id, rebuild time and the ledger row ids of now/base/month."""
    c = db.component
    rebuilt = _rebuilt_at(as_of, c.c.id)
    month_bound = as_of - timedelta(days=utilisation_days)
    q = select(
        c.c.id.label("component_id"),
        rebuilt.label("rebuilt_at"),
        _latest_id(c.c.id, as_of).label("now_id"),
        _latest_id(c.c.id, rebuilt).label("base_id"),
        _latest_id(c.c.id, month_bound).label("month_id"),
    )
    if component_ids is not None:
        q = q.where(c.c.id.in_([int(i) for i in component_ids]))
    return q.subquery("pts")


CUM_TOLERANCE_H = 1e-9
"""Rounding allowance when comparing running totals of hours [h]."""


def _window_id(pts, now, rate_window_h: float):  # noqa: ANN001, ANN202
    """Correlated sub-select: last row whose cum_hours <= now.cum_hours - window.

    Running totals are sums of floats: a window met exactly (to rounding) counts as met.
    """
    lw = db.ledger.alias("lw")
    return (
        select(lw.c.id)
        .where(
            lw.c.component_id == pts.c.component_id,
            lw.c.cum_hours <= now.c.cum_hours - rate_window_h + CUM_TOLERANCE_H,
        )
        .order_by(lw.c.cum_hours.desc(), lw.c.period_end.desc(), lw.c.upload_id.desc())
        .limit(1)
        .correlate(pts, now)
        .scalar_subquery()
    )


def ledger_points(
    conn: Connection,
    as_of: datetime,
    *,
    rate_window_h: float,
    utilisation_days: float = 30.0,
    component_ids: list[int] | None = None,
) -> pd.DataFrame:
    """Running totals of every component at the four points a status needs.

    Parameters
    ----------
    conn : Connection
        Open connection.
    as_of : datetime
        The as-of instant (tz-aware; the start of the as-of day) [UTC].
    rate_window_h : float
        Operating hours of the damage-rate window [h].
    utilisation_days : float
        Length of the utilisation period before ``as_of`` [d].
    component_ids : list of int, optional
        Restrict to these components.

    Returns
    -------
    pandas.DataFrame
        One row per component: ``component_id``, ``rebuilt_at`` (or NaT) and, for
        each point ``now``, ``base`` (last row of the old life), ``win`` (last row
        before the rate window, unclamped) and ``month``, the columns
        ``<point>_period_end`` [UTC], ``<point>_hour_meter_end`` [h] and
        ``<point>_<cum column>`` (totals [h], damage at a1 = 1 [-], heat [kWh]).
        A point with no ledger row has NaN/NaT values.
    """
    as_of = _utc(as_of)
    pts = _point_ids(as_of, utilisation_days, component_ids)
    aliases = {p: db.ledger.alias(p) for p in _POINTS}
    now = aliases["now"]
    win_id = _window_id(pts, now, rate_window_h)
    cols = [pts.c.component_id, pts.c.rebuilt_at]
    for p, a in aliases.items():
        cols += [
            a.c.period_end.label(f"{p}_period_end"),
            a.c.hour_meter_end.label(f"{p}_hour_meter_end"),
        ]
        cols += [a.c[t].label(f"{p}_{t}") for t in TOTALS]
    cols += [now.c.oil_temp_c.label("now_oil_temp_c")]
    cols += [now.c.oil_factor_source.label("now_oil_factor_source")]
    cols += [_first_meter(pts.c.component_id).label("first_hour_meter")]
    frm = pts.outerjoin(now, now.c.id == pts.c.now_id)
    frm = frm.outerjoin(aliases["base"], aliases["base"].c.id == pts.c.base_id)
    frm = frm.outerjoin(aliases["month"], aliases["month"].c.id == pts.c.month_id)
    inner = select(
        *cols[:2],
        now.c.cum_hours.label("_nh"),
        win_id.label("win_id"),
        *[c for c in cols[2:] if not c.name.startswith("win_")],
    ).select_from(frm)
    inner = inner.subquery("inner")
    win = aliases["win"]
    outer_cols = [c for c in inner.c if c.name not in ("_nh", "win_id")]
    outer_cols += [
        win.c.period_end.label("win_period_end"),
        win.c.hour_meter_end.label("win_hour_meter_end"),
    ]
    outer_cols += [win.c[t].label(f"win_{t}") for t in TOTALS]
    q = select(*outer_cols).select_from(inner.outerjoin(win, win.c.id == inner.c.win_id))
    return _typed(_plain_rows(conn, q), [c.name for c in q.selected_columns])


def _typed(rows: list[tuple], names: list[str]) -> pd.DataFrame:
    """Frame of the driver's rows: times parsed once per column (SQLite gives ISO text,
    PostgreSQL datetimes) to UTC, the other columns float, ``component_id`` int64."""
    cols = list(zip(*rows, strict=True)) if rows else [()] * len(names)
    out = {}
    for name, col in zip(names, cols, strict=True):
        if name == "rebuilt_at" or name.endswith("_period_end"):
            values = pd.Series(col, dtype=object)
            out[name] = pd.to_datetime(values, utc=True, format="ISO8601")
        elif name == "component_id":
            out[name] = np.array(col, dtype=np.int64)
        elif name == "now_oil_factor_source":
            out[name] = np.array(col, dtype=object)
        else:
            out[name] = np.array(col, dtype=float)
    return pd.DataFrame(out).sort_values("component_id", ignore_index=True)


def status_inputs(
    conn: Connection,
    as_of: datetime,
    *,
    rate_window_h: float,
    utilisation_days: float = 30.0,
    site: str | None = None,
    unit_tag: str | None = None,
) -> pd.DataFrame:
    """Components (with unit, site, oil and model data) joined to their ledger points.

    Parameters
    ----------
    conn : Connection
        Open connection.
    as_of : datetime
        The as-of instant [UTC].
    rate_window_h : float
        Rate window [h].
    utilisation_days : float
        Utilisation period [d].
    site, unit_tag : str, optional
        Restrict to one site or one unit.

    Returns
    -------
    pandas.DataFrame
        The columns of :func:`monitor.store.queries.components_frame` plus those of
        :func:`ledger_points`.
    """
    comps = queries.components_frame(conn)
    if site is not None:
        comps = comps[comps["site"] == site]
    if unit_tag is not None:
        comps = comps[comps["unit"] == unit_tag]
    ids = None if site is None and unit_tag is None else comps["component_id"].tolist()
    pts = ledger_points(
        conn,
        as_of,
        rate_window_h=rate_window_h,
        utilisation_days=utilisation_days,
        component_ids=ids,
    )
    out = comps.merge(pts, on="component_id", how="left").reset_index(drop=True)
    charged = out.loc[out["last_rebuild_hour_meter"].notna(), "component_id"].tolist()
    early = early_rates(conn, charged)
    return out.merge(early, on="component_id", how="left")


def readings_in_life(
    conn: Connection, as_of: datetime, component_ids: list[int] | None = None
) -> pd.DataFrame:
    """Case-drain readings of each component's current life, taken before as_of.

    Parameters
    ----------
    conn : Connection
        Open connection.
    as_of : datetime
        The as-of instant [UTC]; readings with ``taken_at < as_of`` count.
    component_ids : list of int, optional
        Restrict to these components.

    Returns
    -------
    pandas.DataFrame
        ``component_id, hour_meter [h], case_drain_lpm [L/min], test_pressure_bar [bar],
        oil_temp_c [degC]``, ordered by component and time of the reading; only
        readings with a case-drain value taken at or after the last rebuild. (The time
        itself is left out: parsing it is most of the cost of this read.)
    """
    as_of = _utc(as_of)
    r, se = db.reading, db.service_event
    last = (
        select(se.c.component_id, func.max(se.c.at).label("rebuilt_at"))
        .where(se.c.kind.in_(LIFE_START_KINDS), se.c.at <= as_of, se.c.component_id.is_not(None))
        .group_by(se.c.component_id)
        .subquery("rb")
    )
    q = (
        select(
            r.c.component_id,
            r.c.hour_meter,
            r.c.case_drain_lpm,
            r.c.test_pressure_bar,
            r.c.oil_temp_c,
        )
        .select_from(r.outerjoin(last, last.c.component_id == r.c.component_id))
        .where(
            r.c.taken_at < as_of,
            r.c.case_drain_lpm.is_not(None),
            (last.c.rebuilt_at.is_(None)) | (r.c.taken_at >= last.c.rebuilt_at),
        )
        .order_by(r.c.component_id, r.c.taken_at)
    )
    if component_ids is not None:
        q = q.where(r.c.component_id.in_([int(i) for i in component_ids]))
    cols = [
        "component_id",
        "hour_meter",
        "case_drain_lpm",
        "test_pressure_bar",
        "oil_temp_c",
    ]
    values = _float_matrix(conn, q, len(cols))
    df = pd.DataFrame(values[:, 1:], columns=cols[1:])
    df.insert(0, "component_id", values[:, 0].astype(np.int64))
    return df


def _float_matrix(conn: Connection, q, width: int) -> np.ndarray:  # noqa: ANN001 - a select
    """(rows, width) float array of a query of numbers; NULL -> nan.

    ``np.fromiter`` over the driver's cursor takes each row as it comes: no list of row
    tuples is built (each tuple is freed at once, which also spares the garbage collector
    its passes over them). It takes no None, so a NULL sends the read, once more, the
    ``np.array`` way.
    """
    res = conn.execute(q)
    try:
        flat = np.fromiter(chain.from_iterable(res.cursor or ()), dtype=float)
    except TypeError:
        flat = None
    finally:
        res.close()
    if flat is None:
        return np.array(_plain_rows(conn, q), dtype=float).reshape(-1, width)
    return flat.reshape(-1, width)


def _plain_rows(conn: Connection, q) -> list[tuple]:  # noqa: ANN001 - a select
    """Rows of a query of plain numbers as the driver's tuples, without building Row
    objects (most of the cost of a large read); the columns need no result conversion."""
    res = conn.execute(q)
    try:
        return list(res.cursor.fetchall()) if res.cursor is not None else []
    finally:
        res.close()


# --- per-unit detail ----------------------------------------------------------------


def unit_row(conn: Connection, tag: str) -> dict | None:
    """Tag, site, machine type and oil of one unit, or None if it is not registered."""
    u, s, o = db.unit, db.site, db.oil
    q = (
        select(u.c.id, u.c.tag, s.c.name.label("site"), u.c.machine_type, o.c.name.label("oil"))
        .join(s, s.c.id == u.c.site_id)
        .join(o, o.c.id == u.c.oil_id)
        .where(u.c.tag == tag)
    )
    row = conn.execute(q).mappings().first()
    return dict(row) if row is not None else None


def unit_tags(conn: Connection) -> list[str]:
    """Every registered unit tag, sorted."""
    return list(conn.execute(select(db.unit.c.tag).order_by(db.unit.c.tag)).scalars())


def ledger_rows(
    conn: Connection, component_id: int, since: datetime | None, as_of: datetime
) -> pd.DataFrame:
    """Ledger rows of one component with ``since < period_end <= as_of``, in order.

    Returns
    -------
    pandas.DataFrame
        ``upload_id, period_end [UTC], hour_meter_end [h], meter_hours [h], hours [h],
        damage [-] (a1 = 1), relief_hours [h], cutoff_hours [h], relief_heat_kwh [kWh]``.
    """
    t = db.ledger
    cols = [
        t.c.upload_id,
        t.c.period_end,
        t.c.hour_meter_end,
        t.c.meter_hours,
        t.c.hours,
        t.c.damage,
        t.c.relief_hours,
        t.c.cutoff_hours,
        t.c.relief_heat_kwh,
    ]
    cond = [t.c.component_id == int(component_id), t.c.period_end <= _utc(as_of)]
    if since is not None:
        cond.append(t.c.period_end > _utc(since))
    q = select(*cols).where(and_(*cond)).order_by(t.c.period_end, t.c.upload_id)
    df = pd.DataFrame(conn.execute(q).all(), columns=[c.name for c in cols])
    df["period_end"] = pd.to_datetime(df["period_end"], utc=True)
    return df


def histogram_rows(conn: Connection, component_id: int, upload_ids: list[int]):  # noqa: ANN201
    """Stored histograms of one component for some uploads (as Histogram records, in
    order of quantity and period start)."""
    return blocks.of_uploads(conn, component_id, upload_ids)


def component_readings(conn: Connection, component_id: int, as_of: datetime) -> pd.DataFrame:
    """Every reading of one component taken before as_of (all lives), oldest first."""
    r = db.reading
    cols = [
        r.c.taken_at,
        r.c.hour_meter,
        r.c.case_drain_lpm,
        r.c.test_pressure_bar,
        r.c.oil_temp_c,
        r.c.iso4406,
    ]
    q = (
        select(*cols)
        .where(r.c.component_id == int(component_id), r.c.taken_at < _utc(as_of))
        .order_by(r.c.taken_at)
    )
    df = pd.DataFrame(conn.execute(q).all(), columns=[c.name for c in cols])
    df["taken_at"] = pd.to_datetime(df["taken_at"], utc=True)
    for col in ("hour_meter", "case_drain_lpm", "test_pressure_bar", "oil_temp_c"):
        df[col] = pd.to_numeric(df[col]).astype(float)
    return df


def recent_uploads(
    conn: Connection, unit_id: int, as_of: datetime, limit: int = 20
) -> pd.DataFrame:
    """The unit's latest uploads ending at or before as_of, newest first, with file name."""
    u, f = db.upload, db.upload_file
    q = (
        select(
            u.c.period_start,
            u.c.period_end,
            u.c.hour_meter_start,
            u.c.hour_meter_end,
            f.c.name.label("file"),
        )
        .join(f, f.c.id == u.c.file_id)
        .where(u.c.unit_id == int(unit_id), u.c.period_end <= _utc(as_of))
        .order_by(u.c.period_end.desc(), u.c.id.desc())
        .limit(limit)
    )
    df = pd.DataFrame(conn.execute(q).all(), columns=[c.name for c in q.selected_columns])
    for col in ("period_start", "period_end"):
        df[col] = pd.to_datetime(df[col], utc=True)
    return df


def service_history(conn: Connection, unit_id: int) -> pd.DataFrame:
    """Service events of one unit, oldest first: at, position, kind, reason, hour_meter,
    new_hour_meter, note. A rebuild or replacement without a reason reads ``other``; an
    hour-meter change has none."""
    se, c = db.service_event, db.component
    reason = case(
        (se.c.kind.in_(LIFE_START_KINDS), func.coalesce(se.c.reason, literal(MISSING_REASON))),
        else_=null(),
    )
    q = (
        select(
            se.c.at,
            func.coalesce(c.c.position, literal("(unit)")).label("position"),
            se.c.kind,
            reason.label("reason"),
            se.c.hour_meter,
            se.c.new_hour_meter,
            se.c.note,
        )
        .select_from(se.outerjoin(c, c.c.id == se.c.component_id))
        .where(se.c.unit_id == int(unit_id))
        .order_by(se.c.at, se.c.id)
    )
    df = pd.DataFrame(conn.execute(q).all(), columns=[c.name for c in q.selected_columns])
    df["at"] = pd.to_datetime(df["at"], utc=True)
    return df
