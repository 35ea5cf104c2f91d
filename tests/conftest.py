"""Shared fixtures: a temporary SQLite store and a throwaway PostgreSQL 15 cluster."""

from __future__ import annotations

import fcntl
import itertools
import pickle
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
def full_demo(tmp_path_factory, worker_id):
    """The demo fleet at full scale, built once per test run (about 30 s) and shared by
    every module that reads it; tests must not change it (a rejected upload is fine).

    Under pytest-xdist the first worker to get here builds it in the run's common temporary
    folder, under a file lock; the others wait and read the same store."""
    from monitor.usecases.demo import build_demo

    if worker_id == "master":  # no xdist
        return build_demo(tmp_path_factory.mktemp("full-demo") / "demo", end_date=GOLDEN_END)
    root = tmp_path_factory.getbasetemp().parent  # shared by the run's workers
    with (root / "full-demo.lock").open("a+b") as lock:
        fcntl.flock(lock, fcntl.LOCK_EX)
        done = root / "full-demo.pickle"
        if not done.exists():
            demo = build_demo(root / "full-demo" / "demo", end_date=GOLDEN_END)
            done.write_bytes(pickle.dumps(demo))
        return pickle.loads(done.read_bytes())


@pytest.fixture(scope="session")
def worker_id(request) -> str:
    """pytest-xdist's worker name ("gw0", ...), or "master" in a plain run (the same
    fixture as xdist's, so the suite also runs without the plugin)."""
    return getattr(request.config, "workerinput", {}).get("workerid", "master")
