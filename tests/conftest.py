"""Shared fixtures: a temporary SQLite store and a throwaway PostgreSQL 15 cluster."""

from __future__ import annotations

import itertools
from datetime import date
from pathlib import Path

import pytest

from tests import pgcluster

DATA = Path(__file__).parent / "data"
_db_names = itertools.count()


@pytest.fixture(scope="session")
def pg_cluster():
    """One PostgreSQL cluster for the whole test session, stopped afterwards."""
    if not pgcluster.available():
        pytest.fail("PostgreSQL 15 server binaries not found: apt-get install postgresql")
    cluster = pgcluster.Cluster().start()
    yield cluster
    cluster.stop()


@pytest.fixture
def pg_url(pg_cluster) -> str:
    """URL of a fresh, empty database on the throwaway cluster."""
    return pg_cluster.create_database(f"t{next(_db_names)}")


@pytest.fixture
def sqlite_url(tmp_path) -> str:
    """URL of a fresh SQLite file in the test's temporary folder."""
    return f"sqlite:///{tmp_path / 'drivespan.db'}"


@pytest.fixture(params=["sqlite", pytest.param("postgres", marks=pytest.mark.postgres)])
def db_url(request, tmp_path) -> str:
    """Each test using this runs once on SQLite and once on PostgreSQL."""
    if request.param == "sqlite":
        return f"sqlite:///{tmp_path / 'drivespan.db'}"
    return request.getfixturevalue("pg_url")


GOLDEN_END = date(2026, 12, 1)
"""Last day of the shared demo fleet's data; its as-of day is the day after."""


@pytest.fixture(scope="session")
def full_demo(tmp_path_factory):
    """The demo fleet at full scale, built once per test run (about 30 s)."""
    from monitor.usecases.demo import build_demo

    return build_demo(tmp_path_factory.mktemp("full-demo") / "demo", end_date=GOLDEN_END)
