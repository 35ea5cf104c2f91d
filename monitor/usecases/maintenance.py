"""Use cases of store upkeep: back up and restore a store, show its URL safely.

A SQLite store is copied with SQLite's online backup API while it stays in use
(:mod:`monitor.store.backup`); a restore checks the copy first (integrity, a drivespan
store, a known schema revision), replaces the store's content in one step and then
upgrades its schema to this version's. A PostgreSQL store is copied with the server's
own tools, ``pg_dump`` and ``pg_restore``; these use cases say so and stop.
"""

from __future__ import annotations

from pathlib import Path

from monitor.domain.errors import DomainError
from monitor.store import backup as store_backup
from monitor.store import db, urls
from monitor.store.backup import StoreFile

__all__ = ["StoreFile", "backup_store", "display_url", "restore_store"]


def display_url(url: str | None) -> str:
    """The store URL for messages and screens, with any password shown as ``***``."""
    return urls.display_url(url)


def _postgres_advice(url: str | None, verb: str) -> DomainError:
    shown = display_url(url)
    return DomainError(
        f"the store {shown} is not a SQLite file: {verb} a PostgreSQL store with the "
        "server's own tools, e.g. `pg_dump --format=custom --file=fleet.dump DBURL` and, "
        "into an empty database, `pg_restore --dbname=DBURL fleet.dump` (DBURL as in "
        "--db, without the +psycopg driver suffix)"
    )


def backup_store(url: str | None, dest: str | Path, *, overwrite: bool = False) -> StoreFile:
    """Copy the SQLite store at ``url`` to the file ``dest`` while it stays in use.

    Raises DomainError for a PostgreSQL store, a store that does not exist, a ``dest``
    that exists (unless ``overwrite``) or is the store itself, or a copy that fails its
    integrity check.
    """
    path = urls.sqlite_path(url)
    if path is None:
        raise _postgres_advice(url, "back up")
    dest = Path(dest).expanduser().resolve()
    if not path.exists():
        raise DomainError(f"there is no store at {display_url(url)}: nothing to back up")
    if dest == path:
        raise DomainError(f"{dest} is the store itself: name another file")
    if dest.exists() and not overwrite:
        raise DomainError(f"{dest} exists: pass --yes to replace it, or name a new file")
    if not dest.parent.is_dir():
        raise DomainError(f"folder {dest.parent} does not exist")
    engine = db.make_engine(url)
    try:
        return store_backup.backup_sqlite(engine, dest)
    except ValueError as e:
        raise DomainError(f"backup failed, {dest} was not written: {e}") from None
    finally:
        engine.dispose()


def restore_store(url: str | None, source: str | Path, *, overwrite: bool = False) -> StoreFile:
    """Replace the SQLite store at ``url`` by the backup file ``source``.

    The source must be a sound drivespan store at a schema revision this version knows;
    it is checked before anything is changed. An existing store is only replaced with
    ``overwrite``. After the restore the schema is upgraded to this version's.
    """
    path = urls.sqlite_path(url)
    if path is None:
        raise _postgres_advice(url, "restore")
    source = Path(source).expanduser().resolve()
    if not source.is_file():
        raise DomainError(f"{source}: no such file")
    if source == path:
        raise DomainError(f"{source} is the store itself: name the backup file")
    try:
        store_backup.inspect_sqlite_file(source)
    except ValueError as e:
        raise DomainError(f"cannot restore: {e}") from None
    if path.exists() and path.stat().st_size > 0 and not overwrite:
        raise DomainError(
            f"a store exists at {display_url(url)}: restoring replaces all of its data; "
            "pass --yes to do so (back it up first with drivespan backup FILE)"
        )
    engine = db.make_engine(url)
    try:
        store_backup.restore_sqlite(engine, source)
        db.upgrade(engine)
    except ValueError as e:
        raise DomainError(f"cannot restore: {e}") from None
    finally:
        engine.dispose()
    return store_backup.inspect_sqlite_file(path)
