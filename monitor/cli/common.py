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
    """Turn a DomainError into one line (plus its problems) on stderr and exit 1; any other
    error becomes one line too (exit 2), its traceback going to the log (``--log-file``)."""

    @wraps(f)
    def wrapper(*args, **kwargs):  # noqa: ANN002, ANN003, ANN202
        try:
            return f(*args, **kwargs)
        except DomainError as err:
            click.echo(f"error: {err}", err=True)
            for p in err.problems:
                click.echo(f"  {p}", err=True)
            sys.exit(1)
        except (click.ClickException, click.exceptions.Exit, click.Abort):
            raise
        except BrokenPipeError:  # the reader (e.g. `| head`) stopped reading: not an error
            import os

            os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
            sys.exit(0)
        except OSError as err:  # a file the user named cannot be read or written
            where = f" {err.filename}" if getattr(err, "filename", None) else ""
            click.echo(f"error: cannot use{where}: {err.strerror or err}", err=True)
            sys.exit(1)
        except Exception as err:  # noqa: BLE001 - the last line of defence: no traceback
            import logging

            logging.getLogger("monitor").exception("internal error in drivespan %s", f.__name__)
            click.echo(
                f"error: internal error ({type(err).__name__}: {str(err)[:200]}); nothing more "
                "was done. Please report it; drivespan --log-file FILE ... keeps the details.",
                err=True,
            )
            sys.exit(2)

    return wrapper


def open_db(db_url: str, *, create: bool = False):  # noqa: ANN201 - sqlalchemy Engine
    """The store at ``db_url``, upgraded; a SQLite file that does not exist is refused
    unless ``create`` (only ``init`` creates a store)."""
    from monitor import usecases

    return usecases.init_db(db_url, create=create)


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


def emit(rows: list[dict] | dict, fmt: str, columns: list[str] | None = None) -> None:
    """Print records as an aligned table, CSV or JSON."""
    import pandas as pd

    if fmt == "json":
        from monitor.cli.tables import tidy_floats

        click.echo(json.dumps(tidy_floats(rows), indent=2, default=str))
        return
    df = pd.DataFrame(rows, columns=columns)
    if fmt == "csv":
        from monitor.usecases.outputs import frame_to_csv_bytes

        click.echo(frame_to_csv_bytes(df).decode("utf-8"), nl=False)
        return
    click.echo(df.to_string(index=False) if not df.empty else "(nothing to show)")


# --- fleet status, one unit, service events ----------------------------------------


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


def print_ranking(records: list[dict], as_of, at) -> None:  # noqa: ANN001 - date, datetime
    """The ranking for a terminal: which instant, the table, the counts and the notice."""
    from monitor.cli import tables

    when = f"{at:%Y-%m-%d %H:%M} UTC (now)" if as_of is None else f"start of {at:%Y-%m-%d} UTC"
    click.echo(f"status at {when}; most urgent first")
    rows = [tables.rank_row(r) for r in records]
    click.echo(tables.render(rows, list(tables.RANK_TABLE.values())))
    click.echo("\n" + tables.status_counts(records))
    _notice()


def csv_records(records: list[dict]) -> list[dict]:
    """Records for CSV at full precision (flag lists joined with ";")."""
    return [{k: ";".join(v) if isinstance(v, list) else v for k, v in r.items()} for r in records]


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
