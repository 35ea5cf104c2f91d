"""Store and migrations on a real SQLite file and a real PostgreSQL 15 server."""

from __future__ import annotations

import numpy as np
import pytest
from alembic import command
from sqlalchemy import inspect, text

from monitor.store import db, queries


def test_upgrade_head_then_alembic_check(db_url):
    engine = db.make_engine(db_url)
    db.upgrade(engine)
    tables = set(inspect(engine).get_table_names())
    assert {"unit", "component", "histogram_block", "ledger", "reading", "upload"} <= tables
    # alembic check raises if the models and the migrations disagree
    command.check(db.alembic_config(db_url))
    db.upgrade(engine)  # a second upgrade is a no-op
    engine.dispose()


def test_head_read_from_the_revision_files_is_alembics_head(tmp_path, sqlite_url):
    from alembic.script import ScriptDirectory

    head = ScriptDirectory.from_config(db.alembic_config("sqlite://")).get_current_head()
    assert db.head_from_files() == head
    engine = db.make_engine(sqlite_url)
    assert db.stored_revision(engine) is None  # a new store: upgrade asks Alembic
    db.upgrade(engine)
    assert db.stored_revision(engine) == head
    engine.dispose()
    # two heads, or a file that does not state its revisions plainly: ask Alembic
    versions = tmp_path / "m" / "versions"
    versions.mkdir(parents=True)
    (versions / "a.py").write_text('revision = "a"\ndown_revision = None\n')
    (versions / "b.py").write_text('revision: str = "b"\ndown_revision: str | None = "a"\n')
    assert db.head_from_files(tmp_path / "m") == "b"
    (versions / "c.py").write_text('revision = "c"\ndown_revision = "a"\n')
    assert db.head_from_files(tmp_path / "m") is None
    (versions / "c.py").write_text('revision = "c"\ndown_revision = ("a", "b")\n')
    assert db.head_from_files(tmp_path / "m") is None


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


def test_migration_0003_removes_second_copies_and_makes_them_impossible(db_url):
    """A store at 0002 with a histogram upload stored twice (as concurrent ingests
    without the write lock did): upgrading removes the copy, sums the running totals
    again, and the unique index refuses a new copy."""
    from pathlib import Path

    import pandas as pd
    from sqlalchemy import exc, select

    from monitor import usecases

    data = Path(__file__).parent / "data"
    engine = usecases.init_db(db_url)
    usecases.import_registry(engine, (data / "fleet.yaml").read_bytes(), "fleet.yaml")
    for name in ("hist_pressure.csv", "hist_pressure_speed.csv"):
        assert usecases.upload(engine, (data / name).read_bytes(), name).status == "accepted"
    with engine.connect() as conn:
        want = pd.read_sql_query(select(db.ledger).order_by(db.ledger.c.id), conn)
        n_hist = queries.table_counts(conn)["histogram"]
    engine.dispose()
    command.downgrade(db.alembic_config(db_url), "0002")
    engine = db.make_engine(db_url)
    with engine.begin() as conn:
        _store_a_second_copy(conn)
        assert conn.execute(text("SELECT count(*) FROM histogram")).scalar() == 2 * n_hist
    engine.dispose()
    engine = usecases.init_db(db_url)  # upgrade head
    with engine.connect() as conn:
        assert queries.table_counts(conn)["histogram"] == n_hist
        assert conn.execute(text("SELECT count(*) FROM upload WHERE file_id = 99")).scalar() == 0
        got = pd.read_sql_query(select(db.ledger).order_by(db.ledger.c.id), conn)
    # the copies' ledger rows are gone and the running totals are those of one copy (the
    # columns of 0006 were dropped on the way down to 0002 and come back empty)
    keep = [c for c in want.columns if c not in AFTER_0002]
    pd.testing.assert_frame_equal(got[keep], want[keep], rtol=1e-12)
    # since 0007 the histograms are kept in blocks: a block stored twice is refused
    with pytest.raises(exc.IntegrityError):
        with engine.begin() as conn:
            _store_a_second_block_copy(conn)
    engine.dispose()


AFTER_0002 = {"oil_temp_c", "oil_factor_source", "kappa_floor_hours", "cum_kappa_floor_hours"}
"""Histogram and ledger columns added after revision 0002 (by 0006)."""


def _store_a_second_copy(conn) -> None:  # noqa: ANN001
    """Every stored upload again, under file id 99, with its histograms and ledger rows
    (running totals copied as a racing writer computed them)."""
    from datetime import UTC, datetime

    from sqlalchemy import column as sa_column
    from sqlalchemy import select
    from sqlalchemy import table as sa_table

    conn.execute(
        db.upload_file.insert().values(
            id=99, sha256="9" * 64, name="copy.csv", received_at=datetime.now(UTC),
            n_histograms=0, n_readings=0,
        )
    )  # fmt: skip
    uploads = conn.execute(select(db.upload).where(db.upload.c.file_id != 99)).mappings().all()
    for up in uploads:
        new = conn.execute(
            db.upload.insert().values({**_without_id(up), "file_id": 99})
        ).inserted_primary_key[0]
        for table in (HISTOGRAM_0002, db.ledger):
            cols = [c for c in table.c if c.name not in AFTER_0002]
            rows = conn.execute(select(*cols).where(table.c.upload_id == up["id"])).mappings()
            for row in rows.all():
                old = sa_table(table.name, *[sa_column(c.name, c.type) for c in cols])  # at 0002
                conn.execute(old.insert().values({**_without_id(row), "upload_id": new}))


def _store_a_second_block_copy(conn) -> None:  # noqa: ANN001
    """Every stored histogram block again, under a new file."""
    from datetime import UTC, datetime

    from sqlalchemy import select

    conn.execute(
        db.upload_file.insert().values(
            id=98, sha256="8" * 64, name="copy.csv", received_at=datetime.now(UTC),
            n_histograms=0, n_readings=0,
        )
    )  # fmt: skip
    t = db.histogram_block
    for row in conn.execute(select(t)).mappings().all():
        conn.execute(t.insert().values({**_without_id(row), "file_id": 98}))


def _histogram_0002():  # noqa: ANN202
    """The one-row-per-histogram table as revisions 0002 to 0006 had it (a detached copy)."""
    from sqlalchemy import column as sa_column
    from sqlalchemy import table as sa_table
    from sqlalchemy.types import DateTime, Float, Integer, LargeBinary, String

    ts = DateTime(timezone=True)
    kinds = {
        "id": Integer(), "upload_id": Integer(), "component_id": Integer(),
        "quantity": String(), "period_start": ts, "period_end": ts, "n_pressure": Integer(),
        "n_speed": Integer(), "pressure_bands": LargeBinary(), "speed_bands": LargeBinary(),
        "hours": LargeBinary(), "total_hours": Float(), "mean_speed_rpm": Float(),
        "content_sha256": String(),
    }  # fmt: skip
    return sa_table("histogram", *(sa_column(k, v) for k, v in kinds.items()))


HISTOGRAM_0002 = _histogram_0002()


def _without_id(row) -> dict:  # noqa: ANN001
    return {k: v for k, v in row.items() if k != "id"}
