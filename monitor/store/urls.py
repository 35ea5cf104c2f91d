"""Store URLs as shown to people, and the file behind a SQLite URL."""

from __future__ import annotations

from pathlib import Path

from sqlalchemy.engine import make_url

from monitor.store import db


def display_url(url: str | None) -> str:
    """The store URL as shown to people: any password replaced by ``***``.

    ``url`` is resolved as :func:`monitor.store.db.resolve_url` does (the argument,
    ``$DRIVESPAN_DB``, the default file; a plain path is a SQLite file).
    """
    return db.display_url(db.resolve_url(url))


def sqlite_path(url: str | None) -> Path | None:
    """The database file of a SQLite URL; None for other databases and in-memory ones."""
    u = make_url(db.resolve_url(url))
    if u.get_backend_name() != "sqlite" or u.database in (None, "", ":memory:"):
        return None
    return Path(u.database).expanduser().resolve()
