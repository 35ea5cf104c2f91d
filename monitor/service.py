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


# --- fleet status (contract for the fleet engine and the dashboard) ----------------
# Implement below exactly as specified here (full text also in /work/service_api.md):
# ## Service API for fleet status (contract between the fleet engine and the dashboard)
# 
# In monitor/service.py (appended by the fleet-engine engineer):
# 
# - `DEFAULT_SETTINGS` dict: reliability_pct=90.0, rate_window_h=500.0, stale_days=14, status limits {"overdue_h": 0, "due_h": 250, "plan_h": 1000}, utilisation_days=30, case_drain_step_factor=1.5, heavy_relief_fraction=0.01, min_wear_readings=3.
# - `get_settings(engine) -> dict` (defaults overlaid with stored values), `save_settings(engine, values: dict) -> dict` (validates: reliability 90–99.95, positive window, ordered band limits; raises DomainError naming the field).
# - `fleet_status(engine, as_of: date | None = None, *, reliability_pct: float | None = None, rate_window_h: float | None = None, site: str | None = None) -> pandas.DataFrame`: one row per component, sorted most urgent first (remaining_h ascending, no-estimate last, ties by due_date then unit tag then position). Columns: exactly the stable rank keys `unit, site, position, component_model, hour_meter, hours_since_rebuild, consumed_fraction, damage_rate_per_h, remaining_bearing_h, remaining_wear_h, remaining_wear_h_low, remaining_wear_h_high, remaining_h, limiting, utilisation_h_per_day, due_date, status, relief_hours, relief_heat_kwh, last_upload_at, data_age_days, flags` followed by extra columns `machine_type, component_id, case_drain_level_lpm (normalised fitted level now), case_drain_limit_lpm, case_drain_slope_lpm_per_h, cutoff_hours, has_cutoff`. `flags` is a list of short strings from {"stale", "case_drain_step", "heavy_relief", "few_wear_readings"}; `limiting` is "bearing", "wear" or None; `due_date` a datetime.date or None; `last_upload_at` a tz-aware datetime or None; status one of the band names exported by monitor.lifecycle (plus a "no estimate" band).
# - `rank_records(df) -> list[dict]`: JSON-ready records with exactly the rank keys (nan -> None, dates ISO 8601 strings).
# - `unit_report(engine, tag: str, as_of: date | None = None, *, reliability_pct=None, rate_window_h=None) -> UnitReport` (frozen dataclass), raising DomainError for an unknown tag (with close matches). Fields: `unit` (dict: tag, site, machine_type, oil), `status` (DataFrame: the fleet_status rows of this unit), `components` (dict position -> ComponentDetail), `service_history` (DataFrame: at, position, kind, hour_meter, note), `uploads` (DataFrame of recent uploads: period_start, period_end, hour_meter_start, hour_meter_end, file), `summary` (list of plain-words sentences on why the unit stands where it does).
#   `ComponentDetail` (frozen dataclass): `model` (monitor.records.ComponentModelSpec), `spectrum` (DataFrame: pressure_low_bar, pressure_high_bar, hours — summed over the rate window), `life` (DataFrame: hour_meter, consumed_fraction — per upload since the last rebuild, plus `projection` DataFrame with two rows from now to end of life at the current rate), `case_drain` (DataFrame: taken_at, hour_meter, case_drain_lpm (raw), normalised_lpm, used (bool, after last rebuild)), `trend` (the wear-trend dataclass from monitor.wear or None), `case_drain_limit_lpm`, `relief_monthly` (DataFrame: month (first day, date), relief_hours, cutoff_hours, relief_heat_kwh), `oil_samples` (DataFrame: taken_at, iso4406, r4, r6, r14 — scale numbers, None where '-').
