"""Use cases: what the CLI and the dashboard ask of drivespan.

Each function opens its own transaction, so a use case either happens whole or not
at all: a rejected upload leaves the store exactly as it was.
"""

from __future__ import annotations

import hashlib
from collections.abc import Callable, Iterable
from dataclasses import dataclass
from datetime import UTC, datetime
from pathlib import Path

from sqlalchemy import Engine, select

from monitor import checks, ingest, ledger, queries, registry, store
from monitor.records import ParsedFile, Problem

ACCEPTED, DUPLICATE, REJECTED, VALID = "accepted", "duplicate", "rejected", "valid"
REGISTRY_SUFFIXES = (".yaml", ".yml")
TELEMETRY_SUFFIXES = (".csv", ".json", ".txt")


class DomainError(Exception):
    """A request that cannot be carried out, with a message for the user."""

    def __init__(self, message: str, problems: Iterable[Problem] = ()) -> None:
        super().__init__(message)
        self.problems = tuple(problems)


@dataclass(frozen=True)
class FileResult:
    """What happened to one uploaded file."""

    name: str
    status: str  # accepted | duplicate | rejected | valid (dry run)
    histograms: int = 0
    readings: int = 0
    skipped: int = 0  # histograms/readings already stored with identical content
    problems: tuple[Problem, ...] = ()
    kind: str = "telemetry"  # telemetry | registry

    @property
    def summary(self) -> str:
        if self.status == REJECTED:
            return f"{self.name}: rejected, {len(self.problems)} problem(s)"
        if self.status == DUPLICATE:
            return f"{self.name}: duplicate of a file already stored, skipped"
        if self.kind == "registry":
            return f"{self.name}: registry {self.status}"
        verb = "valid" if self.status == VALID else "accepted"
        extra = f", {self.skipped} already stored" if self.skipped else ""
        return f"{self.name}: {verb}, {self.histograms} histogram(s), {self.readings} reading(s){extra}"


def init_db(url: str | None = None) -> Engine:
    """Create or upgrade the schema at ``url`` and return an engine for it."""
    engine = store.make_engine(url)
    store.upgrade(engine)
    return engine


# --- fleet registry -----------------------------------------------------------------


def import_registry(engine: Engine, data: bytes | str, name: str) -> queries.UpsertCounts:
    """Import a fleet registry file (idempotent upsert); raise DomainError if it is bad."""
    text = data.decode("utf-8") if isinstance(data, bytes) else data
    reg, problems = registry.load_registry(text, name)
    if problems or reg is None:
        raise DomainError(f"{name}: registry rejected, {len(problems)} problem(s)", problems)
    sha = hashlib.sha256(text.encode("utf-8")).hexdigest()
    with store.transaction(engine) as conn:
        counts = queries.upsert_registry(conn, reg)
        queries.save_registry_document(conn, sha, name, text)
        if counts.created or counts.updated:
            ledger.recompute(conn)  # ratings or rebuild dates may have changed
    return counts


def show_registry(engine: Engine) -> str | None:
    """The text of the last imported registry, or None."""
    with engine.connect() as conn:
        return queries.latest_registry_document(conn)


# --- telemetry ingest ---------------------------------------------------------------


def ingest_bytes(engine: Engine, data: bytes, name: str, *, dry_run: bool = False) -> FileResult:
    """Validate one telemetry file and, unless ``dry_run``, store it with its ledger rows."""
    parsed = ingest.parse_file(data, name)
    if parsed.problems:
        return FileResult(name, REJECTED, problems=tuple(parsed.problems))
    with store.transaction(engine) as conn:
        if _file_already_stored(conn, parsed.content_sha256):
            return FileResult(name, DUPLICATE)
        plan = checks.plan_upload(conn, parsed)
        if plan.problems:
            return FileResult(name, REJECTED, problems=tuple(plan.problems))
        result = FileResult(
            name,
            VALID if dry_run else ACCEPTED,
            histograms=len(plan.histograms),
            readings=len(plan.readings),
            skipped=plan.skipped,
        )
        if not dry_run:
            file_id = _insert_file(conn, parsed, plan)
            ledger.write_upload(conn, file_id, plan)
    return result


def _file_already_stored(conn, sha: str) -> bool:  # noqa: ANN001
    t = store.upload_file
    return conn.execute(select(t.c.id).where(t.c.sha256 == sha)).first() is not None


def _insert_file(conn, parsed: ParsedFile, plan: checks.UploadPlan) -> int:  # noqa: ANN001
    return conn.execute(
        store.upload_file.insert().values(
            sha256=parsed.content_sha256,
            name=parsed.name,
            received_at=datetime.now(UTC),
            n_histograms=len(plan.histograms),
            n_readings=len(plan.readings),
        )
    ).inserted_primary_key[0]


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
            return FileResult(name, REJECTED, problems=(Problem(name, None, None, None, msg),),
                              kind="registry")
        status = ACCEPTED if (counts.created or counts.updated) else DUPLICATE
        return FileResult(name, status, kind="registry")
    return ingest_bytes(engine, data, name, dry_run=dry_run)


def expand_paths(paths: Iterable[str | Path]) -> list[Path]:
    """Files named directly, plus telemetry files inside named folders (sorted)."""
    out: list[Path] = []
    for p in map(Path, paths):
        if p.is_dir():
            out.extend(
                sorted(f for f in p.rglob("*") if f.suffix.lower() in TELEMETRY_SUFFIXES)
            )
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
    with store.transaction(engine) as conn:
        return ledger.recompute(conn, progress=progress)
