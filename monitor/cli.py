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
        "--format", "fmt", type=click.Choice(FORMATS), default="table", show_default=True,
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


if __name__ == "__main__":  # pragma: no cover
    main()
