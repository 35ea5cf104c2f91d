"""A status command loads only what it uses (issue 16, rank start-up).

The oil's 100 degC viscosity, which the case-drain normalisation draws the oil's
viscosity line through, is found from its viscosity index once at registry import and
stored with the oil; ``drivespan rank`` then neither solves for it nor imports
``scipy.optimize`` (0.2-0.6 s a process). A store imported before keeps working (the
status solves for it, same numbers) until ``drivespan init`` or the next registry import
stores it.
"""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pytest
from sqlalchemy import select, update

from monitor import usecases
from monitor.models import oil
from monitor.store import db

ROOT = Path(__file__).resolve().parents[1]
DATA = Path(__file__).parent / "data"
HEAVY = ("scipy", "pint", "alembic", "streamlit", "plotly", "monitor.ingest", "monitor.ledger")

RANK = (
    "import json, sys\n"
    "from monitor.cli import main\n"
    "main(sys.argv[1:-1], standalone_mode=False)\n"
    "loaded = sorted(h for h in json.loads(sys.argv[-1]) if h in sys.modules)\n"
    "print(json.dumps(loaded), file=sys.stderr)\n"
)


def _rank(url: str) -> tuple[list[dict], list[str]]:
    """The rank JSON of a fresh process and which of HEAVY it had loaded at the end."""
    args = ["rank", "--db", url, "--as-of", "2026-04-01", "--format", "json"]
    run = subprocess.run(
        [sys.executable, "-c", RANK, *args, json.dumps(HEAVY)],
        capture_output=True,
        text=True,
        cwd=ROOT,
        timeout=120,
    )
    assert run.returncode == 0, run.stderr
    return json.loads(run.stdout), json.loads(run.stderr.strip().splitlines()[-1])


def _stored_nu100(url: str) -> float | None:
    engine = db.make_engine(url)
    try:
        with engine.connect() as conn:
            return conn.execute(select(db.oil.c.nu100_mm2s)).scalar_one()
    finally:
        engine.dispose()


@pytest.fixture
def store(db_url) -> str:
    """The sample fleet (oil by ISO VG 46 and VI 100) with case-drain readings, on SQLite
    and on PostgreSQL."""
    engine = usecases.init_db(db_url)
    usecases.import_registry(engine, (DATA / "fleet.yaml").read_bytes(), "fleet.yaml")
    for name in ("hist_pressure.csv", "readings.csv"):
        res = usecases.upload(engine, (DATA / name).read_bytes(), name)
        assert res.status == usecases.ACCEPTED, res.problems
    engine.dispose()
    return db_url


def test_registry_import_stores_the_oils_nu100(store):
    assert _stored_nu100(store) == oil.nu100_for_viscosity_index(46.0, 100)


def test_rank_loads_no_scipy_and_an_older_store_gives_the_same_ranking(store):
    ranked, loaded = _rank(store)
    assert ranked and loaded == []

    engine = db.make_engine(store)  # as imported before the viscosity was stored
    with engine.begin() as conn:
        conn.execute(update(db.oil).values(nu100_mm2s=None))
    engine.dispose()
    older, loaded = _rank(store)
    assert older == ranked
    assert "scipy" in loaded  # the readings were normalised: this store solves for it

    init = subprocess.run(
        [sys.executable, "-m", "monitor.cli", "init", "--db", store],
        capture_output=True,
        text=True,
        cwd=ROOT,
        timeout=120,
    )
    assert init.returncode == 0, init.stderr
    assert "stored the 100 degC viscosity of 1 oil" in init.stdout
    assert _stored_nu100(store) == oil.nu100_for_viscosity_index(46.0, 100)
    assert _rank(store) == (ranked, [])


def test_reimport_of_an_older_store_changes_nothing(store):
    engine = db.make_engine(store)
    with engine.begin() as conn:
        conn.execute(update(db.oil).values(nu100_mm2s=None))
    counts = usecases.import_registry(engine, (DATA / "fleet.yaml").read_bytes(), "fleet.yaml")
    engine.dispose()
    assert (counts.created, counts.updated) == (0, 0)  # no ledger recompute for it
    assert _stored_nu100(store) == oil.nu100_for_viscosity_index(46.0, 100)
