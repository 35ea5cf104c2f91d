"""Tables a person reads on a terminal: headings with units, numbers rounded as a planner
reads them (hours whole with thousands separators, percentages to one decimal), text
columns aligned left and numbers right, and the status counts under the ranking."""

from __future__ import annotations

import math

from monitor.domain.vocabulary import (
    FLAG_WORDS,
    LIMIT_REACHED,
    NEW_LIFE,
    NO_ESTIMATE,
    STATUS_BANDS,
    plural,
)

RANK_TABLE = {
    "unit": "Unit",
    "site": "Site",
    "position": "Position",
    "component_model": "Model",
    "status": "Status",
    "flags": "Flags",
    "remaining_h": "Remaining [h]",
    "limiting": "Limited by",
    "due_date": "Due date",
    "consumed_fraction": "Life used [%]",
    "remaining_wear_h": "Wear left [h]",
    "utilisation_h_per_day": "Use [h/day]",
}
"""Columns of ``rank --format table`` and the unit table: rank key -> heading."""

NUMERIC = {"Remaining [h]", "Life used [%]", "Wear left [h]", "Use [h/day]", "Hour meter [h]",
           "Case drain [L/min]", "Limit [L/min]", "Late [days]", "Downtime"}  # fmt: skip
"""Headings whose column is aligned right."""


def hours(value: object) -> str:
    """Whole hours with thousands separators; used-up hours read "limit reached"."""
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return "-"
    return LIMIT_REACHED if value <= 0 else f"{value:,.0f}"


def status_text(rec: dict) -> str:
    """The status band, or "new life, no estimate yet" for a drive with no hours logged
    since its last rebuild."""
    if rec.get("status") == NO_ESTIMATE and not rec.get("hours_since_rebuild"):
        return NEW_LIFE
    return rec.get("status") or NO_ESTIMATE


def rank_row(rec: dict) -> dict:
    """One rank record as the table shows it (keys are the headings)."""
    frac, util = rec.get("consumed_fraction"), rec.get("utilisation_h_per_day")
    values = {
        "status": status_text(rec),
        "flags": ", ".join(FLAG_WORDS.get(f, f) for f in rec.get("flags") or []),
        "remaining_h": hours(rec.get("remaining_h")),
        "remaining_wear_h": hours(rec.get("remaining_wear_h")),
        "consumed_fraction": "-" if frac is None else f"{100 * frac:.1f}",
        "utilisation_h_per_day": "-" if util is None else f"{util:.1f}",
        "limiting": rec.get("limiting") or "-",
        "due_date": rec.get("due_date") or "-",
    }
    return {head: values.get(k, rec.get(k)) for k, head in RANK_TABLE.items()}


def render(rows: list[dict], headings: list[str]) -> str:
    """An aligned plain-text table (text left, numbers right); "(nothing to show)" if empty."""
    if not rows:
        return "(nothing to show)"
    cells = [[("" if r.get(h) is None else str(r.get(h))) for h in headings] for r in rows]
    widths = [max(len(h), *(len(c[i]) for c in cells)) for i, h in enumerate(headings)]

    def line(values: list[str]) -> str:
        parts = [
            v.rjust(w) if h in NUMERIC else v.ljust(w)
            for v, w, h in zip(values, widths, headings, strict=True)
        ]
        return "  ".join(parts).rstrip()

    return "\n".join([line(headings), *(line(c) for c in cells)])


def status_counts(records: list[dict]) -> str:
    """One line: drives and units, how many per status band, and how many are stale."""
    n_units = len({r["unit"] for r in records})
    counts = {b: 0 for b in (*STATUS_BANDS, NO_ESTIMATE)}
    for r in records:
        counts[r.get("status") or NO_ESTIMATE] = counts.get(r.get("status") or NO_ESTIMATE, 0) + 1
    bands = ", ".join(f"{n} {b}" for b, n in counts.items() if n)
    stale = sum("stale" in (r.get("flags") or []) for r in records)
    stale_units = len({r["unit"] for r in records if "stale" in (r.get("flags") or [])})
    return (
        f"{plural(len(records), 'drive')} on {plural(n_units, 'unit')}: {bands or 'none'}; "
        f"{plural(stale, 'drive')} ({plural(stale_units, 'unit')}) with stale data"
    )


def tidy_floats(value: object) -> object:
    """JSON-ready data without binary float noise (12 significant digits:
    5201.799999999999 -> 5201.8)."""
    if isinstance(value, float):
        return float(f"{value:.12g}") if math.isfinite(value) else None
    if isinstance(value, dict):
        return {k: tidy_floats(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [tidy_floats(v) for v in value]
    return value
