"""``drivespan settings``: show and change the stored settings (registered on
:data:`monitor.cli.common.main`)."""

from __future__ import annotations

import json

import click

from monitor import usecases
from monitor.cli.common import _stale_warning, db_option, domain_errors, main


@main.group("settings")
def settings_group() -> None:
    """Show or change the stored settings (status limits, wear trend, band pressure rule)."""


@settings_group.command("show")
@db_option
@domain_errors
def settings_show(db_url: str) -> None:
    """Print the settings in force as JSON (stored values over the defaults).

    Example: drivespan settings show
    """
    engine = usecases.init_db(db_url)
    click.echo(json.dumps(usecases.get_settings(engine), indent=2))
    _stale_warning(engine)


@settings_group.command("set")
@click.argument("key")
@click.argument("value")
@db_option
@domain_errors
def settings_set(key: str, value: str, db_url: str) -> None:
    """Store one setting; VALUE is read as JSON when it parses (numbers, objects), else as
    text. Changing a setting the ledger is computed with (band_pressure) asks for a
    recompute.

    Example: drivespan settings set band_pressure upper
    """
    engine = usecases.init_db(db_url)
    try:
        parsed = json.loads(value)
    except ValueError:
        parsed = value
    saved = usecases.save_settings(engine, {key: parsed})
    click.echo(f"{key} = {json.dumps(saved[key])}")
    _stale_warning(engine)
