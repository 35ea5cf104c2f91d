"""Use cases of telemetry: validate and store exports, ingest folders, recompute the ledger."""

from __future__ import annotations

from collections.abc import Callable, Iterable
from pathlib import Path

from monitor.domain.records import Problem
from monitor.ingest import parse, registry
from monitor.ledger.batch_metrics import batch_metrics
from monitor.store import checks, db, ledger_rows, queries
from monitor.store.db import Engine
from monitor.usecases.common import (
    ACCEPTED,
    DUPLICATE,
    REJECTED,
    VALID,
    DomainError,
    FileResult,
)
from monitor.usecases.registry import REGISTRY_SUFFIXES, import_registry

TELEMETRY_SUFFIXES = (".csv", ".json", ".txt")


def ingest_bytes(engine: Engine, data: bytes, name: str, *, dry_run: bool = False) -> FileResult:
    """Validate one telemetry file and, unless ``dry_run``, store it with its ledger rows."""
    parsed = parse.parse_file(data, name)
    if parsed.problems:
        return FileResult(name, REJECTED, problems=tuple(parsed.problems))
    with db.transaction(engine) as conn:
        if queries.file_stored(conn, parsed.content_sha256):
            return FileResult(name, DUPLICATE)
        plan = checks.plan_upload(conn, parsed)
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
            ledger_rows.write_upload(conn, file_id, plan, batch_metrics)
    return result


def upload(engine: Engine, data: bytes, name: str, *, dry_run: bool = False) -> FileResult:
    """One uploaded file of any kind: a registry (.yaml/.yml) or telemetry export."""
    if name.lower().endswith(REGISTRY_SUFFIXES):
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
            return FileResult(
                name, REJECTED, problems=(Problem(name, None, None, None, msg),), kind="registry"
            )
        status = ACCEPTED if (counts.created or counts.updated) else DUPLICATE
        return FileResult(name, status, kind="registry")
    return ingest_bytes(engine, data, name, dry_run=dry_run)


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
    """Ingest files and folders, one transaction per file."""
    results = []
    for path in expand_paths(paths):
        results.append(upload(engine, path.read_bytes(), path.name, dry_run=dry_run))
        if progress is not None:
            progress(path)
    return results


def recompute(engine: Engine, progress: Callable[[int, int], None] | None = None) -> int:
    """Rebuild the whole damage ledger from the stored histograms; return its row count."""
    with db.transaction(engine) as conn:
        return ledger_rows.recompute(conn, batch_metrics, progress=progress)
