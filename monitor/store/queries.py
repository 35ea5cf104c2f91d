"""Reads and writes on the store, one small function per question.

Every function takes an open SQLAlchemy ``Connection`` (from
:func:`monitor.store.db.transaction`) and returns plain values, record dataclasses or
DataFrames. No engineering is computed here.
"""

from __future__ import annotations

import dataclasses
import json
from collections.abc import Iterable
from datetime import UTC, datetime

import pandas as pd
from sqlalchemy import Connection, and_, func, select, update

from monitor.domain.specs import ComponentModelSpec, OilSpec, Registry, ServiceSpec, UnitSpec
from monitor.store import blocks, db


@dataclasses.dataclass(frozen=True)
class UpsertCounts:
    """How many registry rows an import created, changed and left as they were."""

    created: int = 0
    updated: int = 0
    unchanged: int = 0

    def __add__(self, other: UpsertCounts) -> UpsertCounts:
        return UpsertCounts(
            self.created + other.created,
            self.updated + other.updated,
            self.unchanged + other.unchanged,
        )


def _upsert(conn: Connection, table, key: dict, values: dict) -> tuple[int, UpsertCounts]:  # noqa: ANN001
    """Insert or update one row identified by ``key``; return its id and what happened."""
    cond = and_(*[table.c[k] == v for k, v in key.items()])
    row = conn.execute(select(table).where(cond)).mappings().first()
    if row is None:
        rid = conn.execute(table.insert().values(**key, **values)).inserted_primary_key[0]
        return rid, UpsertCounts(created=1)
    changed = {k: v for k, v in values.items() if not _same(row[k], v)}
    if changed:
        conn.execute(table.update().where(table.c.id == row["id"]).values(**changed))
        return row["id"], UpsertCounts(updated=1)
    return row["id"], UpsertCounts(unchanged=1)


def _same(stored, new) -> bool:  # noqa: ANN001
    if isinstance(stored, datetime) and isinstance(new, datetime):
        return _utc(stored) == _utc(new)
    if isinstance(stored, float) and isinstance(new, (int, float)):
        return abs(stored - new) <= 1e-12 * max(1.0, abs(new))
    return stored == new


def _utc(ts: datetime) -> datetime:
    """Timestamps come back naive from SQLite: they are stored in UTC."""
    return ts.replace(tzinfo=UTC) if ts.tzinfo is None else ts.astimezone(UTC)


def upsert_registry(conn: Connection, reg: Registry) -> UpsertCounts:
    """Write a parsed fleet registry: insert new entries, update changed ones.

    Entries missing from the file are left in place (a registry file may describe
    part of a fleet). Importing the same file twice changes nothing.
    """
    counts = UpsertCounts()
    ids: dict[tuple[str, str], int] = {}
    for s in reg.sites:
        vals = {"contamination_level": s.contamination_level}
        ids["site", s.name], c = _upsert(conn, db.site, {"name": s.name}, vals)
        counts += c
    for o in reg.oils:
        vals = {f.name: getattr(o, f.name) for f in dataclasses.fields(OilSpec)}
        ids["oil", o.name], c = _upsert(conn, db.oil, {"name": vals.pop("name")}, vals)
        counts += c
    for m in reg.component_models:
        vals = {f.name: getattr(m, f.name) for f in dataclasses.fields(ComponentModelSpec)}
        key = {"name": vals.pop("name")}
        ids["model", m.name], c = _upsert(conn, db.component_model, key, vals)
        counts += c
    for u in reg.units:
        counts += _upsert_unit(conn, u, ids)
    return counts


def _upsert_unit(conn: Connection, u: UnitSpec, ids: dict) -> UpsertCounts:
    site_id = ids.get(("site", u.site)) or _id_by_name(conn, db.site, u.site)
    oil_id = ids.get(("oil", u.oil)) or _id_by_name(conn, db.oil, u.oil)
    vals = {
        "site_id": site_id,
        "machine_type": u.machine_type,
        "oil_id": oil_id,
        "operating_temp_c": u.operating_temp_c,
    }
    unit_id, counts = _upsert(conn, db.unit, {"tag": u.tag}, vals)
    comp_ids: dict[str, int] = {}
    for cs in u.components:
        model_id = ids.get(("model", cs.model)) or _id_by_name(conn, db.component_model, cs.model)
        key = {"unit_id": unit_id, "position": cs.position}
        vals = {
            "model_id": model_id,
            "serial": cs.serial,
            "operating_temp_c": cs.operating_temp_c,
            "consumed_at_first_upload": cs.consumed_at_first_upload,
            "last_rebuild_hour_meter": cs.last_rebuild_hour_meter,
        }
        comp_ids[cs.position], c = _upsert(conn, db.component, key, vals)
        counts += c
    for ev in u.service:
        counts += _upsert_service(conn, unit_id, comp_ids, ev)
    return counts


def _upsert_service(
    conn: Connection, unit_id: int, comp_ids: dict, ev: ServiceSpec
) -> UpsertCounts:
    comp_id = comp_ids.get(ev.position) if ev.position else None
    if ev.position and comp_id is None:
        comp_id = conn.execute(
            select(db.component.c.id).where(
                db.component.c.unit_id == unit_id, db.component.c.position == ev.position
            )
        ).scalar()
    key = {"unit_id": unit_id, "component_id": comp_id, "kind": ev.kind, "at": ev.at}
    vals = {
        "hour_meter": ev.hour_meter,
        "new_hour_meter": ev.new_hour_meter,
        "note": ev.note,
        "reason": ev.reason,
    }
    t = db.service_event
    cond = and_(
        t.c.unit_id == unit_id,
        t.c.component_id.is_(None) if comp_id is None else t.c.component_id == comp_id,
        t.c.kind == ev.kind,
        t.c.at == ev.at,
    )
    row = conn.execute(select(t).where(cond)).mappings().first()
    if row is None:
        conn.execute(t.insert().values(**key, **vals))
        return UpsertCounts(created=1)
    changed = {k: v for k, v in vals.items() if not _same(row[k], v)}
    if changed:
        conn.execute(t.update().where(t.c.id == row["id"]).values(**changed))
        return UpsertCounts(updated=1)
    return UpsertCounts(unchanged=1)


def _id_by_name(conn: Connection, table, name: str) -> int:  # noqa: ANN001
    rid = conn.execute(select(table.c.id).where(table.c.name == name)).scalar()
    if rid is None:
        raise LookupError(f"{table.name} {name!r} is not in the store")
    return rid


def save_registry_document(conn: Connection, sha256: str, name: str, text: str) -> None:
    """Keep the text of the last imported registry for the read-only view."""
    latest = conn.execute(
        select(db.registry_document.c.sha256).order_by(db.registry_document.c.id.desc())
    ).scalar()
    if latest != sha256:
        conn.execute(
            db.registry_document.insert().values(
                sha256=sha256, name=name, text=text, imported_at=datetime.now(UTC)
            )
        )


def latest_registry_document(conn: Connection) -> str | None:
    t = db.registry_document
    return conn.execute(select(t.c.text).order_by(t.c.id.desc())).scalar()


def components_frame(conn: Connection) -> pd.DataFrame:
    """Every component with its unit, site, oil and model rating data, one row each."""
    c, u, s, m, o = (db.component, db.unit, db.site, db.component_model, db.oil)
    model_cols = [col.label(f"m_{col.name}") for col in m.c if col.name != "id"]
    oil_cols = [col.label(f"oil_{col.name}") for col in o.c if col.name != "id"]
    q = (
        select(
            c.c.id.label("component_id"),
            c.c.position,
            c.c.serial,
            c.c.operating_temp_c.label("c_operating_temp_c"),
            c.c.consumed_at_first_upload,
            c.c.last_rebuild_hour_meter,
            u.c.id.label("unit_id"),
            u.c.tag.label("unit"),
            u.c.machine_type,
            u.c.operating_temp_c.label("u_operating_temp_c"),
            s.c.name.label("site"),
            s.c.contamination_level.label("site_contamination_level"),
            m.c.id.label("model_id"),
            *model_cols,
            *oil_cols,
        )
        .join(u, c.c.unit_id == u.c.id)
        .join(s, u.c.site_id == s.c.id)
        .join(m, c.c.model_id == m.c.id)
        .join(o, u.c.oil_id == o.c.id)
        .order_by(u.c.tag, c.c.position)
    )
    res = conn.execute(q)
    try:  # every column is a plain number or text: the driver's tuples (no Row objects)
        rows = res.cursor.fetchall() if res.cursor is not None else []
        return pd.DataFrame(rows, columns=list(res.keys()))
    finally:
        res.close()


def model_spec(row: dict | pd.Series) -> ComponentModelSpec:
    """The component model of a :func:`components_frame` row as a record."""
    vals = {
        f.name: _none_if_nan(row[f"m_{f.name}"]) for f in dataclasses.fields(ComponentModelSpec)
    }
    return ComponentModelSpec(**vals)


def oil_spec(row: dict | pd.Series) -> OilSpec:
    vals = {f.name: _none_if_nan(row[f"oil_{f.name}"]) for f in dataclasses.fields(OilSpec)}
    return OilSpec(**vals)


def _none_if_nan(v):  # noqa: ANN001, ANN202
    if v is None:
        return None
    try:
        if pd.isna(v):
            return None
    except (TypeError, ValueError):
        pass
    return v.item() if hasattr(v, "item") else v


def service_events(conn: Connection, unit_ids: Iterable[int] | None = None) -> pd.DataFrame:
    """Service events (optionally of some units), oldest first, timestamps in UTC."""
    t = db.service_event
    q = select(t).order_by(t.c.at, t.c.id)
    if unit_ids is not None:
        q = q.where(t.c.unit_id.in_(list(unit_ids)))
    df = pd.DataFrame(conn.execute(q).mappings().all(), columns=[c.name for c in t.c])
    df["at"] = pd.to_datetime(df["at"], utc=True)
    return df


def get_settings(conn: Connection) -> dict:
    """All stored settings, values decoded from JSON."""
    rows = conn.execute(select(db.setting.c.key, db.setting.c.value)).all()
    return {k: json.loads(v) for k, v in rows}


def put_settings(conn: Connection, values: dict) -> None:
    """Store settings (JSON-encoded), replacing earlier values of the same keys."""
    t = db.setting
    for key, value in values.items():
        conn.execute(t.delete().where(t.c.key == key))
        conn.execute(t.insert().values(key=key, value=json.dumps(value)))


def delete_settings(conn: Connection, keys: list[str]) -> None:
    """Remove stored settings (absent keys are ignored)."""
    conn.execute(db.setting.delete().where(db.setting.c.key.in_(list(keys))))


def any_ledger_row(conn: Connection) -> bool:
    """True once the damage ledger holds a row."""
    return conn.execute(select(db.ledger.c.id).limit(1)).first() is not None


def table_counts(conn: Connection) -> dict[str, int]:
    """Row count of every table (used by tests and the status line), and under
    ``histogram`` the number of stored histograms (``histogram_block`` rows hold many)."""
    counts = {
        name: conn.execute(select(func.count()).select_from(table)).scalar()
        for name, table in db.metadata.tables.items()
    }
    counts["histogram"] = blocks.count(conn)
    return counts


# --- small reads and writes of the use cases -------------------------------------------


def file_stored(conn: Connection, sha256: str) -> bool:
    """True when a file with this content hash is stored."""
    t = db.upload_file
    return conn.execute(select(t.c.id).where(t.c.sha256 == sha256)).first() is not None


def insert_file(
    conn: Connection, sha256: str, name: str, n_histograms: int, n_readings: int
) -> int:
    """Insert an upload-file row; return its id."""
    return conn.execute(
        db.upload_file.insert().values(
            sha256=sha256,
            name=name,
            received_at=datetime.now(UTC),
            n_histograms=n_histograms,
            n_readings=n_readings,
        )
    ).inserted_primary_key[0]


def set_file_counts(conn: Connection, file_id: int, n_histograms: int, n_readings: int) -> None:
    """Set the histogram and reading counts of an upload-file row (a file stored in parts
    knows them at its end)."""
    f = db.upload_file
    conn.execute(
        update(f).where(f.c.id == file_id).values(n_histograms=n_histograms, n_readings=n_readings)
    )


def site_names(conn: Connection) -> list[str]:
    """Names of the registered sites, sorted."""
    return list(conn.execute(select(db.site.c.name).order_by(db.site.c.name)).scalars())


def any_unit(conn: Connection) -> bool:
    """True once at least one unit is registered."""
    return conn.execute(select(db.unit.c.id).limit(1)).first() is not None


def oils_without_nu100(conn: Connection) -> list[OilSpec]:
    """Oils given by grade and viscosity index whose 100 degC viscosity is not stored yet
    (imported before it was stored with the oil)."""
    o = db.oil
    q = select(o).where(o.c.nu100_mm2s.is_(None), o.c.viscosity_index.is_not(None))
    fields = [f.name for f in dataclasses.fields(OilSpec)]
    return [OilSpec(**{k: r[k] for k in fields}) for r in conn.execute(q).mappings()]


def set_oil_nu100(conn: Connection, name: str, nu100_mm2s: float) -> None:
    """Store the 100 degC viscosity of the oil ``name`` where none is stored yet."""
    o = db.oil
    conn.execute(
        update(o).where(o.c.name == name, o.c.nu100_mm2s.is_(None)).values(nu100_mm2s=nu100_mm2s)
    )


def unit_id(conn: Connection, tag: str) -> int | None:
    """The id of the unit with this tag, or None."""
    return conn.execute(select(db.unit.c.id).where(db.unit.c.tag == tag)).scalar()


def component_positions(conn: Connection, unit_id: int) -> dict[str, int]:
    """Component id by position of one unit."""
    c = db.component
    return dict(conn.execute(select(c.c.position, c.c.id).where(c.c.unit_id == unit_id)).all())


def service_event_exists(
    conn: Connection, unit_id: int, kind: str, at: datetime, component_id: int | None
) -> bool:
    """True when the same event (unit, kind, instant, component) is stored."""
    t = db.service_event
    q = select(t.c.id).where(
        t.c.unit_id == unit_id,
        t.c.kind == kind,
        t.c.at == at,
        t.c.component_id.is_(None) if component_id is None else t.c.component_id == component_id,
    )
    return conn.execute(q).first() is not None


def insert_service_event(conn: Connection, **values: object) -> None:
    """Insert one service-event row."""
    conn.execute(db.service_event.insert().values(**values))


def last_upload_before(conn: Connection, unit_id: int, at: datetime) -> tuple | None:
    """(end of period [UTC], hour meter at its end [h]) of the unit's latest upload that
    ends at or before ``at``, or None."""
    u = db.upload
    q = (
        select(u.c.period_end, u.c.hour_meter_end)
        .where(u.c.unit_id == unit_id, u.c.period_end <= at)
        .order_by(u.c.period_end.desc())
        .limit(1)
    )
    row = conn.execute(q).first()
    return None if row is None else (_utc(row[0]), float(row[1]))
