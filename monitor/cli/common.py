"""What every ``drivespan`` command shares: the group, the ``--db`` and ``--format``
options, error handling and output helpers.

Every command takes ``--db URL`` (default ``$DRIVESPAN_DB`` or
``sqlite:///drivespan.db``); domain errors print one clear line and exit 1.
"""

from __future__ import annotations

import json
import sys
from collections.abc import Callable
from functools import wraps

import click

from monitor.domain.config import DEFAULT_URL, ENV_URL
from monitor.domain.errors import DomainError

FORMATS = ("table", "csv", "json")


def db_option(f: Callable) -> Callable:
    return click.option(
        "--db",
        "db_url",
        envvar=ENV_URL,
        default=DEFAULT_URL,
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
        except DomainError as err:
            click.echo(f"error: {err}", err=True)
            for p in err.problems:
                click.echo(f"  {p}", err=True)
            sys.exit(1)

    return wrapper


LOG_FILE_ENV = "DRIVESPAN_LOG_FILE"


@click.group()
@click.version_option(package_name="drivespan")
@click.option(
    "--log-file",
    type=click.Path(dir_okay=False, writable=True),
    envvar=LOG_FILE_ENV,
    help="Append drivespan's warnings and internal errors (with their tracebacks) to this "
    "file; also $DRIVESPAN_LOG_FILE. Without it they are not shown.",
)
def main(log_file: str | None) -> None:
    """drivespan: drive-life estimates for fleets of closed-loop hydrostatic drives.

    Its numbers are estimates. The makers' service limits, local codes and qualified
    technicians decide; pressurised hydraulic systems are dangerous to work on.
    """
    if log_file:
        _log_to(log_file)


def _log_to(path: str) -> None:
    """Send the ``monitor`` loggers' warnings and errors to a file (appended)."""
    import logging

    handler = logging.FileHandler(path, encoding="utf-8", delay=True)
    layout = "%(asctime)s %(process)d %(name)s %(levelname)s %(message)s"
    handler.setFormatter(logging.Formatter(layout))
    logger = logging.getLogger("monitor")
    logger.addHandler(handler)
    logger.setLevel(logging.WARNING)


def _print_results(results: list) -> int:
    from monitor import usecases

    rejected = 0
    for r in results:
        click.echo(r.summary)
        for p in r.problems:
            click.echo(f"  {p}")
        rejected += r.status == usecases.REJECTED
    return rejected


def emit(rows: list[dict], fmt: str, columns: list[str] | None = None) -> None:
    """Print records as an aligned table, CSV or JSON."""
    import pandas as pd

    if fmt == "json":
        click.echo(json.dumps(rows, indent=2, default=str))
        return
    df = pd.DataFrame(rows, columns=columns)
    if fmt == "csv":
        from monitor.usecases.outputs import frame_to_csv_bytes

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
        raise DomainError(
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
    from monitor.domain.notices import ESTIMATE_NOTICE

    click.echo("\n" + ESTIMATE_NOTICE, err=True)


def _stale_warning(engine) -> None:  # noqa: ANN001 - an Engine
    """Tell the user on stderr when the ledger needs a recompute."""
    from monitor import usecases

    if usecases.ledger_stale(engine):
        click.echo("warning: " + usecases.RECOMPUTE_NEEDED, err=True)


def _frame_records(df) -> list[dict]:  # noqa: ANN001 - pandas.DataFrame
    from monitor import usecases

    return usecases.plain_records(df)
