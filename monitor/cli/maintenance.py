"""The ``backup`` and ``restore`` commands (registered on :data:`monitor.cli.common.main`)."""

from __future__ import annotations

from pathlib import Path

import click

from monitor import usecases
from monitor.cli.common import db_option, domain_errors, main


def _rows(counts: dict[str, int]) -> str:
    keys = ("unit", "upload_file", "histogram", "reading", "ledger")
    return ", ".join(f"{counts.get(k, 0)} {k}" for k in keys)


@main.command("backup")
@click.argument("dest", type=click.Path(dir_okay=False, path_type=Path))
@click.option("--yes", is_flag=True, help="Replace DEST if it exists.")
@db_option
@domain_errors
def backup_cmd(dest: Path, yes: bool, db_url: str) -> None:
    """Copy a SQLite store to the file DEST while it stays in use.

    The copy is checked (PRAGMA integrity_check) before it takes DEST's name. For a
    PostgreSQL store the command explains how to use pg_dump instead and exits with 1.

    Example: drivespan backup fleet-2026-12-01.db --db sqlite:///fleet.db
    """
    copy = usecases.backup_store(db_url, dest, overwrite=yes)
    click.echo(
        f"backed up {usecases.display_url(db_url)} to {copy.path} "
        f"(schema {copy.revision}; {_rows(copy.counts)})"
    )


@main.command("restore")
@click.argument("src", type=click.Path(dir_okay=False, path_type=Path))
@click.option("--yes", is_flag=True, help="Replace the data of an existing store.")
@db_option
@domain_errors
def restore_cmd(src: Path, yes: bool, db_url: str) -> None:
    """Replace a SQLite store by a backup made with drivespan backup.

    SRC is checked first: a sound SQLite file, a drivespan store, a schema revision this
    version knows. An existing store is only replaced with --yes. The schema is then
    upgraded to this version's.

    Example: drivespan restore fleet-2026-12-01.db --db sqlite:///fleet.db --yes
    """
    copy = usecases.restore_store(db_url, src, overwrite=yes)
    click.echo(
        f"restored {usecases.display_url(db_url)} from {src} "
        f"(schema {copy.revision}; {_rows(copy.counts)})"
    )
