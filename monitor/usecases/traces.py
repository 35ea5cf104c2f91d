"""Use cases of pressure traces: store a logged trace as an ordinary upload, with its summary.

A technician's logger file (both loop pressures, often speed, at 10 Hz to 1 kHz) is read
in chunks (:func:`monitor.ingest.trace.read_trace`) with the drive's relief and cut-off
settings from the registry, turned into ordinary time-at-pressure histograms and stored
through the same checks and ledger writes as a histogram file: it enters the ledger,
the ranking and the duplicate check like any export. What only a trace shows (cycles,
excursions, stall times, notes, the plotting envelope) is kept beside it in one JSON
document. A trace with any problem changes nothing.
"""

from __future__ import annotations

import hashlib
import json
from dataclasses import dataclass
from datetime import datetime
from typing import Any

from monitor.domain.parsed import ParsedFile
from monitor.domain.records import Problem
from monitor.ingest.trace import TraceSettings, read_trace, trace_histograms
from monitor.ingest.trace_summary import read_sidecar, stored_summary
from monitor.store import checks, db, ledger_rows, queries
from monitor.store import traces as trace_rows
from monitor.store.db import Engine
from monitor.usecases.common import ACCEPTED, DUPLICATE, REJECTED, FileResult
from monitor.usecases.settings import ledger_compute

DEFAULT_MAX_GAP_S = 2.0
"""Longest interval between samples counted as logged time [s]; longer ones are gaps,
left out of the histogram and reported (the same default as
:data:`monitor.models.trace.DEFAULT_MAX_GAP_S`)."""

ENVELOPE_BUCKETS = 1000
"""The stored plotting envelope keeps 1 000 to 2 000 min-max buckets per channel: about
one per pixel of a wide chart."""

START_TOLERANCE_S = 1.0
"""A start time given with a file that has timestamps may differ from its first
timestamp by at most this much [s]."""


@dataclass(frozen=True)
class TraceFileResult(FileResult):
    """What happened to one trace file; ``trace`` is the stored summary document when it
    was accepted (see :func:`monitor.ingest.trace_summary.stored_summary`)."""

    trace: dict | None = None


def _reject(name: str, problems: list[Problem]) -> TraceFileResult:
    return TraceFileResult(name, REJECTED, problems=tuple(problems), kind="trace")


def _start_time(value: datetime | str | None, name: str, probs: list) -> datetime | None:
    if value is None or isinstance(value, datetime):
        if isinstance(value, datetime) and value.tzinfo is None:
            probs.append(
                Problem(
                    name,
                    None,
                    "started_at",
                    value.isoformat(),
                    "start time has no UTC offset: add Z or e.g. +02:00",
                )
            )
            return None
        return value
    text = str(value).strip()
    try:
        when = datetime.fromisoformat(text.replace("Z", "+00:00").replace("z", "+00:00"))
    except ValueError:
        when = None
    if when is None or when.tzinfo is None:
        probs.append(
            Problem(
                name,
                None,
                "started_at",
                text,
                "expected ISO 8601 with an offset, e.g. 2026-03-02T10:00:00Z",
            )
        )
        return None
    return when


def _check_numbers(name: str, hour_meter_start: Any, max_gap_s: Any, probs: list) -> None:
    for field, value, rule in (
        ("hour_meter_start", hour_meter_start, "a number of hours >= 0"),
        ("max_gap_s", max_gap_s, "a number of seconds > 0"),
    ):
        ok = isinstance(value, int | float) and not isinstance(value, bool)
        ok = ok and value == value and abs(value) != float("inf")  # finite
        ok = ok and (value >= 0 if field == "hour_meter_start" else value > 0)
        if not ok:
            probs.append(Problem(name, None, field, str(value), f"expected {rule}"))


def _drive(engine: Engine, name: str, unit: str, position: str, probs: list) -> dict | None:
    """The drive's component id and relief / cut-off settings, or a problem."""
    with engine.connect() as conn:
        drive = trace_rows.drive_settings(conn, unit, position)
        if drive is not None:
            return drive
        uid = queries.unit_id(conn, unit)
        known = sorted(queries.component_positions(conn, uid)) if uid is not None else []
    if uid is None:
        msg = "unit is not in the fleet registry: check the tag, or import the unit first"
        probs.append(Problem(name, None, "unit", unit, msg))
    else:
        msg = f"unit {unit} has no drive at this position; its positions: {', '.join(known)}"
        probs.append(Problem(name, None, "position", position, msg))
    return None


def ingest_trace(
    engine: Engine,
    data: bytes,
    name: str,
    unit: str,
    position: str,
    hour_meter_start: float,
    started_at: datetime | str | None = None,
    max_gap_s: float = DEFAULT_MAX_GAP_S,
) -> TraceFileResult:
    """Validate one pressure-trace CSV and store it as an upload of ``unit``/``position``.

    Parameters
    ----------
    engine : Engine
        The store.
    data : bytes
        The trace file (format in docs/formats.md, "Pressure traces").
    name : str
        File name shown in problems and kept with the upload.
    unit, position : str
        The unit's tag and the drive loop's position, as in the fleet registry.
    hour_meter_start : float
        Hour meter at the first sample [h]; the end is this plus the trace's length.
    started_at : datetime or str, optional
        Time of the first sample (ISO 8601 with an offset); required when the file has
        no ``timestamp`` column, and must agree with it (within 1 s) when it has.
    max_gap_s : float
        Longer intervals between samples are gaps, left out and reported [s].

    Returns
    -------
    TraceFileResult
        Accepted (with the stored summary), duplicate (the same file content is stored),
        or rejected with every problem; a rejected trace changes nothing.
    """
    probs: list[Problem] = []
    _check_numbers(name, hour_meter_start, max_gap_s, probs)
    start = _start_time(started_at, name, probs)
    drive = _drive(engine, name, unit, position, probs)
    if probs:
        return _reject(name, probs)
    settings = TraceSettings(
        max_gap_s=float(max_gap_s),
        relief_bar=drive["relief_bar"],
        cutoff_bar=drive["cutoff_bar"],
        envelope_buckets=ENVELOPE_BUCKETS,
    )
    result = read_trace(data, name, settings)
    if not result.ok:
        return _reject(name, list(result.problems))
    start = _resolve_start(result.started_at, start, name, probs)
    if start is None:
        return _reject(name, probs)
    hists = trace_histograms(
        result,
        unit=unit,
        position=position,
        hour_meter_start=float(hour_meter_start),
        started_at=start,
    )
    doc = stored_summary(result, started_at=start, hour_meter_start=float(hour_meter_start))
    parsed = ParsedFile(name, hashlib.sha256(data).hexdigest(), histograms=hists)
    return _store(engine, parsed, drive["component_id"], doc)


def _resolve_start(
    in_file: datetime | None, given: datetime | None, name: str, probs: list
) -> datetime | None:
    if in_file is None and given is None:
        probs.append(
            Problem(
                name,
                None,
                "started_at",
                None,
                "the file has no timestamp column (only time_s): give the time of "
                "the first sample, e.g. --started-at 2026-03-02T10:00:00Z",
            )
        )
        return None
    if in_file is not None and given is not None:
        if abs((in_file - given).total_seconds()) > START_TOLERANCE_S:
            probs.append(
                Problem(
                    name,
                    None,
                    "started_at",
                    given.isoformat(),
                    f"the file's first timestamp is {in_file.isoformat()}: leave "
                    "the start time out, or correct it",
                )
            )
            return None
    return in_file or given


def _store(engine: Engine, parsed: ParsedFile, component_id: int, doc: dict) -> TraceFileResult:
    """The same checks and writes as a histogram file, plus the summary, in one transaction."""
    name = parsed.name
    try:
        return _store_locked(engine, parsed, component_id, doc)
    except db.StoreBusy as err:
        msg = f"{err}: nothing from this trace was stored; try again in a moment"
    except db.WriteConflict as err:
        msg = (
            f"another upload stored rows for the same drive and period at the same moment "
            f"({err}): nothing from this trace was stored; ingest it again"
        )
    return _reject(name, [Problem(name, None, None, None, msg)])


def _store_locked(
    engine: Engine, parsed: ParsedFile, component_id: int, doc: dict
) -> TraceFileResult:
    """:func:`_store` under the store's write lock for the trace's unit."""
    name = parsed.name
    units = {str(u) for u in parsed.histogram_batch().unit.tolist()}
    with db.write_transaction(engine, units=units) as conn:
        if queries.file_stored(conn, parsed.content_sha256):
            return TraceFileResult(name, DUPLICATE, kind="trace")
        plan = checks.plan_upload(conn, parsed)
        if plan.problems:
            return _reject(name, plan.problems)
        file_id = queries.insert_file(conn, parsed.content_sha256, name, plan.n_histograms, 0)
        ledger_rows.write_upload(conn, file_id, plan, ledger_compute(conn))
        trace_rows.insert_summary(conn, file_id, component_id, json.dumps(doc))
    return TraceFileResult(
        name, ACCEPTED, histograms=plan.n_histograms, skipped=plan.skipped, kind="trace", trace=doc
    )


def trace_sidecar(data: bytes, name: str) -> dict:
    """The fields of a trace's sidecar JSON file (``FILE.json``); raises DomainError with
    the problems when it is not a valid sidecar."""
    from monitor.usecases.common import DomainError

    fields, problems = read_sidecar(data, name)
    if problems:
        raise DomainError(f"{name}: not a valid trace sidecar file", problems=problems)
    return fields
