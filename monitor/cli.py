"""The ``drivespan`` command: a thin skin over :mod:`monitor.service`.

Every command takes ``--db URL`` (default ``$DRIVESPAN_DB`` or
``sqlite:///drivespan.db``); domain errors print one clear line and exit 1.
"""

from __future__ import annotations

import json
import sys
from collections.abc import Callable
from functools import wraps
from pathlib import Path

import click

from monitor import service, store

FORMATS = ("table", "csv", "json")


def db_option(f: Callable) -> Callable:
    return click.option(
        "--db",
        "db_url",
        envvar=store.ENV_URL,
        default=store.DEFAULT_URL,
        show_default=True,
        help="Database URL (SQLite file or postgresql://…); also $DRIVESPAN_DB.",
    )(f)


def format_option(f: Callable) -> Callable:
    return click.option(
        "--format",
        "fmt",
        type=click.Choice(FORMATS),
        default="table",
        show_default=True,
        help="Output format.",
    )(f)


def domain_errors(f: Callable) -> Callable:
    """Turn a DomainError into one line (plus its problems) on stderr and exit 1."""

    @wraps(f)
    def wrapper(*args, **kwargs):  # noqa: ANN002, ANN003, ANN202
        try:
            return f(*args, **kwargs)
        except service.DomainError as err:
            click.echo(f"error: {err}", err=True)
            for p in err.problems:
                click.echo(f"  {p}", err=True)
            sys.exit(1)

    return wrapper


@click.group()
@click.version_option(package_name="drivespan")
def main() -> None:
    """drivespan: drive-life estimates for fleets of closed-loop hydrostatic drives.

    Its numbers are estimates. The makers' service limits, local codes and qualified
    technicians decide; pressurised hydraulic systems are dangerous to work on.
    """


@main.command()
@db_option
@domain_errors
def init(db_url: str) -> None:
    """Create or upgrade the database schema.

    Example: drivespan init --db sqlite:///fleet.db
    """
    service.init_db(db_url).dispose()
    click.echo(f"schema is up to date in {db_url}")


@main.group()
def fleet() -> None:
    """Import and show the fleet registry (sites, oils, component models, units)."""


@fleet.command("import")
@click.argument("path", type=click.Path(exists=True, dir_okay=False, path_type=Path))
@db_option
@domain_errors
def fleet_import(path: Path, db_url: str) -> None:
    """Import a fleet registry YAML file (a second import of the same file changes nothing).

    Example: drivespan fleet import demo_fleet/sample/fleet.yaml
    """
    engine = service.init_db(db_url)
    counts = service.import_registry(engine, path.read_bytes(), path.name)
    click.echo(
        f"{path.name}: {counts.created} created, {counts.updated} updated, "
        f"{counts.unchanged} unchanged"
    )


@fleet.command("show")
@db_option
@domain_errors
def fleet_show(db_url: str) -> None:
    """Print the last imported fleet registry.

    Example: drivespan fleet show
    """
    text = service.show_registry(service.init_db(db_url))
    if text is None:
        raise service.DomainError("no fleet registry imported yet: run drivespan fleet import FILE")
    click.echo(text, nl=False)


@main.command("ingest")
@click.argument("paths", nargs=-1, required=True, type=click.Path(exists=True, path_type=Path))
@click.option("--dry-run", is_flag=True, help="Validate only; store nothing.")
@db_option
@domain_errors
def ingest_cmd(paths: tuple[Path, ...], dry_run: bool, db_url: str) -> None:
    """Ingest telemetry exports (CSV or JSON files, or folders of them).

    Each file is accepted, skipped as a duplicate, or rejected whole with every
    problem listed. Exits with status 1 if any file was rejected.

    Example: drivespan ingest exports/ --dry-run
    """
    engine = service.init_db(db_url)
    files = service.expand_paths(paths)
    results = []
    with click.progressbar(files, label="ingesting", file=sys.stderr) as bar:
        for path in bar:
            results.append(service.upload(engine, path.read_bytes(), path.name, dry_run=dry_run))
    rejected = _print_results(results)
    if rejected:
        sys.exit(1)


def _print_results(results: list[service.FileResult]) -> int:
    rejected = 0
    for r in results:
        click.echo(r.summary)
        for p in r.problems:
            click.echo(f"  {p}")
        rejected += r.status == service.REJECTED
    return rejected


@main.command()
@db_option
@domain_errors
def recompute(db_url: str) -> None:
    """Rebuild the damage ledger from the stored uploads (after a model or registry change).

    Example: drivespan recompute
    """
    engine = service.init_db(db_url)
    with click.progressbar(length=1, label="recomputing", file=sys.stderr) as bar:

        def progress(done: int, total: int) -> None:
            bar.length = max(total, 1)
            bar.update(done - bar.pos)

        n = service.recompute(engine, progress=progress)
    click.echo(f"ledger rebuilt: {n} rows")


def emit(rows: list[dict], fmt: str, columns: list[str] | None = None) -> None:
    """Print records as an aligned table, CSV or JSON."""
    import pandas as pd

    if fmt == "json":
        click.echo(json.dumps(rows, indent=2, default=str))
        return
    df = pd.DataFrame(rows, columns=columns)
    if fmt == "csv":
        from monitor.exports import frame_to_csv_bytes

        click.echo(frame_to_csv_bytes(df).decode("utf-8"), nl=False)
        return
    click.echo(df.to_string(index=False) if not df.empty else "(nothing to show)")


# --- fleet status, one unit, service events ----------------------------------------

RANK_TABLE_COLUMNS = [
    "unit",
    "position",
    "component_model",
    "remaining_h",
    "limiting",
    "due_date",
    "status",
    "consumed_fraction",
    "remaining_wear_h",
    "utilisation_h_per_day",
    "flags",
]


def _as_of(value: str | None):  # noqa: ANN202 - datetime.date | None
    from datetime import date

    if value is None:
        return None
    try:
        return date.fromisoformat(value)
    except ValueError:
        raise service.DomainError(
            f"--as-of {value!r} is not a date: write it as YYYY-MM-DD, e.g. 2026-12-01"
        ) from None


def _table_rows(records: list[dict], columns: list[str]) -> list[dict]:
    """Records rounded for reading on a terminal (hours whole, fractions 3 digits)."""
    out = []
    for rec in records:
        row = {}
        for c in columns:
            v = rec.get(c)
            if isinstance(v, float):
                v = round(v, 4) if c in ("consumed_fraction", "damage_rate_per_h") else round(v, 1)
            elif isinstance(v, list):
                v = ",".join(v)
            row[c] = "-" if v is None else v
        out.append(row)
    return out


def _notice() -> None:
    from monitor import fleet as fleet_model

    click.echo("\n" + fleet_model.ESTIMATE_NOTICE, err=True)


@main.command("rank")
@click.option(
    "--as-of",
    "as_of",
    metavar="DATE",
    help="Status at the start of this day (YYYY-MM-DD); default today.",
)
@click.option(
    "--reliability",
    "reliability",
    type=float,
    metavar="PCT",
    help="Planning reliability in % (90-99.95); default the stored setting.",
)
@click.option("--site", metavar="NAME", help="Only this site.")
@format_option
@db_option
@domain_errors
def rank_cmd(
    as_of: str | None, reliability: float | None, site: str | None, fmt: str, db_url: str
) -> None:
    """List every drive, most urgent first, with remaining hours, due date and flags.

    Example: drivespan rank --as-of 2026-12-01 --reliability 95 --format json
    """
    engine = service.init_db(db_url)
    day = _as_of(as_of)
    if not service.has_registry(engine):
        raise service.DomainError(
            "no fleet registry imported yet: run drivespan fleet import FILE, then ingest telemetry"
        )
    df = service.fleet_status(engine, day, reliability_pct=reliability, site=site)
    records = service.rank_records(df)
    if fmt == "json":
        emit(records, fmt)
        return
    if fmt == "csv":
        from monitor import fleet as fleet_model

        emit(_table_rows(records, list(fleet_model.RANK_COLUMNS)), fmt)
        return
    emit(_table_rows(records, RANK_TABLE_COLUMNS), fmt, RANK_TABLE_COLUMNS)
    _notice()


def _frame_records(df) -> list[dict]:  # noqa: ANN001 - pandas.DataFrame
    from monitor import fleet as fleet_model

    return [{k: fleet_model._plain(v) for k, v in rec.items()} for rec in df.to_dict("records")]


@main.command("unit")
@click.argument("tag")
@click.option(
    "--as-of",
    "as_of",
    metavar="DATE",
    help="Status at the start of this day (YYYY-MM-DD); default today.",
)
@format_option
@db_option
@domain_errors
def unit_cmd(tag: str, as_of: str | None, fmt: str, db_url: str) -> None:
    """Show one unit: its drives' status, recent uploads, readings and service history.

    Example: drivespan unit QX-104 --as-of 2026-12-01
    """
    engine = service.init_db(db_url)
    rep = service.unit_report(engine, tag, _as_of(as_of))
    status = service.rank_records(rep.status)
    readings = {pos: _frame_records(d.case_drain) for pos, d in rep.components.items()}
    if fmt == "json":
        click.echo(
            json.dumps(
                {
                    "unit": rep.unit,
                    "status": status,
                    "uploads": _frame_records(rep.uploads),
                    "case_drain_readings": readings,
                    "service_history": _frame_records(rep.service_history),
                    "summary": rep.summary,
                },
                indent=2,
                default=str,
            )
        )
        return
    if fmt == "csv":
        emit(_table_rows(status, list(status[0]) if status else []), fmt)
        return
    u = rep.unit
    click.echo(f"{u['tag']} - {u['machine_type']} at {u['site']}, oil {u['oil']}\n")
    emit(_table_rows(status, RANK_TABLE_COLUMNS), fmt, RANK_TABLE_COLUMNS)
    for title, df in (("recent uploads", rep.uploads), ("service history", rep.service_history)):
        click.echo(f"\n{title}:")
        emit(_frame_records(df), "table", list(df.columns))
    for pos, rows in readings.items():
        click.echo(f"\ncase-drain readings, {pos}:")
        emit(rows, "table", ["taken_at", "hour_meter", "case_drain_lpm", "normalised_lpm", "used"])
    click.echo("")
    for line in rep.summary:
        click.echo(line)


@main.group("service")
def service_group() -> None:
    """Record service events (rebuilds, replacements, hour-meter changes)."""


@service_group.command("add")
@click.argument("tag")
@click.option("--position", metavar="P", help="Drive position (for rebuild/replacement).")
@click.option(
    "--kind", required=True, type=click.Choice(["rebuild", "replacement", "hour_meter_change"])
)
@click.option(
    "--at",
    "at",
    required=True,
    metavar="ISO",
    help="When, ISO 8601 with offset, e.g. 2026-11-20T08:00:00Z.",
)
@click.option(
    "--hour-meter",
    "hour_meter",
    required=True,
    type=float,
    metavar="H",
    help="Hour meter at the event [h].",
)
@click.option(
    "--new-hour-meter",
    "new_hour_meter",
    type=float,
    metavar="H",
    help="Reading of the new meter (hour_meter_change only) [h].",
)
@click.option("--note", help="Free text, e.g. what was done.")
@db_option
@domain_errors
def service_add(
    tag: str,
    position: str | None,
    kind: str,
    at: str,
    hour_meter: float,
    new_hour_meter: float | None,
    note: str | None,
    db_url: str,
) -> None:
    """Record a rebuild or replacement of a drive, or an hour-meter change of a unit.

    A rebuild or replacement starts a new life: uploads up to it and case-drain readings
    before it no longer count for that drive's status.

    \b
    Example: drivespan service add QX-104 --position left --kind rebuild --at 2026-11-20T08:00:00Z --hour-meter 6120
    """  # noqa: E501
    from datetime import datetime

    try:
        when = datetime.fromisoformat(at.replace("Z", "+00:00").replace("z", "+00:00"))
    except ValueError:
        raise service.DomainError(
            f"--at {at!r} is not an ISO 8601 time: write e.g. 2026-11-20T08:00:00Z"
        ) from None
    engine = service.init_db(db_url)
    ev = service.add_service_event(
        engine,
        tag,
        kind=kind,
        at=when,
        hour_meter=hour_meter,
        position=position,
        new_hour_meter=new_hour_meter,
        note=note,
    )
    where = f" {ev['position']}" if ev["position"] else ""
    click.echo(
        f"recorded {ev['kind']} of {ev['unit']}{where} at {ev['at'].isoformat()}, "
        f"hour meter {ev['hour_meter']:g} h"
    )


# plan, dashboard and demo live in their own module; importing it registers them
from monitor import cli_plan_demo  # noqa: E402, F401

if __name__ == "__main__":  # pragma: no cover
    main()
