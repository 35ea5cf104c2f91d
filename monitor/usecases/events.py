"""Use cases of service events: rebuilds, replacements and hour-meter changes."""

from __future__ import annotations

from datetime import UTC, datetime, timedelta

from monitor.domain.vocabulary import SERVICE_REASONS
from monitor.ingest.limits import EARLIEST_TIME, LATEST_TIME, MAX_HOUR_METER_H, TIME_RANGE_TEXT
from monitor.store import queries
from monitor.store.db import Engine
from monitor.usecases.common import DomainError, locked_transaction
from monitor.usecases.status import _unknown_unit

SERVICE_KINDS = ("rebuild", "replacement", "hour_meter_change")

FUTURE_TOLERANCE = timedelta(minutes=10)
"""How far past the clock an event time may lie (clock differences) [min]."""
METER_SLACK_H = 1.0
"""Hours an hour meter may read above the most it could have run since the last upload [h]
(rounding of the readings; common practice, no source)."""


def add_service_event(
    engine: Engine,
    tag: str,
    *,
    kind: str,
    at: datetime,
    hour_meter: float,
    position: str | None = None,
    new_hour_meter: float | None = None,
    note: str | None = None,
    reason: str | None = None,
) -> dict:
    """Record a rebuild, replacement or hour-meter change of a unit; return it as a dict.

    A rebuild or replacement needs the component's ``position``; an hour-meter change
    is of the whole unit and needs ``new_hour_meter``. ``reason`` says why a rebuild or
    replacement ended the life (one of :data:`SERVICE_REASONS`; none reads ``other``).
    The ledger is not rewritten: its damage values do not depend on rebuilds; the status
    reads only the rows after the last rebuild. Raises DomainError with what to correct.
    """
    event = _checked_event(tag, kind, at, hour_meter, position, new_hour_meter)
    _check_reason(kind, reason)
    with locked_transaction(engine) as conn:
        unit = queries.unit_id(conn, tag)
        if unit is None:
            raise _unknown_unit(conn, tag)
        comp_id = None
        if position is not None:
            comp_id = _component_id(conn, unit, tag, position)
        _check_meter(conn, unit, tag, event["at"], hour_meter)
        if queries.service_event_exists(conn, unit, kind, event["at"], comp_id):
            raise DomainError(
                f"a {kind} of {tag} {position or ''} at "
                f"{event['at'].isoformat()} is already recorded"
            )
        queries.insert_service_event(
            conn,
            unit_id=unit,
            component_id=comp_id,
            note=note,
            kind=kind,
            at=event["at"],
            hour_meter=hour_meter,
            new_hour_meter=new_hour_meter,
            reason=reason,
        )
    return {"unit": tag, "position": position, "note": note, "reason": reason, **event}


def _check_meter(conn, unit: int, tag: str, at: datetime, hour_meter: float) -> None:  # noqa: ANN001
    """Refuse an hour meter the unit cannot have reached by ``at``: more than 24 h per
    calendar day after its last upload before the event."""
    last = queries.last_upload_before(conn, unit, at)
    if last is None:
        return
    end, meter = last
    most = meter + 24.0 * (at - end).total_seconds() / 86400.0 + METER_SLACK_H
    if hour_meter > most:
        raise DomainError(
            f"hour meter {hour_meter:,.1f} h is beyond what {tag} can have run by "
            f"{at:%Y-%m-%d %H:%M} UTC: its last upload ended at {meter:,.1f} h on "
            f"{end:%Y-%m-%d}, so the meter reads at most {most:,.1f} h; check --hour-meter "
            "and --at"
        )


def _check_reason(kind: str, reason: str | None) -> None:
    if reason is None:
        return
    if kind == "hour_meter_change":
        raise DomainError("--reason applies only to a rebuild or replacement (why the life ended)")
    if reason not in SERVICE_REASONS:
        valid = ", ".join(SERVICE_REASONS)
        raise DomainError(f"reason {reason!r} is not known: use one of {valid}")


def _checked_event(tag, kind, at, hour_meter, position, new_hour_meter) -> dict:  # noqa: ANN001
    if kind not in SERVICE_KINDS:
        raise DomainError(f"kind {kind!r} is not known: use one of {', '.join(SERVICE_KINDS)}")
    if at.tzinfo is None:
        raise DomainError("the service time needs a UTC offset, e.g. 2026-11-20T08:00:00Z")
    if not EARLIEST_TIME <= at < LATEST_TIME:
        raise DomainError(
            f"the service time {at.isoformat()} is outside the plausible range {TIME_RANGE_TEXT}"
        )
    for name, h in (("hour meter", hour_meter), ("new hour meter", new_hour_meter)):
        if h is not None and not (0 <= h <= MAX_HOUR_METER_H):
            raise DomainError(
                f"{name} must be a reading from 0 to {MAX_HOUR_METER_H:.0f} h, got {h!r}"
            )
    if at.tzinfo is not None and at.astimezone(UTC) > datetime.now(UTC) + FUTURE_TOLERANCE:
        raise DomainError(
            f"the service time {at.isoformat()} is in the future: record an event once it "
            "has happened (give --at as an ISO 8601 time with offset)"
        )
    if not (hour_meter >= 0) or hour_meter == float("inf"):
        raise DomainError(f"hour meter must be a reading >= 0 h, got {hour_meter!r}")
    if kind == "hour_meter_change":
        if position is not None:
            raise DomainError("an hour_meter_change is of the whole unit: leave out --position")
        if new_hour_meter is None or not (new_hour_meter >= 0):
            raise DomainError(
                "an hour_meter_change needs the new meter's reading (--new-hour-meter H, >= 0)"
            )
    else:
        if position is None:
            raise DomainError(f"a {kind} is of one component: give its --position")
        if new_hour_meter is not None:
            raise DomainError("--new-hour-meter applies only to kind hour_meter_change")
    return {
        "kind": kind,
        "at": at.astimezone(UTC),
        "hour_meter": float(hour_meter),
        "new_hour_meter": new_hour_meter,
    }


def _component_id(conn, unit_id: int, tag: str, position: str) -> int:  # noqa: ANN001
    rows = queries.component_positions(conn, unit_id)
    if position not in rows:
        raise DomainError(
            f"unit {tag} has no component at position {position!r} "
            f"(registered positions: {', '.join(sorted(rows)) or 'none'})"
        )
    return rows[position]
