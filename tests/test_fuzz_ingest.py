"""Seeded fuzzing of ingest: mutated sample files never crash, and a refusal changes nothing.

Every file in tests/data (exports, the registry, the bad samples) is broken in seeded
ways (:mod:`tests.fuzz_mutations`) and handed both to the parser and to the upload use
case on a real SQLite store that already holds the registry and some of the samples.
For each case:

- no exception escapes ``monitor.ingest.parse.parse_file`` or ``monitor.usecases.upload``,
  and no problem is the parser's "internal error" safety net (that would be a bug
  hidden from the user, not a message about the file);
- a file with problems carries no records; messages echo at most a short piece of it;
- a refused upload leaves the store exactly as it was: the same row count in every table
  and ``PRAGMA integrity_check`` = ok; a duplicate too (a registry that changes nothing
  only keeps its new text for ``fleet show``).

The default is 300 cases (a few seconds). A longer run by hand, see docs/fuzzing.md::

    DRIVESPAN_FUZZ_CASES=10000 DRIVESPAN_FUZZ_SEED=1 python -m pytest -q tests/test_fuzz_ingest.py
"""

from __future__ import annotations

import os
import random
from pathlib import Path

import pytest
from sqlalchemy import text

from monitor import usecases
from monitor.ingest.limits import MAX_ECHO_CHARS
from monitor.ingest.parse import UNEXPECTED, parse_file
from monitor.store import queries
from tests.fuzz_mutations import mutate

DATA = Path(__file__).parent / "data"
CASES = int(os.environ.get("DRIVESPAN_FUZZ_CASES", "300"))
SEED = int(os.environ.get("DRIVESPAN_FUZZ_SEED", "20261202"))
SAMPLES = sorted(p for p in DATA.iterdir() if p.is_file())
STORED_FIRST = ("fleet.yaml", "hist_pressure.csv", "readings.csv")
"""Samples in the store before the first case (so copies of them meet its checks)."""


def _case(i: int) -> tuple[str, bytes, list[str]]:
    """Case ``i``: the file name, its mutated bytes and the mutations (reproducible alone)."""
    rng = random.Random(f"{SEED}-{i}")
    src = rng.choice(SAMPLES)
    data, names = mutate(src.read_bytes(), rng)
    return f"case{i}-{src.name}", data, names


def _state(engine) -> tuple[dict[str, int], str]:  # noqa: ANN001 - an Engine
    with engine.connect() as conn:
        check = conn.execute(text("PRAGMA integrity_check")).scalar()
        return queries.table_counts(conn), check


def _check_parse(name: str, data: bytes, where: str) -> None:
    parsed = parse_file(data, name)
    assert all(p.message != UNEXPECTED for p in parsed.problems), where
    if parsed.problems:
        assert not parsed.histograms and not parsed.readings, where
    for p in parsed.problems:
        assert p.value is None or len(p.value) <= MAX_ECHO_CHARS, where
        assert len(p.message) <= 1000, where


@pytest.fixture(scope="module")
def engine(tmp_path_factory):
    url = f"sqlite:///{tmp_path_factory.mktemp('fuzz') / 'fuzz.db'}"
    engine = usecases.init_db(url)
    for name in STORED_FIRST:
        res = usecases.upload(engine, (DATA / name).read_bytes(), name)
        assert res.status in (usecases.ACCEPTED, usecases.DUPLICATE), res
    yield engine
    engine.dispose()


def test_mutated_files_never_crash_and_refusals_change_nothing(engine, tmp_path, caplog):
    outcomes: dict[str, int] = {}
    after = _state(engine)
    for i in range(CASES):
        name, data, names = _case(i)
        where = f"case {i} ({name}, {'+'.join(names)}; saved as {tmp_path / name})"
        (tmp_path / name).write_bytes(data)  # kept only if the test fails
        _check_parse(name, data, where)
        if name.endswith(".yaml"):
            name = name[:-5] + (".yml" if i % 2 else ".yaml")  # both registry suffixes
        before = after  # nothing else writes to this store
        res = usecases.upload(engine, data, name)
        after = _state(engine)
        assert after[1] == "ok", where
        if res.status == usecases.REJECTED:
            assert after == before, where
        elif res.status == usecases.DUPLICATE:  # a registry's new text is kept for `fleet show`
            changed = {k for k in after[0] if after[0][k] != before[0][k]}
            assert changed <= {"registry_document"} if res.kind == "registry" else not changed
        (tmp_path / name).unlink(missing_ok=True)
        outcomes[res.status] = outcomes.get(res.status, 0) + 1
    assert "unexpected error" not in caplog.text
    # the mutations must exercise both sides: most cases refused, some still accepted
    assert outcomes.get(usecases.REJECTED, 0) > CASES // 2, outcomes
    assert outcomes.get(usecases.ACCEPTED, 0) + outcomes.get(usecases.DUPLICATE, 0) > 0, outcomes
