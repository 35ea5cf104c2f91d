"""The ``drivespan calibrate`` command: the fleet's own lives against the rating, and
accepting or undoing a life factor (registered on :data:`monitor.cli.common.main`)."""

from __future__ import annotations

import click

from monitor import usecases
from monitor.cli.common import db_option, domain_errors, emit, main, open_db

CALIBRATE_TABLE_COLUMNS = [
    "component_model",
    "site",
    "mode",
    "failures",
    "suspensions",
    "shape",
    "scale",
    "b10",
    "b10_low",
    "b10_high",
    "suggested_life_factor",
    "note",
]


def _rounded(records: list[dict]) -> list[dict]:
    out = []
    for rec in records:
        row = {}
        for c in CALIBRATE_TABLE_COLUMNS:
            v = rec.get(c)
            row[c] = "-" if v is None else (f"{v:.4g}" if isinstance(v, float) else v)
        out.append(row)
    return out


def _print_accept(change: dict) -> None:
    click.echo(
        f"accepted life factor for {change['component_model']}: rated L10 "
        f"{change['rated_l10_h']:g} h x {change['factor_new']:.4g} = "
        f"{change['effective_l10_h_new']:.4g} h (was x {change['factor_now']:.4g}); "
        f"from {change['failures']} failures and {change['suspensions']} suspensions; "
        "ledger recomputed. Undo: drivespan calibrate --undo "
        f"{change['component_model']}"
    )


@main.command("calibrate")
@click.option("--model", metavar="NAME", help="Only this component model.")
@click.option("--site", metavar="NAME", help="Only this site (lives of its units).")
@click.option("--by-site", is_flag=True, help="One fit per component model and site.")
@click.option(
    "--confidence",
    type=float,
    default=0.90,
    show_default=True,
    help="Two-sided confidence level of the bounds (0-1).",
)
@click.option(
    "--format",
    "fmt",
    type=click.Choice(["table", "json"]),
    default="table",
    show_default=True,
    help="Output format.",
)
@click.option("--accept", metavar="MODEL", help="Accept MODEL's suggested life factor.")
@click.option("--undo", metavar="MODEL", help="Take back MODEL's newest accepted life factor.")
@db_option
@domain_errors
def calibrate_cmd(
    model: str | None,
    site: str | None,
    by_site: bool,
    confidence: float,
    fmt: str,
    accept: str | None,
    undo: str | None,
    db_url: str,
) -> None:
    """Fit the fleet's own lives (Weibull, right-censored) against each model's rating.

    Lives come from the damage ledger between rebuilds and replacements: bearing mode in
    consumed life fraction (failures: reason failure), wear mode in operating hours
    (failures: reason wear_limit); everything else is a suspension. The bearing-mode
    B10 is the suggested life factor (1.0: the field matches the rating). --accept
    records it as a dated, reversible change of the model's rated L10 (on top of the
    registry's rating; a registry import does not undo it) and recomputes the ledger;
    --undo takes the newest one back. A factor is an estimate: the maker's ratings and a
    qualified engineer decide.

    Example: drivespan calibrate --model HX-90 --format json
    """
    engine = open_db(db_url)
    if accept and undo:
        raise usecases.DomainError("give either --accept or --undo, not both")
    if accept:
        _print_accept(usecases.accept_life_factor(engine, accept, confidence=confidence))
        return
    if undo:
        done = usecases.undo_life_factor(engine, undo)
        click.echo(
            f"undid life factor {done['undone_factor']:.4g} of {done['component_model']} "
            f"(accepted {done['accepted_at']:%Y-%m-%d}); factor now {done['factor_now']:.4g}; "
            "ledger recomputed"
        )
        return
    table = usecases.calibrate(
        engine, model=model, site=site, by_site=by_site, confidence=confidence
    )
    records = usecases.calibration_records(table)
    if fmt == "json":
        emit(records, fmt)
        return
    emit(_rounded(records), "table", CALIBRATE_TABLE_COLUMNS)
