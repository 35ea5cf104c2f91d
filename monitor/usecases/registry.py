"""Use cases of the fleet registry: import, show, and whether one is there."""

from __future__ import annotations

import hashlib

from monitor.domain.records import Problem
from monitor.store import ledger_rows, queries
from monitor.store.db import Engine
from monitor.usecases.common import DomainError, locked_transaction

REGISTRY_SUFFIXES = (".yaml", ".yml")


def import_registry(engine: Engine, data: bytes | str, name: str) -> queries.UpsertCounts:
    """Import a fleet registry file (idempotent upsert); raise DomainError if it is bad."""
    # loaded here: units (pint) and the life models are not needed by has_registry, which
    # every status command calls
    from monitor.ingest import registry
    from monitor.ledger.batch_metrics import batch_metrics

    try:
        text = data.decode("utf-8-sig") if isinstance(data, bytes) else data
    except UnicodeDecodeError:
        msg = "file is not UTF-8 text: save the registry as UTF-8 and import it again"
        problem = Problem(name, None, None, None, msg)
        raise DomainError(f"{name}: registry rejected", (problem,)) from None
    reg, problems = registry.load_registry(text, name)
    if problems or reg is None:
        raise DomainError(f"{name}: registry rejected, {len(problems)} problem(s)", problems)
    sha = hashlib.sha256(text.encode("utf-8")).hexdigest()
    with locked_transaction(engine) as conn:
        counts = queries.upsert_registry(conn, reg)
        queries.save_registry_document(conn, sha, name, text)
        if counts.created or counts.updated:
            ledger_rows.recompute(conn, batch_metrics)  # ratings or rebuild dates may have changed
    return counts


def show_registry(engine: Engine) -> str | None:
    """The text of the last imported registry, or None."""
    with engine.connect() as conn:
        return queries.latest_registry_document(conn)


def has_registry(engine: Engine) -> bool:
    """True once a fleet registry with at least one unit has been imported."""
    with engine.connect() as conn:
        return queries.any_unit(conn)
