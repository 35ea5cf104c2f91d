"""Writers at once, a writer killed mid-upload, a file that raises: the store stays exact.

Real, separate processes run the real ``drivespan ingest`` against a real SQLite file and
the throwaway PostgreSQL 15 server; they are forked from a server process that has
imported drivespan's modules once (:mod:`tests.cli_processes`), so that starting one
costs milliseconds instead of a second of imports. The exports are a small seeded demo
fleet; the CRLF copies have other bytes (another file hash) but identical histograms, so
only the checks against the stored histograms (under the write lock) keep them from
counting twice.
"""

from __future__ import annotations

import logging
import random
import re
import shutil
import time
import uuid
from dataclasses import dataclass
from datetime import date
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from click.testing import CliRunner
from sqlalchemy import text

from monitor import cli, usecases
from monitor.ingest import parse
from monitor.store import checks, db, ledger_rows
from tests import cli_processes, reference_paths

END = date(2026, 12, 1)
AS_OF = date(2026, 12, 2)

RESULT_LINE = re.compile(r"^(\S+): (accepted|duplicate|rejected|valid)\b", re.M)
INTERNAL = "internal error while handling this file"


# --- the exports -----------------------------------------------------------------------


@dataclass(frozen=True)
class Exports:
    registry: Path
    orig: Path  # histograms/ and readings/ as generated
    crlf: Path  # the same files re-exported with CRLF line ends
    files: int  # files in each of the two folders


@pytest.fixture(scope="module")
def exports(tmp_path_factory) -> Exports:
    """Three months of the demo fleet's story units (5 units, 13 files, 578 histograms)."""
    from demo_fleet.generate import generate

    root = tmp_path_factory.mktemp("exports")
    fleet = generate(root / "gen", seed=7, end_date=END, years=0.25, units_scale=0.0)
    orig, crlf = root / "orig", root / "crlf"
    for path in fleet.export_paths:
        rel = Path(path).relative_to(root / "gen")
        for folder in (orig, crlf):
            (folder / rel.parent).mkdir(parents=True, exist_ok=True)
        shutil.copyfile(path, orig / rel)
        body = Path(path).read_bytes().replace(b"\r\n", b"\n").replace(b"\n", b"\r\n")
        (crlf / rel).write_bytes(body)
    return Exports(Path(fleet.registry_path), orig, crlf, len(fleet.export_paths))


def new_store(url: str, exports: Exports):
    engine = usecases.init_db(url)
    usecases.import_registry(engine, exports.registry.read_bytes(), "registry.yaml")
    return engine


@pytest.fixture(scope="module")
def reference(exports, tmp_path_factory) -> dict:
    """What one serial ingest of the original files makes of them."""
    url = f"sqlite:///{tmp_path_factory.mktemp('reference') / 'serial.db'}"
    engine = new_store(url, exports)
    results = usecases.ingest_paths(engine, [exports.orig])
    assert {r.status for r in results} == {usecases.ACCEPTED}, [r.summary for r in results]
    out = store_summary(engine)
    engine.dispose()
    return out


# --- what a store holds ------------------------------------------------------------------

CUM = ledger_rows.CUM_COLUMNS


def store_summary(engine) -> dict:
    """Row counts, every consistency rule checked, and the ranking at AS_OF."""
    with engine.connect() as conn:
        counts = {
            t: conn.execute(text(f"SELECT count(*) FROM {t}")).scalar()
            for t in ("upload", "ledger", "reading")
        }  # histogram_block rows are left out: how many depends on how files were cut
        hists = reference_paths.stored_histogram_rows(conn)
        counts["histogram"] = len(hists)
        keys = [(h["component_id"], h["content_sha256"]) for h in hists]
        copies = len(keys) - len(set(keys))
        per_file = conn.execute(
            text(
                "SELECT coalesce(sum(n_histograms), 0), coalesce(sum(n_readings), 0) "
                "FROM upload_file"
            )
        ).one()
        ledger = pd.read_sql_query(
            text("SELECT * FROM ledger ORDER BY component_id, period_end, upload_id"), conn
        )
        ledgered = set(zip(ledger["upload_id"], ledger["component_id"], strict=True))
        unledgered = len({(h["upload_id"], h["component_id"]) for h in hists} - ledgered)
    assert copies == 0, f"{copies} histograms stored more than once"
    # no partial upload: every file's rows are all there, every upload has its ledger rows
    assert tuple(per_file) == (counts["histogram"], counts["reading"])
    assert unledgered == 0
    assert_running_totals(ledger)
    status = usecases.fleet_status(engine, AS_OF)
    return {"counts": counts, "rank": usecases.rank_records(status)}


def assert_running_totals(ledger: pd.DataFrame) -> None:
    """cum_* of every row = the sum of its component's rows up to it in period order."""
    if ledger.empty:
        return
    g = ledger.groupby("component_id", sort=False)
    for cum, col in CUM.items():
        np.testing.assert_allclose(
            ledger[cum].to_numpy(), g[col].cumsum().to_numpy(), rtol=1e-9, atol=1e-12,
            err_msg=cum,
        )  # fmt: skip


def assert_same_ranking(got: list[dict], want: list[dict]) -> None:
    """Equal rank records; floats equal to 1e-9 relative (running totals summed in
    another order differ in the last bits)."""
    assert [(r["unit"], r["position"]) for r in got] == [(r["unit"], r["position"]) for r in want]
    for a, b in zip(got, want, strict=True):
        assert a.keys() == b.keys()
        for k in a:
            if isinstance(b[k], float):
                assert a[k] == pytest.approx(b[k], rel=1e-9, abs=1e-12), (a["unit"], k)
            else:
                assert a[k] == b[k], (a["unit"], a["position"], k)


# --- running real processes --------------------------------------------------------------


def start_ready(args_per_process: list[list[str]], folder: Path) -> tuple[list, Path]:
    """Start one ``drivespan ARGS`` process per argument list (forked from a server that
    has imported drivespan's modules, :mod:`tests.cli_processes`) and wait until all are
    ready; return the processes and the start-signal path (not yet touched)."""
    tag = uuid.uuid4().hex[:8]
    go = folder / f"go-{tag}"
    procs = []
    ready = [folder / f"ready-{tag}-{i}" for i in range(len(args_per_process))]
    for i, args in enumerate(args_per_process):
        procs.append(cli_processes.Command(args, ready[i], go, folder, f"proc-{tag}-{i}"))
    deadline = time.monotonic() + 120
    while not all(r.exists() for r in ready):
        for p in procs:
            if p.poll() is not None:
                out, err = p.communicate()
                pytest.fail(f"a writer ended before the start: {out}\n{err}")
        assert time.monotonic() < deadline, "writers did not get ready within 120 s"
        time.sleep(0.01)
    return procs, go


def ingest_at_once(url: str, path_sets: list[list[Path]], folder: Path) -> list[tuple]:
    """``drivespan ingest`` of each path set in its own process, all started at once."""
    logs = [folder / f"writer-{i}.log" for i in range(len(path_sets))]
    args = [
        ["--log-file", str(log), "ingest", "--db", url, *map(str, paths)]
        for log, paths in zip(logs, path_sets, strict=True)
    ]
    procs, go = start_ready(args, folder)
    go.touch()
    out = []
    for p, log in zip(procs, logs, strict=True):
        stdout, stderr = p.communicate(timeout=300)
        out.append((p.returncode, stdout, stderr, log.read_text() if log.exists() else ""))
    return out


def file_count(paths: list[Path]) -> int:
    return len(usecases.expand_paths(paths))


# --- concurrent writers ------------------------------------------------------------------


def path_sets(exports: Exports, writers: int) -> list[list[Path]]:
    """Overlapping sets: the originals, the CRLF copies, and (with 4) both mixed in
    another order, readings first."""
    o, c = exports.orig, exports.crlf
    sets = [[o], [c]]
    if writers == 4:
        sets += [[o / "readings", c / "histograms"], [c / "readings", o / "histograms"]]
    return sets


@pytest.mark.parametrize("writers", [2, 4])
def test_writers_at_once_store_every_histogram_once(db_url, exports, reference, tmp_path, writers):
    new_store(db_url, exports).dispose()
    sets = path_sets(exports, writers)
    runs = ingest_at_once(db_url, sets, tmp_path)
    for (code, stdout, stderr, log), paths in zip(runs, sets, strict=True):
        results = RESULT_LINE.findall(stdout)
        assert code == 0, stdout + stderr + log
        assert "Traceback" not in stderr and INTERNAL not in stdout, stderr + log
        assert len(results) == file_count(paths), stdout  # every file has its result
        assert {status for _, status in results} <= {"accepted", "duplicate"}, stdout
    engine = db.make_engine(db_url)
    got = store_summary(engine)
    engine.dispose()
    assert got["counts"] == reference["counts"]
    assert_same_ranking(got["rank"], reference["rank"])


def test_processes_opening_a_new_store_at_once_create_it_once(db_url, tmp_path):
    procs, go = start_ready([["init", "--db", db_url]] * 3, tmp_path)
    go.touch()
    outs = [p.communicate(timeout=120) for p in procs]
    assert [p.returncode for p in procs] == [0, 0, 0], outs
    from alembic.script import ScriptDirectory

    head = ScriptDirectory.from_config(db.alembic_config(db_url)).get_current_head()
    engine = db.make_engine(db_url)
    with engine.connect() as conn:
        versions = conn.execute(text("SELECT version_num FROM alembic_version")).scalars()
        assert versions.all() == [head]
    engine.dispose()


def test_write_lock_is_held_and_a_waiting_writer_gives_up_cleanly(db_url, exports, monkeypatch):
    """While one transaction holds the store's write lock, another writer waits; past the
    wait limit it gets StoreBusy and wrote nothing; the ingest use case reports that."""
    engine = new_store(db_url, exports)
    other = db.make_engine(db_url)
    monkeypatch.setattr(db, "WRITE_LOCK_WAIT_S", 0.3)
    data = sorted(exports.orig.glob("histograms/*.csv"))[0].read_bytes()
    with db.write_transaction(engine):
        t0 = time.monotonic()
        with pytest.raises(db.StoreBusy):
            with db.write_transaction(other, units=["GF-101"]):
                pass
        assert time.monotonic() - t0 >= 0.25  # it waited for the lock
        res = usecases.upload(other, data, "while-locked.csv")
        assert res.status == usecases.REJECTED
        assert "busy with another upload" in str(res.problems[0])
    with other.connect() as conn:
        assert conn.execute(text("SELECT count(*) FROM upload_file")).scalar() == 0
    assert usecases.upload(other, data, "after.csv").status == usecases.ACCEPTED
    other.dispose()
    engine.dispose()


@pytest.mark.postgres
def test_postgres_locks_per_unit(pg_url, monkeypatch):
    """PostgreSQL: writers of different units do not wait for each other; writers of the
    same unit do, and so does a writer of the whole store."""
    engine = usecases.init_db(pg_url)
    other = db.make_engine(pg_url)
    monkeypatch.setattr(db, "WRITE_LOCK_WAIT_S", 0.2)
    with db.write_transaction(engine, units=["AA-1", "AB-2"]):
        with db.write_transaction(other, units=["ZZ-9"]):
            pass  # granted at once
        for units in (["AB-2"], None):
            with pytest.raises(db.StoreBusy):
                with db.write_transaction(other, units=units):
                    pass
    other.dispose()
    engine.dispose()


# --- kill -9 -----------------------------------------------------------------------------


def big_export(exports: Exports, folder: Path) -> tuple[Path, list[Path]]:
    """All histogram files but the first month's in one CSV (the "larger file"), and the
    first month's files (stored before the kill)."""
    files = sorted((exports.orig / "histograms").glob("*.csv"))
    first = [f for f in files if f.name.startswith(files[0].name[:7])]
    lines = []
    for f in files:
        if f not in first:
            body = f.read_text().splitlines(keepends=True)
            lines += body if not lines else body[1:]
    big = folder / "big.csv"
    big.write_text("".join(lines))
    return big, first


class Stores:
    """Fresh copies of one base store, per backend."""

    def __init__(self, url: str, cluster) -> None:  # noqa: ANN001
        self.url, self.cluster = url, cluster

    def copy(self) -> str:
        if self.url.startswith("sqlite"):
            src = Path(self.url.removeprefix("sqlite:///"))
            dst = src.with_name(f"trial-{uuid.uuid4().hex[:8]}.db")
            shutil.copyfile(src, dst)
            return f"sqlite:///{dst}"
        import psycopg

        base = self.url.rsplit("/", 1)[1]
        name = f"trial_{uuid.uuid4().hex[:8]}"
        dsn = f"host=127.0.0.1 port={self.cluster.port} user=postgres dbname=postgres"
        with psycopg.connect(dsn, autocommit=True) as conn:
            conn.execute(f'CREATE DATABASE "{name}" TEMPLATE "{base}"')
        return self.url.rsplit("/", 1)[0] + "/" + name


KILL_TRIALS = 3


def ingest_and_kill(stores: Stores, big: Path, folder: Path, delays: list[float | None]):
    """``drivespan ingest big`` into a fresh copy of the store per delay, all processes
    started at once; each is killed with SIGKILL ``delay`` seconds after the start (None:
    left to finish). Return the store URLs and the seconds until the last one ended."""
    urls = [stores.copy() for _ in delays]
    procs, go = start_ready([["ingest", "--db", url, str(big)] for url in urls], folder)
    go.touch()
    t0 = time.monotonic()
    for delay, proc in sorted(zip(delays, procs, strict=True), key=lambda d: d[0] or 1e9):
        if delay is not None:
            time.sleep(max(0.0, t0 + delay - time.monotonic()))
            proc.kill()
    for proc in procs:
        proc.wait(timeout=300)
    if all(d is None for d in delays):
        assert [p.returncode for p in procs] == [0] * len(procs)
    return urls, time.monotonic() - t0


def test_kill_9_during_ingest_leaves_no_partial_upload(
    db_url, exports, reference, tmp_path, request
):
    big, first = big_export(exports, tmp_path)
    engine = new_store(db_url, exports)
    for f in first:
        assert usecases.upload_path(engine, f).status == usecases.ACCEPTED
    base_counts = store_summary(engine)["counts"]
    engine.dispose()
    cluster = request.getfixturevalue("pg_cluster") if db_url.startswith("postgresql") else None
    stores = Stores(db_url, cluster)
    # how long the ingests take, run side by side as in the trials
    _, full = ingest_and_kill(stores, big, tmp_path, [None] * KILL_TRIALS)
    rng = random.Random(20261202)
    delays = [rng.uniform(0.0, full) for _ in range(KILL_TRIALS)]
    urls, _ = ingest_and_kill(stores, big, tmp_path, delays)
    outcomes = []
    for url in urls:
        engine = db.make_engine(url)
        killed = store_summary(engine)["counts"]  # the consistency rules are checked inside
        stored = killed["histogram"] != base_counts["histogram"]
        outcomes.append(stored)
        if not stored:
            assert killed == base_counts  # nothing of the big file
        if engine.dialect.name == "sqlite":
            with engine.connect() as conn:
                assert conn.exec_driver_sql("PRAGMA integrity_check").scalar() == "ok"
        results = usecases.ingest_paths(engine, [big, exports.orig / "readings"])
        assert {r.status for r in results} <= {usecases.ACCEPTED, usecases.DUPLICATE}
        got = store_summary(engine)
        engine.dispose()
        assert got["counts"] == reference["counts"]
        assert_same_ranking(got["rank"], reference["rank"])
    print(f"killed at {[round(d, 2) for d in delays]} s of {full:.2f} s; stored: {outcomes}")


# --- one file's fault is that file's refusal ---------------------------------------------


@pytest.fixture
def engine(sqlite_url, exports):
    eng = new_store(sqlite_url, exports)
    yield eng
    eng.dispose()


def snapshot(engine) -> dict:
    out = {}
    with engine.connect() as conn:
        for name, table in db.metadata.tables.items():
            out[name] = sorted(map(tuple, conn.execute(table.select()).all()), key=repr)
    return out


def raise_for(monkeypatch, bad_name: str, error: Exception) -> None:
    """The parser raises ``error`` for the file named ``bad_name`` (a parser fault)."""
    real = parse.parse_file

    def fake(data, name):  # noqa: ANN001, ANN202
        if name == bad_name:
            raise error
        return real(data, name)

    monkeypatch.setattr(parse, "parse_file", fake)


def test_unexpected_error_is_the_files_refusal_and_the_next_file_is_ingested(
    engine, exports, monkeypatch, caplog, tmp_path
):
    files = sorted((exports.orig / "histograms").glob("*.csv"))[:2]
    bad = tmp_path / "bad.csv"
    shutil.copyfile(files[0], bad)
    raise_for(monkeypatch, "bad.csv", RecursionError("maximum recursion depth exceeded"))
    before = snapshot(engine)
    with caplog.at_level(logging.ERROR, logger="monitor"):
        first = usecases.upload_path(engine, bad)
    assert snapshot(engine) == before
    assert first.status == usecases.REJECTED and len(first.problems) == 1
    message = str(first.problems[0])
    assert INTERNAL in message and "RecursionError" in message
    assert "store is unchanged" in message and "Traceback" not in message
    record = next(r for r in caplog.records if r.name == "monitor.usecases.telemetry")
    assert record.exc_info is not None and "bad.csv" in record.getMessage()
    results = usecases.ingest_paths(engine, [bad, *files])
    assert [r.status for r in results] == [usecases.REJECTED] + [usecases.ACCEPTED] * 2


def test_error_in_the_middle_of_the_writes_rolls_the_file_back(engine, exports, monkeypatch):
    files = sorted((exports.orig / "histograms").glob("*.csv"))[:2]
    real, calls = ledger_rows.write_upload, []

    def write_then_fail(conn, file_id, plan, compute):  # noqa: ANN001, ANN202
        real(conn, file_id, plan, compute)  # every row of the file written ...
        calls.append(file_id)
        if len(calls) == 1:
            raise MemoryError  # ... then a fault before the commit

    monkeypatch.setattr(ledger_rows, "write_upload", write_then_fail)
    before = snapshot(engine)
    res = usecases.upload_path(engine, files[0])
    assert res.status == usecases.REJECTED and "MemoryError" in str(res.problems[0])
    assert snapshot(engine) == before
    assert [r.status for r in usecases.ingest_paths(engine, files)] == [usecases.ACCEPTED] * 2


def test_cli_reports_the_refusal_goes_on_and_logs_the_traceback(
    engine, exports, monkeypatch, tmp_path
):
    good = sorted((exports.orig / "histograms").glob("*.csv"))[0]
    bad = tmp_path / "a-bad.csv"
    shutil.copyfile(good, bad)
    raise_for(monkeypatch, "a-bad.csv", OverflowError("int too large to convert to float"))
    log = tmp_path / "drivespan.log"
    url = str(engine.url.render_as_string(hide_password=False))
    res = CliRunner().invoke(
        cli.main, ["--log-file", str(log), "ingest", "--db", url, str(bad), str(good)]
    )
    assert res.exit_code == 1, res.output  # a file was refused
    assert "a-bad.csv: rejected" in res.stdout and INTERNAL in res.stdout
    assert f"{good.name}: accepted" in res.stdout
    assert "Traceback" not in res.output
    logged = log.read_text()
    assert "Traceback" in logged and "OverflowError" in logged and "a-bad.csv" in logged


def test_dashboard_upload_reports_the_refusal(engine, exports, monkeypatch):
    from dashboards import data

    good = sorted((exports.orig / "histograms").glob("*.csv"))[0]
    raise_for(monkeypatch, "bad.csv", ValueError("cannot convert"))
    url = str(engine.url.render_as_string(hide_password=False))
    res = data.upload(url, good.read_bytes(), "bad.csv")
    assert res.status == usecases.REJECTED and INTERNAL in str(res.problems[0])
    assert data.upload(url, good.read_bytes(), good.name).status == usecases.ACCEPTED


# --- the unique index as the last line of defence ---------------------------------------


def test_unique_violation_is_retried_once_then_reported_as_a_conflict(engine, exports, monkeypatch):
    """A check that misses a stored histogram (as a racing writer without the lock
    would) makes the insert break the unique index: the file is rolled back, tried again,
    and refused with a clear message if it breaks it again."""
    orig = sorted((exports.orig / "histograms").glob("*.csv"))[0]
    copy = exports.crlf / "histograms" / orig.name
    assert usecases.upload_path(engine, orig).status == usecases.ACCEPTED
    before = snapshot(engine)
    monkeypatch.setattr(checks, "_check_overlaps", lambda conn, plan, name: None)
    res = usecases.upload_path(engine, copy)
    assert res.status == usecases.REJECTED, res
    message = str(res.problems[0])
    assert "another upload stored the same rows at the same moment" in message
    assert "histogram" in message and "store is unchanged" in message
    assert snapshot(engine) == before


def test_unique_violation_then_a_clean_retry_skips_the_stored_rows(engine, exports, monkeypatch):
    orig = sorted((exports.orig / "histograms").glob("*.csv"))[0]
    copy = exports.crlf / "histograms" / orig.name
    first = usecases.upload_path(engine, orig)
    real, calls = checks._check_overlaps, []

    def blind_once(conn, plan, name):  # noqa: ANN001, ANN202
        calls.append(name)
        if len(calls) > 1:
            real(conn, plan, name)

    monkeypatch.setattr(checks, "_check_overlaps", blind_once)
    res = usecases.upload_path(engine, copy)
    assert len(calls) == 2  # rolled back and tried again
    assert res.status == usecases.ACCEPTED and res.histograms == 0
    assert res.skipped == first.histograms
