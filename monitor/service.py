"""Use cases: what the CLI and the dashboard ask of drivespan.

Each function opens its own transaction, so a use case either happens whole or not
at all: a rejected upload leaves the store exactly as it was.
"""

from __future__ import annotations

import hashlib
from collections.abc import Callable, Iterable
from dataclasses import dataclass
from datetime import UTC, date, datetime, timedelta
from pathlib import Path

import pandas as pd
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
        counts = f"{self.histograms} histogram(s), {self.readings} reading(s)"
        return f"{self.name}: {verb}, {counts}{extra}"


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
            histograms=plan.n_histograms,
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
            n_histograms=plan.n_histograms,
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
    with store.transaction(engine) as conn:
        return ledger.recompute(conn, progress=progress)


# === fleet status, unit report and service events (fleet engine) ===================

DEFAULT_SETTINGS: dict = {
    "reliability_pct": 90.0,
    "rate_window_h": 500.0,
    "stale_days": 14,
    "status_limits": {"overdue_h": 0.0, "due_h": 250.0, "plan_h": 1000.0},
    "utilisation_days": 30,
    "case_drain_step_factor": 1.5,
    "heavy_relief_fraction": 0.01,
    "min_wear_readings": 3,
}
"""Status settings used where none are stored (``save_settings`` stores overrides)."""

SERVICE_KINDS = ("rebuild", "replacement", "hour_meter_change")


def get_settings(engine: Engine) -> dict:
    """Status settings: :data:`DEFAULT_SETTINGS` overlaid with the stored values."""
    import copy

    with engine.connect() as conn:
        stored = queries.get_settings(conn)
    out = copy.deepcopy(DEFAULT_SETTINGS)
    for key, value in stored.items():
        if key == "status_limits" and isinstance(value, dict):
            out[key] = {**out[key], **value}
        elif key in out:
            out[key] = value
    return out


def save_settings(engine: Engine, values: dict) -> dict:
    """Validate and store status settings; return the settings now in force.

    Raises DomainError naming the field if a value is out of range.
    """
    merged = {**get_settings(engine), **values}
    if "status_limits" in values:
        if not isinstance(values["status_limits"], dict):
            raise DomainError(
                "status_limits must give overdue_h, due_h and plan_h in hours, "
                f"got {values['status_limits']!r}"
            )
        merged["status_limits"] = {
            **get_settings(engine)["status_limits"],
            **values["status_limits"],
        }
    unknown = sorted(set(values) - set(DEFAULT_SETTINGS))
    if unknown:
        raise DomainError(
            f"unknown setting(s) {', '.join(unknown)}: known are {', '.join(DEFAULT_SETTINGS)}"
        )
    params = _status_params(merged)  # raises DomainError on a bad value
    checked = {k: getattr(params, k) for k in values if k != "status_limits"}
    if "status_limits" in values:
        checked["status_limits"] = dict(params.status_limits)
    with store.transaction(engine) as conn:
        queries.put_settings(conn, checked)  # numbers stored as numbers, not as text
    return get_settings(engine)


def _positive(settings: dict, key: str, what: str) -> float:
    if isinstance(settings[key], bool):
        raise DomainError(f"{key} must be a number ({what}), got {settings[key]!r}")
    try:
        v = float(settings[key])
    except (TypeError, ValueError):
        raise DomainError(f"{key} must be a number ({what}), got {settings[key]!r}") from None
    if not (v > 0) or v != v or v == float("inf"):
        raise DomainError(f"{key} must be a positive number ({what}), got {settings[key]!r}")
    return v


def _status_params(settings: dict):  # noqa: ANN202 - fleet.StatusParams
    from monitor import bearings, fleet

    lo, hi = bearings.RELIABILITY_RANGE_PCT
    r = _positive(settings, "reliability_pct", "planning reliability in %")
    if not (lo <= r <= hi):
        raise DomainError(
            f"reliability_pct must be between {lo:g} and {hi:g} % "
            f"(ISO 281 gives no factor a1 outside that range), got {r:g}"
        )
    limits = settings["status_limits"]
    if not isinstance(limits, dict):
        raise DomainError(
            f"status_limits must give overdue_h, due_h and plan_h in hours, got {limits!r}"
        )
    try:
        lim = {k: float(limits[k]) for k in ("overdue_h", "due_h", "plan_h")}
    except (KeyError, TypeError, ValueError):
        raise DomainError(
            f"status_limits must give numbers overdue_h, due_h and plan_h in hours, got {limits!r}"
        ) from None
    if not (lim["overdue_h"] < lim["due_h"] < lim["plan_h"]):
        raise DomainError(f"status_limits must be ordered overdue_h < due_h < plan_h, got {lim}")
    step = _positive(settings, "case_drain_step_factor", "a multiple of the fitted level")
    frac = _positive(settings, "heavy_relief_fraction", "a share of operating hours")
    n = settings["min_wear_readings"]
    if not isinstance(n, int) or isinstance(n, bool) or n < 3:
        raise DomainError(
            f"min_wear_readings must be a whole number >= 3 (a Theil-Sen "
            f"trend needs three readings), got {n!r}"
        )
    if step <= 1 or frac >= 1:
        raise DomainError("case_drain_step_factor must be > 1 and heavy_relief_fraction < 1")
    return fleet.StatusParams(
        reliability_pct=r,
        rate_window_h=_positive(settings, "rate_window_h", "operating hours"),
        utilisation_days=_positive(settings, "utilisation_days", "calendar days"),
        stale_days=_positive(settings, "stale_days", "calendar days"),
        status_limits=lim,
        case_drain_step_factor=step,
        heavy_relief_fraction=frac,
        min_wear_readings=n,
    )


def _params_for(engine: Engine, reliability_pct: float | None, rate_window_h: float | None):  # noqa: ANN202
    settings = get_settings(engine)
    if reliability_pct is not None:
        settings["reliability_pct"] = reliability_pct
    if rate_window_h is not None:
        settings["rate_window_h"] = rate_window_h
    return _status_params(settings)


def _today() -> date:
    return datetime.now(UTC).date()


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
    from monitor import fleet, snapshot

    params = _params_for(engine, reliability_pct, rate_window_h)
    as_of = as_of or _today()
    t = fleet.as_of_instant(as_of)
    with engine.connect() as conn:
        if site is not None:
            _check_site(conn, site)
        inputs = snapshot.status_inputs(
            conn,
            t,
            rate_window_h=params.rate_window_h,
            utilisation_days=params.utilisation_days,
            site=site,
        )
        ids = inputs["component_id"].tolist() if site is not None else None
        readings = snapshot.readings_in_life(conn, t, ids)
    return fleet.fleet_status(inputs, readings, as_of, params)


def _check_site(conn, site: str) -> None:  # noqa: ANN001
    names = list(conn.execute(select(store.site.c.name).order_by(store.site.c.name)).scalars())
    if site not in names:
        raise DomainError(
            f"site {site!r} is not in the fleet registry; known sites: "
            f"{', '.join(names) or 'none (import a registry first)'}"
        )


def has_registry(engine: Engine) -> bool:
    """True once a fleet registry with at least one unit has been imported."""
    with engine.connect() as conn:
        return conn.execute(select(store.unit.c.id).limit(1)).first() is not None


def rank_records(df: pd.DataFrame) -> list[dict]:
    """JSON-ready records of a status frame with exactly the rank keys."""
    from monitor import fleet

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


@dataclass(frozen=True)
class UnitReport:
    """One unit: its status rows, per-component detail, uploads, service and summary."""

    unit: dict
    status: pd.DataFrame
    components: dict
    service_history: pd.DataFrame
    uploads: pd.DataFrame
    summary: list


def _unknown_unit(conn, tag: str) -> DomainError:  # noqa: ANN001
    import difflib

    from monitor import snapshot

    tags = snapshot.unit_tags(conn)
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
    from monitor import fleet, snapshot

    params = _params_for(engine, reliability_pct, rate_window_h)
    as_of = as_of or _today()
    t = fleet.as_of_instant(as_of)
    with engine.connect() as conn:
        unit = snapshot.unit_row(conn, tag)
        if unit is None:
            raise _unknown_unit(conn, tag)
        inputs = snapshot.status_inputs(
            conn,
            t,
            rate_window_h=params.rate_window_h,
            utilisation_days=params.utilisation_days,
            unit_tag=tag,
        )
        readings = snapshot.readings_in_life(conn, t, inputs["component_id"].tolist())
        status = fleet.fleet_status(inputs, readings, as_of, params)
        details = {
            row["position"]: _component_detail(conn, row, status, t, params)
            for row in inputs.to_dict("records")
        }
        history = snapshot.service_history(conn, unit["id"])
        uploads = snapshot.recent_uploads(conn, unit["id"], t)
    info = {k: unit[k] for k in ("tag", "site", "machine_type", "oil")}
    return UnitReport(
        unit=info,
        status=status,
        components=details,
        service_history=history,
        uploads=uploads,
        summary=fleet.unit_summary(status, params),
    )


def _component_detail(
    conn, row: dict, status: pd.DataFrame, t: datetime, params
) -> ComponentDetail:  # noqa: ANN001, E501
    from monitor import fleet, snapshot

    cid = int(row["component_id"])
    srow = status[status["component_id"] == cid].iloc[0]
    rebuilt = row["rebuilt_at"] if pd.notna(row["rebuilt_at"]) else None
    life_rows = snapshot.ledger_rows(
        conn, cid, row["base_period_end"] if pd.notna(row["base_period_end"]) else None, t
    )
    window = fleet.window_rows(life_rows, params.rate_window_h)
    hists = snapshot.histogram_rows(conn, cid, window["upload_id"].tolist())
    year = snapshot.ledger_rows(conn, cid, t - timedelta(days=365), t)
    readings = snapshot.component_readings(conn, cid, t)
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
    )


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
) -> dict:
    """Record a rebuild, replacement or hour-meter change of a unit; return it as a dict.

    A rebuild or replacement needs the component's ``position``; an hour-meter change
    is of the whole unit and needs ``new_hour_meter``. The ledger is not rewritten:
    its damage values do not depend on rebuilds; the status reads only the rows after
    the last rebuild. Raises DomainError with what to correct.
    """
    event = _checked_event(tag, kind, at, hour_meter, position, new_hour_meter)
    with store.transaction(engine) as conn:
        unit = conn.execute(select(store.unit.c.id).where(store.unit.c.tag == tag)).scalar()
        if unit is None:
            raise _unknown_unit(conn, tag)
        comp_id = None
        if position is not None:
            comp_id = _component_id(conn, unit, tag, position)
        t = store.service_event
        dup = select(t.c.id).where(
            t.c.unit_id == unit,
            t.c.kind == kind,
            t.c.at == event["at"],
            t.c.component_id.is_(None) if comp_id is None else t.c.component_id == comp_id,
        )
        if conn.execute(dup).first() is not None:
            raise DomainError(
                f"a {kind} of {tag} {position or ''} at "
                f"{event['at'].isoformat()} is already recorded"
            )
        conn.execute(
            t.insert().values(
                unit_id=unit,
                component_id=comp_id,
                note=note,
                kind=kind,
                at=event["at"],
                hour_meter=hour_meter,
                new_hour_meter=new_hour_meter,
            )
        )
    return {"unit": tag, "position": position, "note": note, **event}


def _checked_event(tag, kind, at, hour_meter, position, new_hour_meter) -> dict:  # noqa: ANN001
    if kind not in SERVICE_KINDS:
        raise DomainError(f"kind {kind!r} is not known: use one of {', '.join(SERVICE_KINDS)}")
    if at.tzinfo is None:
        raise DomainError("the service time needs a UTC offset, e.g. 2026-11-20T08:00:00Z")
    if not (hour_meter >= 0):
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
    c = store.component
    rows = dict(conn.execute(select(c.c.position, c.c.id).where(c.c.unit_id == unit_id)).all())
    if position not in rows:
        raise DomainError(
            f"unit {tag} has no component at position {position!r} "
            f"(registered positions: {', '.join(sorted(rows)) or 'none'})"
        )
    return rows[position]
