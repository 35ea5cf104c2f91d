"""Use cases of the fleet registry: import, show, and whether one is there."""

from __future__ import annotations

import hashlib

from monitor.domain.records import Problem
from monitor.domain.vocabulary import plural
from monitor.store import ledger_rows, queries
from monitor.store.db import Engine
from monitor.usecases.common import DomainError, locked_transaction
from monitor.usecases.settings import ledger_compute, mark_ledger_current

REGISTRY_SUFFIXES = (".yaml", ".yml")


def import_registry(engine: Engine, data: bytes | str, name: str) -> queries.UpsertCounts:
    """Import a fleet registry file (idempotent upsert); raise DomainError if it is bad."""
    # loaded here: units (pint) and the life models are not needed by has_registry, which
    # every status command calls
    from monitor.ingest import registry

    text = _registry_text(data, name)
    reg, problems = registry.load_registry(text, name)
    if problems or reg is None:
        what = plural(len(problems), "problem")
        raise DomainError(f"{name}: registry rejected, {what}", problems)
    sha = hashlib.sha256(text.encode("utf-8")).hexdigest()
    with locked_transaction(engine) as conn:
        counts = queries.upsert_registry(conn, reg)
        queries.save_registry_document(conn, sha, name, text)
        if counts.created or counts.updated:
            # ratings, oil temperatures or contamination levels may have changed
            ledger_rows.recompute(conn, ledger_compute(conn))
            mark_ledger_current(conn)
    return counts


def _registry_text(data: bytes | str, name: str) -> str:
    if isinstance(data, str):
        return data
    try:
        return data.decode("utf-8-sig")
    except UnicodeDecodeError:
        msg = (
            f"{name} is not a text file (binary content, e.g. a spreadsheet, or not UTF-8): "
            "a fleet registry is a YAML text file in UTF-8, e.g. demo_fleet/sample/registry.yaml"
        )
        problem = Problem(name, None, None, None, msg)
        raise DomainError(f"{name}: registry rejected", (problem,)) from None


def show_registry(engine: Engine) -> str | None:
    """The text of the last imported registry, or None."""
    with engine.connect() as conn:
        return queries.latest_registry_document(conn)


def has_registry(engine: Engine) -> bool:
    """True once a fleet registry with at least one unit has been imported."""
    with engine.connect() as conn:
        return queries.any_unit(conn)
