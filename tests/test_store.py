"""Store and migrations on a real SQLite file and a real PostgreSQL 15 server."""

from __future__ import annotations

import numpy as np
import pytest
from alembic import command
from sqlalchemy import inspect, text

from monitor.store import db


def test_upgrade_head_then_alembic_check(db_url):
    engine = db.make_engine(db_url)
    db.upgrade(engine)
    tables = set(inspect(engine).get_table_names())
    assert {"unit", "component", "histogram", "ledger", "reading", "upload"} <= tables
    # alembic check raises if the models and the migrations disagree
    command.check(db.alembic_config(db_url))
    db.upgrade(engine)  # a second upgrade is a no-op
    engine.dispose()


def test_sqlite_opens_in_wal_with_foreign_keys(sqlite_url):
    engine = db.make_engine(sqlite_url)
    with engine.connect() as conn:
        assert conn.execute(text("PRAGMA journal_mode")).scalar() == "wal"
        assert conn.execute(text("PRAGMA foreign_keys")).scalar() == 1
        assert conn.execute(text("PRAGMA busy_timeout")).scalar() == 30000
    engine.dispose()


def test_transaction_rolls_back_on_error(db_url):
    engine = db.make_engine(db_url)
    db.upgrade(engine)
    with pytest.raises(RuntimeError):
        with db.transaction(engine) as conn:
            conn.execute(db.site.insert().values(name="Ridgeback Pit"))
            raise RuntimeError("boom")
    with engine.connect() as conn:
        assert conn.execute(text("SELECT count(*) FROM site")).scalar() == 0
    engine.dispose()


def test_pack_roundtrip_keeps_shape_and_values():
    hours = np.arange(12, dtype=float).reshape(3, 4) / 7.0
    blob = db.pack(hours)
    assert len(blob) == 12 * 8
    np.testing.assert_array_equal(db.unpack(blob, (3, 4)), hours)


def test_url_resolution(monkeypatch):
    monkeypatch.delenv(db.ENV_URL, raising=False)
    assert db.resolve_url(None) == "sqlite:///drivespan.db"
    monkeypatch.setenv(db.ENV_URL, "sqlite:////tmp/x.db")
    assert db.resolve_url(None) == "sqlite:////tmp/x.db"
    assert db.resolve_url("sqlite:///y.db") == "sqlite:///y.db"
    # a plain path is a SQLite file
    assert db.resolve_url("/tmp/fleet.db") == "sqlite:////tmp/fleet.db"
