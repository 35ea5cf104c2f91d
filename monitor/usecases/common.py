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

from monitor.domain.errors import DomainError  # noqa: F401 - part of this module's interface
from monitor.domain.records import Problem
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
            return f"{self.name}: rejected, {len(self.problems)} problem(s)"
        if self.status == DUPLICATE:
            return f"{self.name}: duplicate of a file already stored, skipped"
        if self.kind == "registry":
            return f"{self.name}: registry {self.status}"
        verb = "valid" if self.status == VALID else "accepted"
        extra = f", {self.skipped} already stored" if self.skipped else ""
        counts = f"{self.histograms} histogram(s), {self.readings} reading(s)"
        return f"{self.name}: {verb}, {counts}{extra}"


def init_db(url: str | None = None) -> Engine:
    """Create or upgrade the schema at ``url`` and return an engine for it."""
    engine = db.make_engine(url)
    db.upgrade(engine)
    return engine


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
