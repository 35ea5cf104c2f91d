"""The ``drivespan`` commands for the store, the registry, telemetry, status and service
events (registered on :data:`monitor.cli.common.main`). Each imports what it uses when it
runs, so ``--help`` stays fast."""

from __future__ import annotations

import sys
from pathlib import Path

import click

from monitor import usecases
from monitor.cli.common import (
    _as_of,
    _print_results,
    _stale_warning,
    csv_records,
    db_option,
    domain_errors,
    emit,
    format_option,
    main,
    open_db,
    print_ranking,
)


@main.command()
@db_option
@domain_errors
def init(db_url: str) -> None:
    """Create or upgrade the database schema (and store what an older store lacks: the
    100 degC viscosity of an oil given by grade and viscosity index).

    Example: drivespan init --db sqlite:///fleet.db
    """
    engine = open_db(db_url, create=True)
    try:
        oils = usecases.complete_oil_viscosities(engine)
    finally:
        engine.dispose()
    click.echo(f"schema is up to date in {usecases.display_url(db_url)}")
    if oils:
        from monitor.domain.vocabulary import plural

        what = plural(oils, "oil")
        click.echo(f"stored the 100 degC viscosity of {what} (from the viscosity index)")


@main.group()
def fleet() -> None:
    """Import and show the fleet registry (sites, oils, component models, units)."""


@fleet.command("import")
@click.argument("path", type=click.Path(exists=True, dir_okay=False, path_type=Path))
@db_option
@domain_errors
def fleet_import(path: Path, db_url: str) -> None:
    """Import a fleet registry YAML file (a second import of the same file changes nothing).

    Example: drivespan fleet import demo_fleet/sample/registry.yaml
    """
    engine = open_db(db_url)
    counts = usecases.import_registry(engine, path.read_bytes(), path.name)
    click.echo(
        f"{path.name}: {counts.created} created, {counts.updated} updated, "
        f"{counts.unchanged} unchanged"
    )


@fleet.command("show")
@db_option
@domain_errors
def fleet_show(db_url: str) -> None:
    """Print the last imported fleet registry, and any accepted life factors in force.

    Example: drivespan fleet show
    """
    engine = open_db(db_url)
    text = usecases.show_registry(engine)
    if text is None:
        raise usecases.DomainError(
            "no fleet registry imported yet: run drivespan fleet import FILE"
        )
    click.echo(text, nl=False if text.endswith("\n") else True)
    factors = usecases.factors_in_force(engine)
    if not factors.empty:
        click.echo("\n# accepted life factors (drivespan calibrate), in force on top of the")
        click.echo("# rated_l10_h above; a registry import does not change them:")
        for row in factors.itertuples(index=False):
            click.echo(
                f"#   {row.component_model}: x {row.factor:.4g} since "
                f"{row.accepted_at:%Y-%m-%d} ({row.proposed_by})"
            )
    click.echo(_registry_total(engine))


def _registry_total(engine) -> str:  # noqa: ANN001
    """One line: how many sites, units and drives the store's registry holds."""
    from monitor.domain.vocabulary import plural

    df = usecases.fleet_status(engine)
    sites, units = df["site"].nunique(), df["unit"].nunique()
    return (
        f"# total: {plural(sites, 'site')}, {plural(units, 'unit')}, "
        f"{plural(len(df), 'drive')} in the store"
    )


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
    engine = open_db(db_url)
    files = usecases.expand_paths(paths)
    results = []
    with click.progressbar(files, label="ingesting", file=sys.stderr) as bar:
        for path in bar:
            results.append(usecases.upload_path(engine, path, dry_run=dry_run))
    rejected = _print_results(results)
    click.echo(_ingest_total(results, dry_run))
    if rejected:
        sys.exit(1)


def _ingest_total(results: list, dry_run: bool) -> str:
    """One line: how many files were accepted (or valid), duplicates and rejected."""
    from monitor.domain.vocabulary import plural

    count = {s: sum(r.status == s for r in results) for s in (
        usecases.ACCEPTED, usecases.VALID, usecases.DUPLICATE, usecases.REJECTED)}  # fmt: skip
    good = count[usecases.VALID] if dry_run else count[usecases.ACCEPTED]
    word = "valid" if dry_run else "accepted"
    hist = sum(r.histograms for r in results)
    reads = sum(r.readings for r in results)
    tail = " (dry run: nothing stored)" if dry_run else ""
    return (
        f"total: {plural(len(results), 'file')}: {good} {word}, {count[usecases.DUPLICATE]} "
        f"duplicate, {count[usecases.REJECTED]} rejected; {plural(hist, 'histogram')}, "
        f"{plural(reads, 'reading')}{tail}"
    )


@main.command()
@db_option
@domain_errors
def recompute(db_url: str) -> None:
    """Rebuild the damage ledger from the stored uploads (after a model or registry change).

    Example: drivespan recompute
    """
    engine = open_db(db_url)
    with click.progressbar(length=1, label="recomputing", file=sys.stderr) as bar:

        def progress(done: int, total: int) -> None:
            bar.length = max(total, 1)
            bar.update(done - bar.pos)

        n = usecases.recompute(engine, progress=progress)
    click.echo(f"ledger rebuilt: {n} rows")


@main.command("rank")
@click.option(
    "--as-of",
    "as_of",
    metavar="DATE",
    help="Status at the start of this day (YYYY-MM-DD); default now.",
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
    engine = open_db(db_url)
    day = _as_of(as_of)
    if not usecases.has_registry(engine):
        raise usecases.DomainError(
            "no fleet registry imported yet: run drivespan fleet import FILE, then ingest telemetry"
        )
    df = usecases.fleet_status(engine, day, reliability_pct=reliability, site=site)
    records = usecases.rank_records(df)
    _stale_warning(engine)
    if fmt == "json":
        emit(records, fmt)
    elif fmt == "csv":
        emit(csv_records(records), fmt, list(usecases.RANK_COLUMNS))
    else:
        print_ranking(records, day, usecases.status_instant(day)[1])


@main.command("unit")
@click.argument("tag")
@click.option(
    "--as-of",
    "as_of",
    metavar="DATE",
    help="Status at the start of this day (YYYY-MM-DD); default now.",
)
@click.option("--all", "show_all", is_flag=True, help="Also list recent uploads and every reading.")
@format_option
@db_option
@domain_errors
def unit_cmd(tag: str, as_of: str | None, show_all: bool, fmt: str, db_url: str) -> None:
    """Show one unit: per drive its status, why, the last readings and the rebuild limit;
    with --all also its recent uploads and every case-drain reading.

    Example: drivespan unit QX-104 --as-of 2026-12-01 --all
    """
    from monitor.cli import unit_view

    engine = open_db(db_url)
    day = _as_of(as_of)
    rep = usecases.unit_report(engine, tag, day)
    status = usecases.rank_records(rep.status)
    _stale_warning(engine)
    if fmt == "json":
        emit(unit_view.unit_json(rep, status), "json")
    elif fmt == "csv":
        emit(csv_records(status), fmt, list(usecases.RANK_COLUMNS))
    else:
        unit_view.print_unit(rep, status, day, usecases.status_instant(day)[1], show_all)


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
@click.option(
    "--reason",
    type=click.Choice(["failure", "wear_limit", "preventive", "other"]),
    help="Why a rebuild or replacement ended the life; none reads as other.",
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
    reason: str | None,
    note: str | None,
    db_url: str,
) -> None:
    """Record a rebuild or replacement of a drive, or an hour-meter change of a unit.

    A rebuild or replacement starts a new life: uploads up to it and case-drain readings
    before it no longer count for that drive's status.

    \b
    Example: drivespan service add QX-104 --position left --kind rebuild --at 2026-11-20T08:00:00Z --hour-meter 6120 --reason failure
    """  # noqa: E501
    from datetime import datetime

    try:
        when = datetime.fromisoformat(at.replace("Z", "+00:00").replace("z", "+00:00"))
    except ValueError:
        raise usecases.DomainError(
            f"--at {at!r} is not an ISO 8601 time: write e.g. 2026-11-20T08:00:00Z"
        ) from None
    engine = open_db(db_url)
    ev = usecases.add_service_event(
        engine,
        tag,
        kind=kind,
        at=when,
        hour_meter=hour_meter,
        position=position,
        new_hour_meter=new_hour_meter,
        note=note,
        reason=reason,
    )
    why = f", reason {ev['reason']}" if ev["reason"] else ""
    where = f" {ev['position']}" if ev["position"] else ""
    click.echo(
        f"recorded {ev['kind']} of {ev['unit']}{where} at {ev['at'].isoformat()}, "
        f"hour meter {ev['hour_meter']:g} h{why}"
    )
