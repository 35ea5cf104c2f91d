"""Copies of a SQLite store: an online backup, a check of a copy, and a restore.

SQLite's online backup API (``sqlite3.Connection.backup``, SQLite's ``sqlite3_backup_*``
functions) copies a live database page by page while other connections keep reading
and writing; the copy is a consistent snapshot. A backup is first written next to its
destination and moved into place only after ``PRAGMA integrity_check`` passes, so a
half-written copy never carries the destination's name. PostgreSQL stores are copied
with the server's own tools (``pg_dump``/``pg_restore``), not here.
"""

from __future__ import annotations

import os
import sqlite3
from dataclasses import dataclass
from pathlib import Path

from sqlalchemy import Engine

from monitor.store import db

SQLITE_MAGIC = b"SQLite format 3\x00"
"""The first 16 bytes of every SQLite database file (SQLite file format, section 1.3)."""

REQUIRED_TABLES = ("alembic_version", "unit", "upload_file", "ledger")
"""Tables a file must hold to count as a drivespan store."""


@dataclass(frozen=True)
class StoreFile:
    """What a SQLite store file holds: its schema revision and the rows of each table."""

    path: Path
    revision: str
    counts: dict[str, int]


def known_revisions() -> list[str]:
    """Every schema revision of the shipped migrations, oldest first."""
    from alembic.script import ScriptDirectory

    script = ScriptDirectory.from_config(db.alembic_config("sqlite://"))
    return [s.revision for s in reversed(list(script.walk_revisions()))]


def backup_sqlite(engine: Engine, dest: Path) -> StoreFile:
    """Copy the live SQLite store of ``engine`` to the file ``dest`` (replaced if present).

    Raises
    ------
    ValueError
        If the copy fails its integrity check (``dest`` is then left as it was).
    """
    partial = dest.with_name(dest.name + ".partial")
    partial.unlink(missing_ok=True)
    raw = engine.raw_connection()
    try:
        target = sqlite3.connect(partial)
        try:
            raw.driver_connection.backup(target)
        finally:
            target.close()
    finally:
        raw.close()
    try:
        info = inspect_sqlite_file(partial)
    except ValueError:
        partial.unlink(missing_ok=True)
        raise
    os.replace(partial, dest)
    return StoreFile(dest, info.revision, info.counts)


def inspect_sqlite_file(path: Path) -> StoreFile:
    """Check that ``path`` is a sound drivespan store at a known schema revision.

    Raises
    ------
    ValueError
        Saying what is wrong: not a SQLite file, damaged (integrity check), not a
        drivespan store, or at a schema revision these migrations do not know.
    """
    with open(path, "rb") as fh:
        if fh.read(16) != SQLITE_MAGIC:
            raise ValueError(f"{path.name} is not a SQLite database file")
    conn = sqlite3.connect(f"{path.resolve().as_uri()}?mode=ro", uri=True)
    try:
        check = [r[0] for r in conn.execute("PRAGMA integrity_check").fetchall()]
        if check != ["ok"]:
            raise ValueError(f"{path.name} is damaged: integrity check says {check[0]!r}")
        tables = {r[0] for r in conn.execute("SELECT name FROM sqlite_master WHERE type='table'")}
        missing = [t for t in REQUIRED_TABLES if t not in tables]
        if missing:
            raise ValueError(
                f"{path.name} is not a drivespan store (no table {', '.join(missing)})"
            )
        revs = [r[0] for r in conn.execute("SELECT version_num FROM alembic_version")]
        known = known_revisions()
        if len(revs) != 1 or revs[0] not in known:
            raise ValueError(
                f"{path.name} is at schema revision {', '.join(revs) or '(none)'}, which this "
                f"version of drivespan does not know (it knows {', '.join(known)}): use the "
                "drivespan version that made it"
            )
        if not {"histogram", "histogram_block"} & tables:  # before / since revision 0007
            raise ValueError(f"{path.name} is not a drivespan store (no histogram table)")
        counts = {
            name: conn.execute(f'SELECT count(*) FROM "{name}"').fetchone()[0]  # noqa: S608
            for name in db.metadata.tables
            if name in tables
        }
        counts["histogram"] = (
            conn.execute("SELECT coalesce(sum(n_histograms), 0) FROM histogram_block").fetchone()[0]
            if "histogram_block" in tables
            else conn.execute("SELECT count(*) FROM histogram").fetchone()[0]
        )
    except sqlite3.DatabaseError as e:
        raise ValueError(f"{path.name} cannot be read as a database: {e}") from None
    finally:
        conn.close()
    return StoreFile(path, revs[0], counts)


def restore_sqlite(engine: Engine, source: Path) -> None:
    """Replace the whole content of the SQLite store of ``engine`` by the file ``source``
    (checked first with :func:`inspect_sqlite_file`), in one step of the backup API."""
    inspect_sqlite_file(source)
    src = sqlite3.connect(f"{source.resolve().as_uri()}?mode=ro", uri=True)
    engine.dispose()  # no pooled connection keeps reading the old pages
    raw = engine.raw_connection()
    try:
        src.backup(raw.driver_connection)
    finally:
        raw.close()
        src.close()
        engine.dispose()
