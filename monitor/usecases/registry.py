"""Use cases of the fleet registry: import, show, and whether one is there."""

from __future__ import annotations

import dataclasses
import hashlib

from monitor.domain.records import Problem
from monitor.domain.specs import Registry
from monitor.domain.vocabulary import plural
from monitor.store import queries
from monitor.store.db import Engine
from monitor.usecases.common import DomainError, locked_transaction
from monitor.usecases.settings import ledger_compute, mark_ledger_current

REGISTRY_SUFFIXES = (".yaml", ".yml")


def import_registry(engine: Engine, data: bytes | str, name: str) -> queries.UpsertCounts:
    """Import a fleet registry file (idempotent upsert); raise DomainError if it is bad."""
    # loaded here: units (pint), the life models and the ledger are not needed by
    # has_registry, which every status command calls
    from monitor.ingest import registry
    from monitor.store import ledger_rows

    text = _registry_text(data, name)
    reg, problems = registry.load_registry(text, name)
    if problems or reg is None:
        what = plural(len(problems), "problem")
        raise DomainError(f"{name}: registry rejected, {what}", problems)
    sha = hashlib.sha256(text.encode("utf-8")).hexdigest()
    stored = _with_line_viscosities(reg)
    with locked_transaction(engine) as conn:
        _complete_oils(conn)  # a store from before: its oils must not count as changed
        counts = queries.upsert_registry(conn, stored)
        queries.save_registry_document(conn, sha, name, text)
        if counts.created or counts.updated:
            # ratings, oil temperatures or contamination levels may have changed
            ledger_rows.recompute(conn, ledger_compute(conn))
            mark_ledger_current(conn)
    return counts


def _with_line_viscosities(reg: Registry) -> Registry:
    """The registry as stored: an oil given by grade and viscosity index also gets the
    100 degC viscosity its index gives (:func:`monitor.models.oil.line_nu100_mm2s`).

    Every status draws the oil's viscosity line through it; found here once, a status
    command neither solves for it nor loads ``scipy.optimize`` (about 0.2-0.5 s a
    process). The file's own values are stored as given; a changed index changes it.
    """
    from monitor.models import oil

    oils = tuple(
        dataclasses.replace(
            o,
            nu100_mm2s=oil.line_nu100_mm2s(o.iso_vg, o.viscosity_index, o.nu40_mm2s, o.nu100_mm2s),
        )
        for o in reg.oils
    )
    return dataclasses.replace(reg, oils=oils)


def _complete_oils(conn) -> int:  # noqa: ANN001 - an open store connection
    """Store the derived 100 degC viscosity of oils imported before it was stored; the
    number of oils completed."""
    from monitor.models import oil

    done = 0
    for o in queries.oils_without_nu100(conn):
        nu100 = oil.line_nu100_mm2s(o.iso_vg, o.viscosity_index, o.nu40_mm2s, None)
        if nu100 is not None:
            queries.set_oil_nu100(conn, o.name, nu100)
            done += 1
    return done


def complete_oil_viscosities(engine: Engine) -> int:
    """Store the 100 degC viscosity of every oil of an older store that is given by grade
    and viscosity index but has none stored (``drivespan init`` does this); return how
    many oils were completed.

    Without it a status still finds the viscosity, solving for it every time; the
    numbers are the same either way.
    """
    with locked_transaction(engine) as conn:
        return _complete_oils(conn)


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
