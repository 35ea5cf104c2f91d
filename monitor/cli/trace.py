"""``drivespan ingest-trace``: store a logged pressure trace as an upload of one drive."""

from __future__ import annotations

import sys
from pathlib import Path

import click

from monitor import usecases
from monitor.cli.common import _print_results, db_option, domain_errors, main
from monitor.domain.vocabulary import plural


def _sidecar(path: Path) -> dict:
    """Fields of ``FILE.json`` beside the trace, if there is one."""
    side = path.with_name(path.name + ".json")
    if not side.is_file():
        return {}
    return usecases.trace_sidecar(side.read_bytes(), side.name)


def _echo_trace(doc: dict) -> None:
    peak = doc.get("max_high_side_bar")
    click.echo(
        f"  {doc['samples']} samples over {doc['duration_s']:.1f} s from {doc['period_start']}"
        f", {plural(doc['gap_count'], 'gap')} left out ({doc['gap_total_s']:.1f} s)"
        + (f", peak {peak:.1f} bar" if peak is not None else "")
    )
    cycles = doc.get("cycles")
    if cycles:
        levels = ", ".join(
            f">= {lv:g} bar: {n:.1f}/h"
            for lv, n in zip(cycles["levels_bar"], cycles["per_hour"], strict=True)
        )
        click.echo(f"  cycles per operating hour {levels}")
    for note in doc.get("notes", []):
        click.echo(f"  note: {note}")


@main.command("ingest-trace")
@click.argument("path", type=click.Path(exists=True, dir_okay=False, path_type=Path))
@click.option("--unit", "unit", metavar="TAG", help="The unit's tag (or in FILE.json).")
@click.option("--position", metavar="POS", help="The drive loop's position (or in FILE.json).")
@click.option(
    "--hour-meter-start",
    "hour_meter_start",
    type=float,
    metavar="H",
    help="Hour meter at the first sample [h] (or in FILE.json).",
)
@click.option(
    "--started-at",
    "started_at",
    metavar="TIME",
    help="Time of the first sample, ISO 8601 with offset; needed when the file has no "
    "timestamp column.",
)
@click.option(
    "--max-gap",
    "max_gap_s",
    type=float,
    metavar="S",
    help="Longer intervals between samples are gaps, left out and reported [s]; default 2.",
)
@db_option
@domain_errors
def ingest_trace_cmd(
    path: Path,
    unit: str | None,
    position: str | None,
    hour_meter_start: float | None,
    started_at: str | None,
    max_gap_s: float | None,
    db_url: str,
) -> None:
    """Store a logged pressure trace (CSV) as an upload of one drive loop.

    Unit, position, hour meter and start come from the options or from a sidecar file
    FILE.json beside the trace (the options win). The trace is accepted, skipped as a
    duplicate, or rejected whole with every problem listed (exit status 1).

    \b
    Example: drivespan ingest-trace loader_stall.csv --unit TH-27 --position left --hour-meter-start 8123.4 --started-at 2026-11-24T09:00:00Z
    """  # noqa: E501
    given = {
        "unit": unit,
        "position": position,
        "hour_meter_start": hour_meter_start,
        "started_at": started_at,
        "max_gap_s": max_gap_s,
    }
    fields = {**_sidecar(path), **{k: v for k, v in given.items() if v is not None}}
    missing = [k for k in ("unit", "position", "hour_meter_start") if k not in fields]
    if missing:
        opts = ", ".join("--" + k.replace("_", "-") for k in missing)
        raise usecases.DomainError(
            f"{path.name}: give {opts} on the command line or in {path.name}.json"
        )
    engine = usecases.init_db(db_url)
    result = usecases.ingest_trace(
        engine,
        path.read_bytes(),
        path.name,
        fields["unit"],
        fields["position"],
        fields["hour_meter_start"],
        started_at=fields.get("started_at"),
        max_gap_s=fields.get("max_gap_s", 2.0),
    )
    _print_results([result])
    if result.trace is not None:
        _echo_trace(result.trace)
    if result.status == usecases.REJECTED:
        sys.exit(1)
