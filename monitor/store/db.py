"""Storage: tables, the engine factory and one transaction context.

The store keeps what was uploaded and what the life models made of it; it never
computes engineering results itself. Reads return pandas DataFrames or plain
values, so no ORM session ever leaks into the models or the dashboard.

Histograms are stored in blocks: one row per file (or file part), component and
quantity, its histograms' periods, meters, bands and hours as little-endian arrays
(see :mod:`monitor.store.blocks`).
"""

from __future__ import annotations

import hashlib
import re
from collections.abc import Iterable, Iterator
from contextlib import contextmanager
from pathlib import Path

import numpy as np
from sqlalchemy import (
    Boolean,
    Column,
    DateTime,
    Engine,
    Float,
    ForeignKey,
    Index,
    Integer,
    LargeBinary,
    MetaData,
    String,
    Table,
    Text,
    UniqueConstraint,
    create_engine,
    event,
    exc,
    inspect,
    text,
)
from sqlalchemy.engine import Connection

from monitor.domain.config import DEFAULT_URL, ENV_URL  # noqa: F401 - part of this module's interface
from monitor.store.urls import (  # noqa: F401 - part of this module's interface
    SUPPORTED_SCHEMES,
    StoreUnavailable,
    check_url,
    display_url,
    resolve_url,
    sqlite_file,
)

NAMING_CONVENTION = {
    "ix": "ix_%(column_0_label)s",
    "uq": "uq_%(table_name)s_%(column_0_name)s",
    "ck": "ck_%(table_name)s_%(constraint_name)s",
    "fk": "fk_%(table_name)s_%(column_0_name)s_%(referred_table_name)s",
    "pk": "pk_%(table_name)s",
}
metadata = MetaData(naming_convention=NAMING_CONVENTION)
TS = DateTime(timezone=True)

site = Table(
    "site",
    metadata,
    Column("id", Integer, primary_key=True),
    Column("name", String(120), nullable=False, unique=True),
    # ISO 281 contamination level chosen for the site (wins over the oil's), or NULL
    Column("contamination_level", String(32)),
)

oil = Table(
    "oil",
    metadata,
    Column("id", Integer, primary_key=True),
    Column("name", String(120), nullable=False, unique=True),
    Column("iso_vg", Float),
    Column("viscosity_index", Float),
    Column("nu40_mm2s", Float),
    Column("nu100_mm2s", Float),
    Column("contamination_level", String(32)),
)

component_model = Table(
    "component_model",
    metadata,
    Column("id", Integer, primary_key=True),
    Column("name", String(120), nullable=False, unique=True),
    Column("kind", String(16), nullable=False),
    Column("displacement_cm3", Float, nullable=False),
    Column("rated_dp_bar", Float, nullable=False),
    Column("rated_speed_rpm", Float, nullable=False),
    Column("rated_l10_h", Float, nullable=False),
    Column("life_exponent", Float, nullable=False),
    Column("low_side_bar", Float, nullable=False),
    Column("relief_bar", Float, nullable=False),
    Column("cutoff_bar", Float),
    Column("case_drain_test_dp_bar", Float),
    Column("case_drain_test_temp_c", Float),
    Column("case_drain_new_lpm", Float),
    Column("case_drain_limit_factor", Float),
    Column("case_drain_limit_lpm", Float),
    Column("case_drain_flushing_lpm", Float, nullable=False),
    Column("bearing_type", String(16)),
    Column("bearing_pitch_diameter_mm", Float),
    Column("bearing_dynamic_load_kn", Float),
    Column("bearing_fatigue_limit_kn", Float),
    Column("bearing_load_at_rated_kn", Float),
    # operating oil temperature of the oil-condition factor when uploads give none [degC]
    Column("operating_temp_c", Float),
)

unit = Table(
    "unit",
    metadata,
    Column("id", Integer, primary_key=True),
    Column("tag", String(80), nullable=False, unique=True),
    Column("site_id", ForeignKey("site.id"), nullable=False),
    Column("machine_type", String(120), nullable=False),
    Column("oil_id", ForeignKey("oil.id"), nullable=False),
    Column("operating_temp_c", Float),  # overrides the component model's [degC]
)

component = Table(
    "component",
    metadata,
    Column("id", Integer, primary_key=True),
    Column("unit_id", ForeignKey("unit.id", ondelete="CASCADE"), nullable=False),
    Column("position", String(40), nullable=False),
    Column("model_id", ForeignKey("component_model.id"), nullable=False),
    Column("serial", String(80)),
    Column("operating_temp_c", Float),  # overrides the unit's and the model's [degC]
    # life before the first upload, when no rebuild is recorded: a consumed fraction [-]
    # or the hour meter of the last known rebuild [h] (at most one of the two)
    Column("consumed_at_first_upload", Float),
    Column("last_rebuild_hour_meter", Float),
    UniqueConstraint("unit_id", "position", name="uq_component_unit_position"),
)

service_event = Table(
    "service_event",
    metadata,
    Column("id", Integer, primary_key=True),
    Column("unit_id", ForeignKey("unit.id", ondelete="CASCADE"), nullable=False),
    Column("component_id", ForeignKey("component.id", ondelete="CASCADE")),
    Column("kind", String(24), nullable=False),
    Column("at", TS, nullable=False),
    Column("hour_meter", Float, nullable=False),
    Column("new_hour_meter", Float),
    Column("note", Text),
    # Why a rebuild or replacement ended the life (failure, wear_limit, preventive,
    # other); NULL for older events and hour-meter changes, read as "other".
    Column("reason", String(16)),
    UniqueConstraint("unit_id", "component_id", "kind", "at", name="uq_service_event_key"),
    # The status read's "last rebuild at or before" per component: one seek each
    # (the unique key leads with unit_id, so without this it scans every event).
    Index("ix_service_event_component_kind_at", "component_id", "kind", "at"),
)

upload_file = Table(
    "upload_file",
    metadata,
    Column("id", Integer, primary_key=True),
    Column("sha256", String(64), nullable=False, unique=True),
    Column("name", String(255), nullable=False),
    Column("received_at", TS, nullable=False),
    Column("n_histograms", Integer, nullable=False),
    Column("n_readings", Integer, nullable=False),
)

upload = Table(
    "upload",
    metadata,
    Column("id", Integer, primary_key=True),
    Column("file_id", ForeignKey("upload_file.id", ondelete="CASCADE"), nullable=False),
    Column("unit_id", ForeignKey("unit.id", ondelete="CASCADE"), nullable=False),
    Column("period_start", TS, nullable=False),
    Column("period_end", TS, nullable=False),
    Column("hour_meter_start", Float, nullable=False),
    Column("hour_meter_end", Float, nullable=False),
    Index("ix_upload_unit_period", "unit_id", "period_start"),
)

# The histograms of one stored file (or file part), component and quantity, as arrays
# (monitor.store.blocks reads and writes them): one row instead of one per histogram.
# Each array blob holds one value per histogram, in file order, except the band arrays:
# their runs lie end to end (n_pressure / n_speed values per histogram), or, with
# bands_shared, one histogram's bands stand for all. Stored periods of one component and
# quantity never overlap (checked at ingest under the write lock), so no two blocks of
# one component and quantity start at the same instant: the unique index refuses a
# block stored twice.
histogram_block = Table(
    "histogram_block",
    metadata,
    Column("id", Integer, primary_key=True),
    Column("file_id", ForeignKey("upload_file.id", ondelete="CASCADE"), nullable=False),
    Column("component_id", ForeignKey("component.id", ondelete="CASCADE"), nullable=False),
    Column("quantity", String(16), nullable=False),
    Column("n_histograms", Integer, nullable=False),
    Column("first_start", TS, nullable=False),  # earliest period start of the block
    Column("last_end", TS, nullable=False),  # latest period end of the block
    Column("bands_shared", Boolean, nullable=False),
    Column("upload_id", LargeBinary, nullable=False),  # int64 per histogram
    Column("period_start_ns", LargeBinary, nullable=False),  # int64 ns since the epoch, UTC
    Column("period_end_ns", LargeBinary, nullable=False),
    Column("hour_meter_start", LargeBinary, nullable=False),  # float64 [h]
    Column("hour_meter_end", LargeBinary, nullable=False),
    Column("mean_speed_rpm", LargeBinary, nullable=False),  # float64, NaN: not given
    Column("oil_temp_c", LargeBinary, nullable=False),  # float64 period mean, NaN: not given
    Column("n_pressure", LargeBinary, nullable=False),  # int32 bands per histogram
    Column("n_speed", LargeBinary, nullable=False),  # int32, 0 for a pressure histogram
    Column("pressure_low_bar", LargeBinary, nullable=False),  # float64 runs
    Column("pressure_high_bar", LargeBinary, nullable=False),
    Column("speed_low_rpm", LargeBinary, nullable=False),
    Column("speed_high_rpm", LargeBinary, nullable=False),
    Column("hours", LargeBinary, nullable=False),  # float64 runs (a matrix row by row)
    Index("ix_histogram_block_first", "component_id", "quantity", "first_start", unique=True),
    Index("ix_histogram_block_last", "component_id", "quantity", "last_end"),
)

reading = Table(
    "reading",
    metadata,
    Column("id", Integer, primary_key=True),
    Column("file_id", ForeignKey("upload_file.id", ondelete="CASCADE"), nullable=False),
    Column("component_id", ForeignKey("component.id", ondelete="CASCADE"), nullable=False),
    Column("taken_at", TS, nullable=False),
    Column("hour_meter", Float, nullable=False),
    Column("case_drain_lpm", Float),
    Column("test_pressure_bar", Float),
    Column("oil_temp_c", Float),
    Column("iso4406", String(16)),
    UniqueConstraint("component_id", "taken_at", name="uq_reading_component_taken"),
    # Covering index of the status read: a rank scans it in (component, time) order and
    # never visits the table.
    Index(
        "ix_reading_component_wear",
        "component_id",
        "taken_at",
        "hour_meter",
        "case_drain_lpm",
        "test_pressure_bar",
        "oil_temp_c",
    ),
)

# One row per upload and component: what the life models made of its histogram(s).
# The cum_* columns are running totals per component in period order, so a status
# query needs a few index seeks per component instead of a scan of the ledger.
ledger = Table(
    "ledger",
    metadata,
    Column("id", Integer, primary_key=True),
    Column("upload_id", ForeignKey("upload.id", ondelete="CASCADE"), nullable=False),
    Column("component_id", ForeignKey("component.id", ondelete="CASCADE"), nullable=False),
    Column("period_end", TS, nullable=False),
    Column("hour_meter_end", Float, nullable=False),
    Column("meter_hours", Float, nullable=False),
    Column("hours", Float, nullable=False),
    Column("damage", Float, nullable=False),
    Column("relief_hours", Float, nullable=False),
    Column("cutoff_hours", Float, nullable=False),
    Column("relief_heat_kwh", Float, nullable=False),
    # the oil temperature the oil-condition factor used [degC] and where it came from
    # (upload, unit, model or none: factor not applied); NULL without bearing data
    Column("oil_temp_c", Float),
    Column("oil_factor_source", String(8)),
    # operating hours in bands where kappa < 0.1 took the aISO table's floor [h]
    Column("kappa_floor_hours", Float, nullable=False, default=0.0, server_default=text("0")),
    Column("cum_meter_hours", Float, nullable=False, default=0.0),
    Column("cum_hours", Float, nullable=False, default=0.0),
    Column("cum_damage", Float, nullable=False, default=0.0),
    Column("cum_relief_hours", Float, nullable=False, default=0.0),
    Column("cum_cutoff_hours", Float, nullable=False, default=0.0),
    Column("cum_relief_heat_kwh", Float, nullable=False, default=0.0),
    Column("cum_kappa_floor_hours", Float, nullable=False, default=0.0, server_default=text("0")),
    UniqueConstraint("upload_id", "component_id", name="uq_ledger_upload_component"),
    # The trailing columns are the status read's tie-breaks (latest row at or before a
    # bound), so its ORDER BY ... LIMIT 1 is one index seek without a sort.
    Index("ix_ledger_component_period", "component_id", "period_end", "upload_id"),
    Index("ix_ledger_component_cum_hours", "component_id", "cum_hours", "period_end", "upload_id"),
)

setting = Table(
    "setting",
    metadata,
    Column("key", String(80), primary_key=True),
    Column("value", Text, nullable=False),
)

# Accepted life factors: a recorded, dated, reversible change of a component model's
# rated L10. The newest row of a model with undone_at NULL is in force; its factor
# multiplies the registry's rating (the registry import never touches this table).
rating_change = Table(
    "rating_change",
    metadata,
    Column("id", Integer, primary_key=True),
    Column("model_id", ForeignKey("component_model.id", ondelete="CASCADE"), nullable=False),
    Column("factor", Float, nullable=False),
    Column("proposed_by", String(120), nullable=False),
    Column("data_summary", Text, nullable=False),
    Column("accepted_at", TS, nullable=False),
    Column("undone_at", TS),
    Index("ix_rating_change_model_id", "model_id", "id"),
)

# What a pressure trace showed beyond its histogram (the trace's summary, cycles,
# excursions and plotting envelope as JSON), kept with the upload file it was stored as.
trace_summary = Table(
    "trace_summary",
    metadata,
    Column("id", Integer, primary_key=True),
    Column("file_id", ForeignKey("upload_file.id", ondelete="CASCADE"), nullable=False),
    Column("component_id", ForeignKey("component.id", ondelete="CASCADE"), nullable=False),
    Column("summary", Text, nullable=False),
    UniqueConstraint("file_id", "component_id", name="uq_trace_summary_file_component"),
    Index("ix_trace_summary_component_id", "component_id", "id"),
)

registry_document = Table(
    "registry_document",
    metadata,
    Column("id", Integer, primary_key=True),
    Column("sha256", String(64), nullable=False),
    Column("name", String(255), nullable=False),
    Column("text", Text, nullable=False),
    Column("imported_at", TS, nullable=False),
)


def open_store(url: str | None = None, *, create: bool = True) -> Engine:
    """An engine on an upgraded store at ``url`` (see :func:`check_url`); a store that
    cannot be reached or is not a database raises :class:`StoreUnavailable`."""
    url = check_url(url, create=create)
    engine = make_engine(url)
    try:
        upgrade(engine)
    except exc.DBAPIError as err:
        engine.dispose()
        first = str(getattr(err, "orig", err)).strip().splitlines()[0:1] or ["unknown error"]
        path = sqlite_file(url)
        if path is not None and "not a database" in first[0]:
            raise StoreUnavailable(f"{path} is not a drivespan (SQLite) database file") from None
        raise StoreUnavailable(f"cannot open the store {display_url(url)}: {first[0]}") from None
    return engine


SQLITE_BUSY_TIMEOUT_MS = 30_000
"""SQLite's busy timeout outside :func:`write_transaction` [ms] (readers, schema)."""


def make_engine(url: str | None = None) -> Engine:
    """Engine for ``url``; SQLite gets WAL, foreign keys and a busy timeout."""
    url = resolve_url(url)
    if url.startswith("postgres://"):
        url = "postgresql+psycopg://" + url[len("postgres://") :]
    elif url.startswith("postgresql://"):
        url = "postgresql+psycopg://" + url[len("postgresql://") :]
    if url.startswith("sqlite"):
        engine = create_engine(url, connect_args={"timeout": SQLITE_BUSY_TIMEOUT_MS / 1000})
        event.listen(engine, "connect", _sqlite_pragmas)
        return engine
    return create_engine(url, pool_pre_ping=True)


def _sqlite_pragmas(dbapi_conn, _record) -> None:  # noqa: ANN001 - DBAPI hook
    cur = dbapi_conn.cursor()
    cur.execute("PRAGMA journal_mode=WAL")
    cur.execute("PRAGMA foreign_keys=ON")
    cur.execute(f"PRAGMA busy_timeout={SQLITE_BUSY_TIMEOUT_MS}")
    cur.execute("PRAGMA synchronous=NORMAL")
    cur.close()


@contextmanager
def transaction(engine: Engine) -> Iterator[Connection]:
    """One database transaction: committed on success, rolled back on any error."""
    with engine.begin() as conn:
        yield conn


# --- the write lock -------------------------------------------------------------------

WRITE_LOCK_WAIT_S = 300
"""Longest wait for the store's write lock [s] before a writer gives up with
:class:`StoreBusy`. Another process's ingest of a large file holds the lock for its
whole transaction (about 2 s per million bands on the benchmark machine), so the wait
is generous; it keeps a writer from waiting without end on a stuck one (common
practice, no source)."""
LOCK_NAMESPACE_STORE = 0x6472_7600
"""PostgreSQL advisory lock space of the whole store (first key of the two-key form;
the bytes spell "drv")."""
LOCK_NAMESPACE_UNIT = 0x6472_7601
"""PostgreSQL advisory lock space of single units (second key: a hash of the tag)."""


class WriteConflict(Exception):
    """A write broke one of the store's unique rules (another writer stored the same rows
    first, or the data repeats a row) or PostgreSQL chose it as a deadlock or
    serialisation victim. Its transaction was rolled back; nothing of it was stored."""


class StoreBusy(Exception):
    """The store's write lock was not granted within :data:`WRITE_LOCK_WAIT_S`; nothing
    was written."""


@contextmanager
def write_transaction(engine: Engine, units: Iterable[str] | None = None) -> Iterator[Connection]:
    """A transaction that holds the store's write lock from its first statement on.

    Checks made inside it (is this file stored, does a period overlap a stored one, do
    hour meters run on, what are a component's running totals) stay true until the
    commit, so check-then-insert is atomic even with many writers in many processes.

    SQLite: ``BEGIN IMMEDIATE`` takes the database's write lock before the first read
    (readers are not blocked in WAL mode). PostgreSQL: transaction-level advisory locks
    (released at commit or rollback) taken first: with ``units`` (the unit tags the
    transaction writes), the store's lock shared and one lock per unit, in a fixed order,
    so ingests of different units run side by side; without, the store's lock exclusive
    (registry import, recompute, service events).

    Raises :class:`WriteConflict` for a unique-rule violation (the transaction is rolled
    back) and :class:`StoreBusy` when the lock is not granted within
    :data:`WRITE_LOCK_WAIT_S`.
    """
    dbapi = engine.dialect.loaded_dbapi
    try:
        with engine.begin() as conn:
            _take_write_lock(conn, units)
            yield conn
    except (exc.DBAPIError, dbapi.Error) as err:
        # bulk writes use the driver's cursor: its errors come unwrapped
        orig = getattr(err, "orig", err)
        first_line = str(orig).splitlines()[0] if str(orig) else type(orig).__name__
        kind = "conflict" if isinstance(orig, dbapi.IntegrityError) else None
        if isinstance(orig, dbapi.OperationalError):
            kind = _lock_failure(orig)
        if kind == "conflict":
            raise WriteConflict(first_line) from err
        if kind == "busy":
            raise StoreBusy(
                f"the store's write lock was not granted within {WRITE_LOCK_WAIT_S} s"
            ) from err
        raise


def _take_write_lock(conn: Connection, units: Iterable[str] | None) -> None:
    dialect = conn.dialect.name
    if dialect == "sqlite":
        # The sqlite3 module begins a transaction only before its first INSERT, UPDATE
        # or DELETE (SQLAlchemy's begin() sends nothing), so the reads before would run
        # outside any lock: begin explicitly, taking the write lock at once.
        conn.exec_driver_sql(f"PRAGMA busy_timeout = {int(WRITE_LOCK_WAIT_S * 1000)}")
        try:
            conn.exec_driver_sql("BEGIN IMMEDIATE")
        finally:
            conn.exec_driver_sql(f"PRAGMA busy_timeout = {SQLITE_BUSY_TIMEOUT_MS}")
    elif dialect == "postgresql":
        conn.execute(
            text("SELECT set_config('lock_timeout', :t, true)"),
            {"t": f"{int(WRITE_LOCK_WAIT_S * 1000)}ms"},
        )
        lock = "SELECT pg_advisory_xact_lock{}(CAST(:ns AS integer), CAST(:key AS integer))"
        if units is None:
            conn.execute(text(lock.format("")), {"ns": LOCK_NAMESPACE_STORE, "key": 0})
            return
        conn.execute(text(lock.format("_shared")), {"ns": LOCK_NAMESPACE_STORE, "key": 0})
        for key in sorted({unit_lock_key(u) for u in units}):
            conn.execute(text(lock.format("")), {"ns": LOCK_NAMESPACE_UNIT, "key": key})


def unit_lock_key(tag: str) -> int:
    """A signed 32-bit key of a unit tag for PostgreSQL's advisory locks (two tags that
    share a key only wait for each other)."""
    digest = hashlib.blake2b(tag.encode("utf-8"), digest_size=4).digest()
    return int.from_bytes(digest, "big", signed=True)


def _lock_failure(orig: Exception) -> str | None:
    """For a driver's OperationalError: "busy" for a lock wait that timed out,
    "conflict" for a deadlock or serialisation victim, None for anything else."""
    state = getattr(orig, "sqlstate", None)
    if state == "55P03":  # lock_not_available (lock_timeout)
        return "busy"
    if state in ("40P01", "40001"):  # deadlock_detected, serialization_failure
        return "conflict"
    name = getattr(orig, "sqlite_errorname", "") or ""
    if name.startswith("SQLITE_BUSY") or "database is locked" in str(orig):
        return "busy"
    return None


def migrations_dir() -> Path:
    """Folder of the Alembic environment: ``migrations/`` of the source tree, installed
    as the package ``monitor.migrations``.

    When this module runs from a source tree (``migrations/env.py`` beside the
    ``monitor`` package and a ``pyproject.toml``), that tree's folder is used, so that a
    checkout on ``PYTHONPATH`` never runs the migrations of another, installed checkout.
    """
    from importlib.resources import files

    tree = Path(__file__).resolve().parents[2]
    if (tree / "pyproject.toml").is_file() and (tree / "migrations" / "env.py").is_file():
        return tree / "migrations"
    return Path(str(files("monitor.migrations")))


def alembic_config(url: str):  # noqa: ANN201 - alembic Config
    from alembic.config import Config

    cfg = Config()
    cfg.set_main_option("script_location", str(migrations_dir()))
    cfg.set_main_option("sqlalchemy.url", url.replace("%", "%%"))
    return cfg


_REVISION_LINE = re.compile(
    r"^(down_revision|revision)\s*(?::[^=\n]*)?=\s*(?:([\"'])([^\"']+)\2|None)\s*$", re.M
)


def head_from_files(folder: Path | None = None) -> str | None:
    """The newest revision of the migrations in ``folder`` (default :func:`migrations_dir`),
    read from the ``revision = "..."`` / ``down_revision = "..."`` lines of the revision
    files without importing Alembic; None unless there is exactly one head and every
    file states both plainly (then ask Alembic).

    Importing Alembic costs a command about 0.3 s (more on a loaded machine); a store
    that is already at the newest revision does not need it. ``tests/test_store.py``
    checks that this equals Alembic's own head."""
    revisions, parents = set(), set()
    for path in sorted((folder or migrations_dir()).joinpath("versions").glob("*.py")):
        if path.name == "__init__.py":
            continue
        found = {m.group(1): m.group(3) for m in _REVISION_LINE.finditer(path.read_text())}
        if "revision" not in found or "down_revision" not in found:
            return None
        revisions.add(found["revision"])
        if found["down_revision"] is not None:
            parents.add(found["down_revision"])
    heads = revisions - parents
    return heads.pop() if len(heads) == 1 else None


def stored_revision(engine: Engine) -> str | None:
    """The store's Alembic revision (``alembic_version``), or None for a new store."""
    with engine.connect() as conn:
        if not inspect(conn).has_table("alembic_version"):
            return None
        return conn.execute(text("SELECT version_num FROM alembic_version")).scalar()


def upgrade(engine: Engine) -> None:
    """Create or upgrade the schema to the newest migration (``alembic upgrade head``).

    A store already at the newest revision is only read (and Alembic is not imported).
    Otherwise the upgrade runs under the whole store's write lock, so processes that
    open a new store at the same moment create it once (the others find it done)."""
    head = head_from_files()
    if head is not None and stored_revision(engine) == head:
        return
    from alembic import command
    from alembic.migration import MigrationContext
    from alembic.script import ScriptDirectory

    cfg = alembic_config(engine.url.render_as_string(hide_password=False))
    head = ScriptDirectory.from_config(cfg).get_current_head()
    with engine.connect() as conn:
        if MigrationContext.configure(conn).get_current_revision() == head:
            return
    with write_transaction(engine) as conn:
        cfg.attributes["connection"] = conn
        command.upgrade(cfg, "head")


def pack(values: np.ndarray) -> bytes:
    """Array -> little-endian float64 bytes (row-major)."""
    return np.ascontiguousarray(values, dtype="<f8").tobytes()


def unpack(blob: bytes, shape: tuple[int, ...] | None = None) -> np.ndarray:
    """Bytes written by :func:`pack` -> float64 array, reshaped when ``shape`` is given."""
    arr = np.frombuffer(blob, dtype="<f8")
    return arr.reshape(shape) if shape is not None else arr
