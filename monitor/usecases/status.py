"""Use cases of the fleet status: ranking, one unit's report."""

from __future__ import annotations

import difflib
import json
from dataclasses import dataclass, field
from datetime import date, datetime, timedelta

import pandas as pd

from monitor import fleet
from monitor.fleet import RANK_COLUMNS  # noqa: F401 - part of this module's interface
from monitor.fleet.status import plain_value
from monitor.store import queries, status_reads
from monitor.store import traces as trace_rows
from monitor.store.db import Engine
from monitor.usecases.common import DomainError, _today
from monitor.usecases.settings import _params_for


def fleet_status(
    engine: Engine,
    as_of: date | None = None,
    *,
    reliability_pct: float | None = None,
    rate_window_h: float | None = None,
    site: str | None = None,
) -> pd.DataFrame:
    """Status of every component at the start of ``as_of`` (default today), most urgent first.

    Columns: :data:`monitor.fleet.STATUS_COLUMNS`. An empty store gives an empty frame.
    Raises DomainError for an unknown site or a setting out of range.
    """
    params = _params_for(engine, reliability_pct, rate_window_h)
    as_of = as_of or _today()
    t = fleet.as_of_instant(as_of)
    with engine.connect() as conn:
        if site is not None:
            _check_site(conn, site)
        inputs = status_reads.status_inputs(
            conn,
            t,
            rate_window_h=params.rate_window_h,
            utilisation_days=params.utilisation_days,
            site=site,
        )
        ids = inputs["component_id"].tolist() if site is not None else None
        readings = status_reads.readings_in_life(conn, t, ids)
    return fleet.fleet_status(inputs, readings, as_of, params)


def _check_site(conn, site: str) -> None:  # noqa: ANN001
    names = queries.site_names(conn)
    if site not in names:
        raise DomainError(
            f"site {site!r} is not in the fleet registry; known sites: "
            f"{', '.join(names) or 'none (import a registry first)'}"
        )


def rank_records(df: pd.DataFrame) -> list[dict]:
    """JSON-ready records of a status frame with exactly the rank keys."""
    return fleet.rank_records(df)


@dataclass(frozen=True)
class ComponentDetail:
    """Everything the unit view shows about one component (see the API contract)."""

    model: object  # monitor.records.ComponentModelSpec
    spectrum: pd.DataFrame
    life: pd.DataFrame
    projection: pd.DataFrame
    case_drain: pd.DataFrame
    trend: object | None
    case_drain_limit_lpm: float | None
    relief_monthly: pd.DataFrame
    oil_samples: pd.DataFrame
    traces: tuple = ()
    """Stored pressure-trace summaries of the drive, oldest first (JSON documents, see
    :func:`monitor.ingest.trace_summary.stored_summary`)."""


@dataclass(frozen=True)
class UnitReport:
    """One unit: its status rows, per-component detail, uploads, service and summary;
    ``traces`` lists its stored pressure traces (:func:`monitor.fleet.detail.trace_list`)."""

    unit: dict
    status: pd.DataFrame
    components: dict
    service_history: pd.DataFrame
    uploads: pd.DataFrame
    summary: list
    traces: pd.DataFrame = field(default_factory=lambda: fleet.trace_list([], []))


def _unknown_unit(conn, tag: str) -> DomainError:  # noqa: ANN001
    tags = status_reads.unit_tags(conn)
    if not tags:
        return DomainError(
            f"unit {tag!r} not found: no fleet registry imported yet (drivespan fleet import FILE)"
        )
    close = difflib.get_close_matches(tag, tags, n=3, cutoff=0.5)
    hint = f"; did you mean {', '.join(close)}?" if close else f"; {len(tags)} units registered"
    return DomainError(f"unit {tag!r} is not in the fleet registry{hint}")


def unit_report(
    engine: Engine,
    tag: str,
    as_of: date | None = None,
    *,
    reliability_pct: float | None = None,
    rate_window_h: float | None = None,
) -> UnitReport:
    """Status and detail of one unit at the start of ``as_of`` (default today)."""
    params = _params_for(engine, reliability_pct, rate_window_h)
    as_of = as_of or _today()
    t = fleet.as_of_instant(as_of)
    with engine.connect() as conn:
        unit = status_reads.unit_row(conn, tag)
        if unit is None:
            raise _unknown_unit(conn, tag)
        inputs = status_reads.status_inputs(
            conn,
            t,
            rate_window_h=params.rate_window_h,
            utilisation_days=params.utilisation_days,
            unit_tag=tag,
        )
        readings = status_reads.readings_in_life(conn, t, inputs["component_id"].tolist())
        status = fleet.fleet_status(inputs, readings, as_of, params)
        stored = trace_rows.unit_summaries(conn, unit["id"])
        docs = [json.loads(text) for text in stored["summary"]]
        by_component: dict[int, list] = {}
        for cid, doc in zip(stored["component_id"].tolist(), docs, strict=True):
            by_component.setdefault(int(cid), []).append(doc)
        details = {
            row["position"]: _component_detail(
                conn, row, status, t, params, tuple(by_component.get(row["component_id"], ()))
            )
            for row in inputs.to_dict("records")
        }
        history = status_reads.service_history(conn, unit["id"])
        uploads = status_reads.recent_uploads(conn, unit["id"], t)
    info = {k: unit[k] for k in ("tag", "site", "machine_type", "oil")}
    return UnitReport(
        unit=info,
        status=status,
        components=details,
        service_history=history,
        uploads=uploads,
        summary=fleet.unit_summary(status, params),
        traces=fleet.trace_list(stored["position"].tolist(), docs),
    )


def _component_detail(
    conn, row: dict, status: pd.DataFrame, t: datetime, params, traces: tuple = ()
) -> ComponentDetail:  # noqa: ANN001
    cid = int(row["component_id"])
    srow = status[status["component_id"] == cid].iloc[0]
    rebuilt = row["rebuilt_at"] if pd.notna(row["rebuilt_at"]) else None
    life_rows = status_reads.ledger_rows(
        conn, cid, row["base_period_end"] if pd.notna(row["base_period_end"]) else None, t
    )
    window = fleet.window_rows(life_rows, params.rate_window_h)
    hists = status_reads.histogram_rows(conn, cid, window["upload_id"].tolist())
    year = status_reads.ledger_rows(conn, cid, t - timedelta(days=365), t)
    readings = status_reads.component_readings(conn, cid, t)
    model = queries.model_spec(row)
    life, projection = fleet.life_curve(life_rows, srow, params)
    case_drain, trend = fleet.case_drain_detail(readings, row, rebuilt, srow, params)
    return ComponentDetail(
        model=model,
        spectrum=fleet.window_spectrum(hists),
        life=life,
        projection=projection,
        case_drain=case_drain,
        trend=trend,
        case_drain_limit_lpm=model.case_drain_limit,
        relief_monthly=fleet.relief_monthly(year),
        oil_samples=fleet.oil_samples(readings),
        traces=traces,
    )


def plain_records(df: pd.DataFrame) -> list[dict]:
    """JSON-ready records of any frame (NaN/inf -> None, dates as ISO text)."""
    return [{k: plain_value(v) for k, v in rec.items()} for rec in df.to_dict("records")]
