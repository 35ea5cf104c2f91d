"""The plan page's settings tables and their conversion to :class:`data.PlanOptions`."""

from __future__ import annotations

import math

import pandas as pd
import streamlit as st

from dashboards.data import PlanOptions

PLAN_LABELS = {
    "on_time": "On time?",
    "week_start": "Week",
    "site": "Site",
    "unit": "Unit",
    "position": "Position",
    "component_model": "Model",
    "due_date": "Due date",
    "remaining_h": st.column_config.NumberColumn("Remaining [h]", format="%,.0f"),
    "paired_with": "Done with",
    "late_days": "Late [days]",
    "reason": st.column_config.TextColumn("Why this week", width="large"),
    "not_placed": "Why not placed",
}
"""Headings of the plan tables."""

SITE_COLUMNS = {"site": "Site", "slots": "Slots per week (blank: fleet limit only)"}
STOCK_COLUMNS = {
    "model": "Component model",
    "stock": "Exchange units in stock (blank: unlimited)",
    "turnaround": "Core back in stock after [days]",
}


def week_text(monday: object) -> str:
    """A plan week as ISO week and Monday, e.g. "2026-W49 (Mon 2026-11-30)"."""
    day = pd.Timestamp(monday).date()
    year, week, _ = day.isocalendar()
    return f"{year}-W{week:02d} (Mon {day.isoformat()})"


def site_table(sites: list[str], opts: PlanOptions) -> pd.DataFrame:
    """Editable per-site limits for the sites of the fleet."""
    given = dict(opts.site_capacity)
    return pd.DataFrame(
        {
            "site": sites,
            "slots": pd.array([given.get(s) for s in sites], dtype="Int64"),
        }
    )


def stock_table(models: list[str], opts: PlanOptions) -> pd.DataFrame:
    """Editable exchange stock and turnaround per component model."""
    stock, days = dict(opts.exchange_stock), dict(opts.turnaround_days)
    return pd.DataFrame(
        {
            "model": models,
            "stock": pd.array([stock.get(m) for m in models], dtype="Int64"),
            "turnaround": [float(days.get(m, 21.0)) for m in models],
        }
    )


def _filled(value: object) -> bool:
    return value is not None and not pd.isna(value)


def options_from(
    horizon_weeks: int,
    capacity_per_week: int,
    sites: pd.DataFrame,
    stock: pd.DataFrame,
    pair: bool,
    pair_within_h: float,
) -> PlanOptions:
    """Plan options from the form; raises ValueError naming a bad cell."""
    site_cap = []
    for site, slots in zip(sites["site"], sites["slots"], strict=True):
        if _filled(slots):
            site_cap.append((str(site), _count(slots, f"slots per week of site {site}")))
    exchange, turnaround = [], []
    for model, n, days in zip(stock["model"], stock["stock"], stock["turnaround"], strict=True):
        if _filled(n):
            exchange.append((str(model), _count(n, f"exchange units of {model}")))
            if not _filled(days) or float(days) < 0 or not math.isfinite(float(days)):
                raise ValueError(f"turnaround of {model} must be a number of days >= 0")
            turnaround.append((str(model), float(days)))
    return PlanOptions(
        horizon_weeks=int(horizon_weeks),
        capacity_per_week=int(capacity_per_week),
        site_capacity=tuple(site_cap),
        exchange_stock=tuple(exchange),
        turnaround_days=tuple(turnaround),
        pair_within_h=float(pair_within_h) if pair else None,
    )


def _count(value: object, what: str) -> int:
    number = float(value)
    if number < 0 or not number.is_integer():
        raise ValueError(f"{what} must be a whole number >= 0, got {value!r}")
    return int(number)


def late_style(assignments: pd.DataFrame) -> pd.io.formats.style.Styler:
    """The assignments table with late rows shaded and marked in words."""
    shown = assignments.assign(
        on_time=["LATE" if d > 0 else "on time" for d in assignments["late_days"]],
        week_start=[week_text(d) for d in assignments["week_start"]],
    )
    cols = ["on_time", "week_start", "site", "unit", "position", "component_model", "due_date",
            "remaining_h", "paired_with", "late_days", "reason"]  # fmt: skip
    shown = shown[cols]

    def shade(row: pd.Series) -> list[str]:
        css = "background-color: #F6E3E7; font-weight: 600" if row["on_time"] == "LATE" else ""
        return [css] * len(row)

    def hours(v: float) -> str:
        return "limit reached" if v <= 0 else f"{v:,.0f}"

    return shown.style.apply(shade, axis=1).format({"remaining_h": hours}, na_rep="")
