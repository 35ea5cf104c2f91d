"""Store URLs: which database a ``--db`` names, whether it can be a store, and how it is
shown to people (passwords hidden)."""

from __future__ import annotations

import os
from pathlib import Path

from sqlalchemy.engine import make_url

from monitor.domain.config import DEFAULT_URL, ENV_URL


def resolve_url(url: str | None = None) -> str:
    """The database URL: the argument, else ``$DRIVESPAN_DB``, else ``sqlite:///drivespan.db``.

    A plain file path (no ``scheme://``) is taken as a SQLite file.
    """
    url = url or os.environ.get(ENV_URL) or DEFAULT_URL
    if "://" not in url:
        url = f"sqlite:///{Path(url).expanduser().resolve()}"
    return url


SUPPORTED_SCHEMES = ("sqlite", "postgresql", "postgres")
"""URL schemes (before any ``+driver``) a store may use."""


class StoreUnavailable(Exception):
    """The store named by a URL cannot be opened; the message says why and what to do."""


def display_url(url: str | None) -> str:
    """The store URL as shown to people: any password replaced by ``***`` (``url`` is
    resolved as :func:`resolve_url` does)."""
    url = resolve_url(url)
    try:
        return make_url(url).render_as_string(hide_password=True)
    except Exception:  # noqa: BLE001 - an unparsable URL is shown without its credentials
        return url.split("://", 1)[0] + "://…" if "@" in url else url


def sqlite_file(url: str) -> Path | None:
    """The file of a SQLite URL (None for other databases and in-memory SQLite)."""
    parsed = make_url(url)
    if parsed.get_backend_name() != "sqlite" or parsed.database in (None, "", ":memory:"):
        return None
    return Path(parsed.database)


def check_url(url: str | None, *, create: bool) -> str:
    """The resolved URL, or :class:`StoreUnavailable` when it cannot name a store:
    an unparsable URL, an unsupported database, a SQLite file whose folder is missing,
    or (``create`` False) a SQLite file that does not exist yet."""
    url = resolve_url(url)
    try:
        parsed = make_url(url)
    except Exception:  # noqa: BLE001 - sqlalchemy raises ArgumentError or ValueError
        raise StoreUnavailable(
            f"--db {display_url(url)!r} is not a database URL: write sqlite:///FILE "
            "(or a plain file path) or postgresql://user@host/dbname"
        ) from None
    scheme = parsed.drivername.split("+", 1)[0]
    if scheme not in SUPPORTED_SCHEMES:
        raise StoreUnavailable(
            f"database {scheme!r} is not supported: drivespan stores its data in SQLite "
            "(sqlite:///FILE or a plain file path) or PostgreSQL (postgresql://user@host/dbname)"
        )
    path = sqlite_file(url)
    if path is not None:
        if not path.parent.is_dir():
            raise StoreUnavailable(
                f"folder {path.parent} does not exist: create it first or name another --db"
            )
        if path.exists() and not path.is_file():
            raise StoreUnavailable(f"{path} is a folder, not a database file: name a file")
        if not create and not path.exists():
            raise StoreUnavailable(f"no drivespan store at {path}")
    return url


def sqlite_path(url: str | None) -> Path | None:
    """The database file of a SQLite URL, resolved; None for other databases and
    in-memory ones."""
    path = sqlite_file(resolve_url(url))
    return None if path is None else path.expanduser().resolve()
