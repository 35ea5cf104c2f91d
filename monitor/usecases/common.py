"""What every use case shares: the result of one file, the error a user sees, opening a
store, and today's date.

Each use case opens its own transaction, so it either happens whole or not at all: a
rejected upload leaves the store exactly as it was.
"""

from __future__ import annotations

from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass
from datetime import UTC, date, datetime
from pathlib import Path

from monitor.domain.errors import DomainError  # noqa: F401 - part of this module's interface
from monitor.domain.records import Problem
from monitor.domain.vocabulary import plural
from monitor.store import db
from monitor.store.db import Engine

ACCEPTED, DUPLICATE, REJECTED, VALID = "accepted", "duplicate", "rejected", "valid"


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
            return f"{self.name}: rejected, {plural(len(self.problems), 'problem')}"
        if self.status == DUPLICATE:
            return f"{self.name}: duplicate of a file already stored, skipped"
        if self.kind == "registry":
            return f"{self.name}: registry {self.status}"
        verb = "valid" if self.status == VALID else "accepted"
        extra = f", {self.skipped} already stored" if self.skipped else ""
        counts = f"{plural(self.histograms, 'histogram')}, {plural(self.readings, 'reading')}"
        return f"{self.name}: {verb}, {counts}{extra}"


def init_db(url: str | None = None, *, create: bool = True) -> Engine:
    """Create or upgrade the schema at ``url`` and return an engine for it.

    With ``create`` False a SQLite file that does not exist is refused (a mistyped
    ``--db`` must not make a new, empty store). A URL that names no usable store raises
    :class:`DomainError` saying what is wrong and what to do.
    """
    try:
        return db.open_store(url, create=create)
    except db.StoreUnavailable as err:
        raise DomainError(_with_hint(str(err), url)) from None


DEMO_STORE = "drivespan-demo/demo.db"
"""Where ``drivespan demo`` puts its store by default (relative to the working folder)."""


def _with_hint(message: str, url: str | None) -> str:
    """A missing-store message with what to do: create it, or use the demo's store."""
    if not message.startswith("no drivespan store"):
        return message
    shown = url or "sqlite:///drivespan.db"
    hint = f": create it with drivespan init --db {shown}, or name an existing one with --db"
    if Path(DEMO_STORE).is_file():
        hint += f" (the demo's store is {DEMO_STORE}: --db {DEMO_STORE})"
    return message + hint


@contextmanager
def locked_transaction(engine: Engine) -> Iterator[db.Connection]:
    """A transaction holding the whole store's write lock (registry import, recompute,
    service events); a lock not granted in time or a unique-rule conflict with another
    writer becomes a :class:`DomainError` saying to try again (nothing was written)."""
    try:
        with db.write_transaction(engine) as conn:
            yield conn
    except db.StoreBusy as err:
        raise DomainError(f"{err}: nothing was changed; try again in a moment") from None
    except db.WriteConflict:
        raise DomainError(
            "another process changed the same data at the same moment: nothing was "
            "changed; try again"
        ) from None


def _today() -> date:
    return datetime.now(UTC).date()
