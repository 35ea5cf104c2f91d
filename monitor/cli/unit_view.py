"""``drivespan unit``: one unit for a person (a short summary per drive loop, the full
history with ``--all``) and for programs (JSON)."""

from __future__ import annotations

import math

import click

from monitor import usecases
from monitor.cli import tables
from monitor.domain.notices import ESTIMATE_NOTICE
from monitor.domain.vocabulary import FLAG_WORDS


def _records(df) -> list[dict]:  # noqa: ANN001 - pandas.DataFrame
    return usecases.plain_records(df)


def unit_json(rep, status: list[dict]) -> dict:  # noqa: ANN001 - usecases.UnitReport
    """The unit report as one JSON object (keys unit, status, uploads,
    case_drain_readings, service_history, traces, assumptions, summary)."""
    readings = {pos: _records(d.case_drain) for pos, d in rep.components.items()}
    return {
        "unit": rep.unit,
        "status": status,
        "uploads": _records(rep.uploads),
        "case_drain_readings": readings,
        "service_history": _records(rep.service_history),
        "traces": _records(rep.traces),
        "assumptions": _records(rep.assumptions),
        "summary": rep.summary,
    }


def _meter(value: object) -> str:
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return "-"
    return f"{value:,.1f} h"


def _day(value: object) -> str:
    return "-" if value is None else str(value)[:10]


def _why(rep, position: str) -> list[str]:  # noqa: ANN001
    """The report's sentences about one position, without the position prefix."""
    out = []
    for line in rep.summary:
        text = line.strip()
        if text.startswith(f"{position} (") and "): " in text:
            out.append(text.split("): ", 1)[1])
        elif text.startswith(f"{position}: "):
            out.append(text[len(position) + 2 :])
    return out


def _loop_lines(rep, rec: dict, extra: dict) -> list[str]:  # noqa: ANN001
    pos = rec["position"]
    detail = rep.components.get(pos)
    flags = ", ".join(FLAG_WORDS.get(f, f) for f in rec.get("flags") or [])
    head = f"{pos} ({rec['component_model']}): {tables.status_text(rec)}"
    lines = [head + (f" - {flags}" if flags else "")]
    why = _why(rep, pos)
    for i, text in enumerate(why):
        lines.append(("  why:  " if i == 0 else "        ") + text)
    upload, meter = _day(rec.get("last_upload_at")), _meter(rec.get("hour_meter"))
    lines.append(f"  last upload: {upload}, hour meter {meter}")
    drain = detail.case_drain if detail is not None else None
    if drain is not None and len(drain):
        last = drain.iloc[-1]
        lines.append(
            f"  last case-drain reading: {str(last['taken_at'])[:10]} at "
            f"{_meter(float(last['hour_meter']))}: {float(last['case_drain_lpm']):.2f} L/min "
            f"({float(last['normalised_lpm']):.2f} L/min at the test point)"
        )
    else:
        lines.append("  last case-drain reading: none")
    limit = extra.get("case_drain_limit_lpm")
    if limit is not None and not math.isnan(limit):
        lines.append(
            f"  rebuild limit: case drain {limit:.2f} L/min at the test point, or the rated "
            f"bearing life used up (now {100 * (rec.get('consumed_fraction') or 0):.1f} %)"
        )
    else:
        lines.append("  rebuild limit: the rated bearing life used up (no case-drain limit set)")
    return lines


def _service_line(history) -> str:  # noqa: ANN001 - pandas.DataFrame
    if history.empty:
        return "service history: no rebuilds, replacements or hour-meter changes recorded"
    last = history.iloc[-1]
    why = f", {last['reason']}" if isinstance(last["reason"], str) else ""
    n = len(history)
    return (
        f"service history: {n} event{'s' if n != 1 else ''}, latest {last['at']:%Y-%m-%d} "
        f"{last['kind']} of {last['position']} at {last['hour_meter']:,.1f} h{why} "
        "(--all lists them)"
    )


def print_unit(rep, status: list[dict], as_of, at, show_all: bool) -> None:  # noqa: ANN001
    """The unit for a terminal: the drives, a short block per loop, then with ``show_all``
    the recent uploads, the service history and every case-drain reading."""
    u = rep.unit
    when = f"{at:%Y-%m-%d %H:%M} UTC (now)" if as_of is None else f"start of {at:%Y-%m-%d} UTC"
    click.echo(f"{u['tag']} - {u['machine_type']} at {u['site']}, oil {u['oil']}")
    click.echo(f"status at {when}\n")
    headings = [h for k, h in tables.RANK_TABLE.items() if k not in ("unit", "site")]
    click.echo(tables.render([tables.rank_row(r) for r in status], headings))
    extras = {r["position"]: r for r in _records(rep.status)}
    for rec in status:
        click.echo("")
        for line in _loop_lines(rep, rec, extras.get(rec["position"], {})):
            click.echo(line)
    click.echo("")
    if not show_all:
        click.echo(_service_line(rep.service_history))
    else:
        _print_history(rep)
    echo_traces(rep.traces)
    click.echo("\nmodel assumptions used (docs/life-model.md):")
    click.echo(tables.render(_texts(rep.assumptions), list(rep.assumptions.columns)))
    click.echo("\n" + ESTIMATE_NOTICE)


def _print_history(rep) -> None:  # noqa: ANN001
    click.echo("service history:")
    click.echo(tables.render(_texts(rep.service_history), list(rep.service_history.columns)))
    click.echo("\nrecent uploads:")
    click.echo(tables.render(_texts(rep.uploads), list(rep.uploads.columns)))
    for pos, detail in rep.components.items():
        click.echo(f"\ncase-drain readings, {pos}:")
        cols = ["taken_at", "hour_meter", "case_drain_lpm", "normalised_lpm", "used"]
        cols += [c for c in ("off_reference",) if c in detail.case_drain.columns]
        click.echo(tables.render(_texts(detail.case_drain[cols]), cols))


def _texts(df) -> list[dict]:  # noqa: ANN001 - pandas.DataFrame
    """Rows as text: times to the minute, no "None"."""
    out = []
    for rec in _records(df):
        row = {}
        for k, v in rec.items():
            if v is None:
                v = ""
            elif isinstance(v, str) and len(v) >= 19 and v[4] == "-" and v[10] == "T":
                v = v[:16].replace("T", " ")
            elif isinstance(v, float):
                v = f"{v:,.3f}".rstrip("0").rstrip(".") if not v.is_integer() else f"{v:,.0f}"
            row[k] = v
        out.append(row)
    return out


def echo_traces(traces) -> None:  # noqa: ANN001 - pandas.DataFrame
    """The unit's pressure traces as a table, their notes below it (nothing without any)."""
    if traces.empty:
        return
    click.echo("\npressure traces:")
    table = traces.drop(columns=["notes"]).round(1)
    click.echo(tables.render(_texts(table), list(table.columns)))
    for row in traces.itertuples(index=False):
        for note in filter(None, row.notes.split("\n\n")):
            click.echo(f"  {row.position}, {row.file}: {note}")
