"""Use cases of telemetry: validate and store exports, ingest folders, recompute the ledger.

Every file is handled on its own. Its checks against the store and its writes run in one
transaction under the store's write lock (:func:`monitor.store.db.write_transaction`), so
files ingested at the same moment by several processes count once, exactly as one after
the other. Whatever goes wrong with one file, that file is refused with a message and
the next one is handled: an unexpected error is logged with its traceback (logger
``monitor.usecases.telemetry``) and reported as the file's refusal, never raised.
"""

from __future__ import annotations

import logging
from collections.abc import Callable, Iterable
from pathlib import Path

import numpy as np

from monitor.domain.parsed import ParsedFile
from monitor.domain.records import Problem
from monitor.ingest import parse, registry, stream
from monitor.ingest.common import MAX_PROBLEMS
from monitor.ingest.limits import STREAM_THRESHOLD_BYTES
from monitor.ledger.batch_metrics import batch_metrics, oil_temp_problems
from monitor.store import checks, db, ledger_rows, queries
from monitor.store.db import Engine
from monitor.usecases.common import (
    ACCEPTED,
    DUPLICATE,
    REJECTED,
    VALID,
    DomainError,
    FileResult,
    locked_transaction,
)
from monitor.usecases.registry import REGISTRY_SUFFIXES, import_registry
from monitor.usecases.settings import ledger_compute, mark_ledger_current

TELEMETRY_SUFFIXES = (".csv", ".json", ".txt")
WRITE_ATTEMPTS = 2
"""Tries of one file's transaction when it breaks a unique rule of the store (another
writer stored the same rows first despite the lock, e.g. on a database without one): the
second try sees the other writer's rows and skips them or refuses the file."""

log = logging.getLogger(__name__)


def ingest_bytes(engine: Engine, data: bytes, name: str, *, dry_run: bool = False) -> FileResult:
    """Validate one telemetry file and, unless ``dry_run``, store it with its ledger rows.

    Never raises for a bad file or a fault of ours: every outcome is a :class:`FileResult`
    (see :func:`upload`)."""
    return _isolated(name, "telemetry", lambda: _ingest_telemetry(engine, data, name, dry_run))


def _ingest_telemetry(engine: Engine, data: bytes, name: str, dry_run: bool) -> FileResult:
    parsed = parse.parse_file(data, name)
    if parsed.problems:
        return FileResult(name, REJECTED, problems=tuple(parsed.problems))
    if dry_run:
        with db.transaction(engine) as conn:
            return _check_and_store(conn, parsed, name, dry_run=True)
    conflict = None
    for attempt in range(1, WRITE_ATTEMPTS + 1):
        try:
            with db.write_transaction(engine, units=_units(parsed)) as conn:
                return _check_and_store(conn, parsed, name, dry_run=False)
        except db.WriteConflict as err:
            log.warning("%s: write conflict on attempt %d: %s", name, attempt, err)
            conflict = err
        except db.StoreBusy as err:
            log.warning("%s: %s", name, err)
            return _refused(name, _BUSY.format(s=db.WRITE_LOCK_WAIT_S))
    return _refused(name, _CONFLICT.format(detail=conflict))


def _check_and_store(conn, parsed: ParsedFile, name: str, *, dry_run: bool) -> FileResult:  # noqa: ANN001
    """The checks against the store and, unless ``dry_run``, the writes (one transaction)."""
    if queries.file_stored(conn, parsed.content_sha256):
        return FileResult(name, DUPLICATE)
    plan = checks.plan_upload(conn, parsed)
    if not plan.problems:
        plan.problems.extend(_oil_temp_problems(conn, plan, name))
    if plan.problems:
        return FileResult(name, REJECTED, problems=tuple(plan.problems))
    result = FileResult(
        name,
        VALID if dry_run else ACCEPTED,
        histograms=plan.n_histograms,
        readings=len(plan.readings),
        skipped=plan.skipped,
    )
    if not dry_run:
        file_id = queries.insert_file(
            conn, parsed.content_sha256, name, plan.n_histograms, len(plan.readings)
        )
        ledger_rows.write_upload(conn, file_id, plan, ledger_compute(conn))
    return result


def _oil_temp_problems(conn, plan, name: str) -> list[Problem]:  # noqa: ANN001
    """Upload oil temperatures outside the sensible range of each drive's oil."""
    temps = plan.batch.oil_temp_c
    if not np.isfinite(temps).any():
        return []
    table = ledger_rows.component_table(conn, sorted({int(c) for c in plan.component_id}))
    lines = [None] * len(temps) if plan.batch.line is None else plan.batch.line.tolist()
    return oil_temp_problems(temps, plan.component_id, lines, table, name)


def _units(parsed: ParsedFile) -> set[str]:
    """Tags of the units a parsed file writes to (histograms and readings)."""
    return {str(u) for u in parsed.histogram_batch().unit.tolist()} | {
        r.unit for r in parsed.readings
    }


_INTERNAL = (
    "internal error while handling this file ({error}): nothing from it was stored and the "
    "store is unchanged. This is a fault in drivespan, not a problem found in the file; "
    "the details are in the log: please report it together with the file"
)
_CONFLICT = (
    "the file's rows break the store's rule that each histogram and reading is stored once "
    "({detail}): either another upload stored the same rows at the same moment, or the file "
    "repeats a histogram or reading. Nothing from it was stored and the store is unchanged; "
    "check the file for repeated rows and ingest it again (rows already stored are skipped)"
)
_BUSY = (
    "the store stayed busy with another upload for more than {s} s: nothing from this file "
    "was stored and the store is unchanged; ingest it again when the other upload is done"
)


def _refused(name: str, message: str, kind: str = "telemetry") -> FileResult:
    return FileResult(
        name, REJECTED, problems=(Problem(name, None, None, None, message),), kind=kind
    )


def _isolated(name: str, kind: str, work: Callable[[], FileResult]) -> FileResult:
    """``work()``, or the file's refusal when it raises anything unexpected (logged with
    its traceback). A transaction open at the error has been rolled back."""
    try:
        return work()
    except Exception as err:  # one file's fault must not stop the others
        log.exception("%s: unexpected error while handling the file", name)
        return _refused(name, _INTERNAL.format(error=type(err).__name__), kind)


def upload(engine: Engine, data: bytes, name: str, *, dry_run: bool = False) -> FileResult:
    """One uploaded file of any kind: a registry (.yaml/.yml) or telemetry export.

    Never raises for the file: a bad file is refused with its problems, and an
    unexpected error becomes the file's refusal (logged with its traceback)."""
    if name.lower().endswith(REGISTRY_SUFFIXES):
        return _isolated(name, "registry", lambda: _upload_registry(engine, data, name, dry_run))
    return ingest_bytes(engine, data, name, dry_run=dry_run)


def _upload_registry(engine: Engine, data: bytes, name: str, dry_run: bool) -> FileResult:
    if dry_run:
        _, problems = registry.load_registry(data.decode("utf-8", "replace"), name)
        status = REJECTED if problems else VALID
        return FileResult(name, status, problems=tuple(problems), kind="registry")
    try:
        counts = import_registry(engine, data, name)
    except DomainError as err:
        return FileResult(name, REJECTED, problems=err.problems, kind="registry")
    except UnicodeDecodeError:
        msg = "file is not UTF-8 text: save the registry as UTF-8 and upload it again"
        return _refused(name, msg, "registry")
    status = ACCEPTED if (counts.created or counts.updated) else DUPLICATE
    return FileResult(name, status, kind="registry")


def upload_path(engine: Engine, path: str | Path, *, dry_run: bool = False) -> FileResult:
    """:func:`upload` of a file on disk; a file that cannot be read is refused.

    A telemetry file larger than :data:`~monitor.ingest.limits.STREAM_THRESHOLD_BYTES`
    is read in parts (:func:`ingest_large`), so memory stays bounded."""
    path = Path(path)
    try:
        large = path.stat().st_size > STREAM_THRESHOLD_BYTES
        if large and not path.name.lower().endswith(REGISTRY_SUFFIXES):
            return ingest_large(engine, path, dry_run=dry_run)
        data = path.read_bytes()
    except OSError as err:
        return _refused(path.name, _unreadable(err))
    return upload(engine, data, path.name, dry_run=dry_run)


def _unreadable(err: OSError) -> str:
    return f"file cannot be read ({err.strerror or type(err).__name__}): nothing was stored"


def ingest_large(
    engine: Engine,
    path: str | Path,
    *,
    dry_run: bool = False,
    block_bytes: int = stream.STREAM_BLOCK_BYTES,
) -> FileResult:
    """Validate and store a telemetry CSV on disk read in parts of ``block_bytes`` bytes
    (:mod:`monitor.ingest.stream`), with the outcome of :func:`ingest_bytes`.

    The file is checked whole first (two reads); a file without problems is read a third
    time and its parts are checked against the store and written one after the other in
    ONE transaction under the store's write lock: a problem in any part, a unique-rule
    violation or an error rolls all of it back, so the file is stored whole or not at all.
    """
    path = Path(path)
    work = lambda: _ingest_large(engine, path, dry_run, block_bytes)  # noqa: E731
    return _isolated(path.name, "telemetry", work)


class _RolledBack(Exception):
    """Raised inside a file's transaction to roll it back with the file's result."""

    def __init__(self, result: FileResult) -> None:
        super().__init__(result.status)
        self.result = result


def _ingest_large(engine: Engine, path: Path, dry_run: bool, block_bytes: int) -> FileResult:
    name = path.name
    try:
        f = path.open("rb")
    except OSError as err:
        return _refused(name, _unreadable(err))
    with f:
        check = stream.check_stream(f, name, block_bytes)
        if check.problems:
            return FileResult(name, REJECTED, problems=tuple(check.problems))
        conflict = None
        for attempt in range(1, WRITE_ATTEMPTS + 1):
            try:
                if dry_run:
                    with db.transaction(engine) as conn:
                        return _store_parts(conn, f, check, dry_run=True)
                with db.write_transaction(engine, units=check.units) as conn:
                    return _store_parts(conn, f, check, dry_run=False)
            except _RolledBack as done:
                return done.result
            except stream.StreamChanged as err:
                log.warning("%s: %s", name, err)
                return _refused(name, _CHANGED)
            except db.WriteConflict as err:
                log.warning("%s: write conflict on attempt %d: %s", name, attempt, err)
                conflict = err
            except db.StoreBusy as err:
                log.warning("%s: %s", name, err)
                return _refused(name, _BUSY.format(s=db.WRITE_LOCK_WAIT_S))
    return _refused(name, _CONFLICT.format(detail=conflict))


def _store_parts(conn, f, check: stream.StreamCheck, *, dry_run: bool) -> FileResult:  # noqa: ANN001
    """The store checks and, unless ``dry_run``, the writes of a checked file, part by
    part; raises :class:`_RolledBack` with the refusal when a part has problems."""
    name = check.name
    if queries.file_stored(conn, check.content_sha256):
        return FileResult(name, DUPLICATE)
    file_id = None if dry_run else queries.insert_file(conn, check.content_sha256, name, 0, 0)
    problems: list[Problem] = []
    n_hist = n_read = skipped = 0
    for parsed in stream.stream_parts(f, check):
        plan = checks.plan_upload(conn, parsed)
        if plan.problems or problems:  # after a problem, parts are only checked
            problems.extend(plan.problems)
            if len(problems) >= MAX_PROBLEMS:
                problems = [*problems[:MAX_PROBLEMS], Problem(name, None, None, None, _STOPPED)]
                break
            continue
        n_hist, n_read = n_hist + plan.n_histograms, n_read + len(plan.readings)
        skipped += plan.skipped
        if not dry_run:
            ledger_rows.write_upload(conn, file_id, plan, batch_metrics)
    if problems:
        raise _RolledBack(FileResult(name, REJECTED, problems=tuple(problems)))
    if not dry_run:
        queries.set_file_counts(conn, file_id, n_hist, n_read)
    status = VALID if dry_run else ACCEPTED
    return FileResult(name, status, histograms=n_hist, readings=n_read, skipped=skipped)


_STOPPED = (
    f"checking stopped after {MAX_PROBLEMS} problems: fix these and check the file again to "
    "see the rest"
)
_CHANGED = (
    "the file changed while it was being read: nothing from it was stored and the store is "
    "unchanged; ingest it again once it is complete"
)


def expand_paths(paths: Iterable[str | Path]) -> list[Path]:
    """Files named directly, plus telemetry files inside named folders (sorted)."""
    out: list[Path] = []
    for p in map(Path, paths):
        if p.is_dir():
            out.extend(sorted(f for f in p.rglob("*") if f.suffix.lower() in TELEMETRY_SUFFIXES))
        elif p.exists():
            out.append(p)
        else:
            raise DomainError(f"{p}: no such file or folder")
    return out


def ingest_paths(
    engine: Engine,
    paths: Iterable[str | Path],
    *,
    dry_run: bool = False,
    progress: Callable[[Path], None] | None = None,
) -> list[FileResult]:
    """Ingest files and folders, one transaction per file; every file gets its result."""
    results = []
    for path in expand_paths(paths):
        results.append(upload_path(engine, path, dry_run=dry_run))
        if progress is not None:
            progress(path)
    return results


def recompute(engine: Engine, progress: Callable[[int, int], None] | None = None) -> int:
    """Rebuild the whole damage ledger from the stored histograms; return its row count.

    Holds the store's write lock, so no upload is stored meanwhile."""
    with locked_transaction(engine) as conn:
        n = ledger_rows.recompute(conn, ledger_compute(conn), progress=progress)
        mark_ledger_current(conn)
        return n
