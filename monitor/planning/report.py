"""Explanations and output tables of a rebuild plan.

Pure, no I/O. The scheduler in :mod:`monitor.planning` decides the weeks; this module
turns its decisions into the tables of a :class:`~monitor.planning_types.Plan`: one
row per planned or unplanned component with a plain-words reason, the components
that cannot be placed by date, the weekly capacity and exchange-stock use, and the
headline lines of :func:`plan_summary`.

Lateness follows the rules of :mod:`monitor.planning`: ``late_weeks`` counts weeks
after the due week (week 0 is the ISO 8601 week of the as-of date, week ``k`` starts on
its Monday + 7 k days); ``late_days`` counts days from the due date to the start of the
planned week (or the as-of date, if later).
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from datetime import date

import numpy as np
import pandas as pd

from monitor.planning.types import (
    ALL_SITES,
    ASSIGNMENT_COLUMNS,
    CAPACITY_COLUMNS,
    ESTIMATE_NOTICE,
    ID_COLUMNS,
    LATE_COLUMNS,
    STOCK_COLUMNS,
    UNPLANNED_COLUMNS,
    UNSCHEDULED_COLUMNS,
    Downtime,
    Plan,
    PlanSettings,
)

# --- plain-words reasons ---------------------------------------------------------------


def _hours(value: float) -> str:
    return "no estimate" if math.isnan(value) else f"{value:,.0f} h"


def lateness(
    due: date | None, due_days: float, week: int, settings: PlanSettings
) -> tuple[int, int]:
    """Weeks after the due week [weeks] and days after the due date [d] of ``week``."""
    if due is None:
        return 0, 0
    due_week = settings.week_of(due_days)
    late_days = max(0, (max(settings.week_start(week), settings.as_of) - due).days)
    return max(0, week - due_week), late_days


def member_reason(rows: Sequence, d: Downtime, i: int, how: str, s: PlanSettings) -> str:
    """Why component row ``i`` of downtime ``d`` is where it is, in plain words."""
    row, anchor = rows[i], rows[d.members[0]]
    others = [rows[j].position for j in d.members if j != i]
    due = "no due date" if row.due_date is None else f"due {row.due_date.isoformat()}"
    if i == d.members[0]:
        text = f"{row.position}: {due}, in week {s.week_label(d.due_week)}; {how}."
        if row.due_days < 0:
            text = f"{row.position}: already past its due date {row.due_date} on the as-of date; "
            text += f"{how}."
        elif row.remaining_h <= 0:
            text = f"{row.position}: no hours left, due now; {how}."
        if others:
            text += (
                f" Shares one downtime with {', '.join(others)}: remaining hours within "
                f"{s.pair_within_h:,.0f} h of this loop's {_hours(row.remaining_h)}."
            )
    else:
        text = (
            f"{row.position}: {due}, {_hours(row.remaining_h)} left; done with "
            f"{anchor.position} ({_hours(anchor.remaining_h)} left) in one downtime because "
            f"the difference is within {s.pair_within_h:,.0f} h."
        )
    return f"{text} {d.note}".strip()


def _partners(rows: Sequence, d: Downtime, i: int) -> str:
    return ", ".join(rows[j].position for j in d.members if j != i)


# --- per-component rows ------------------------------------------------------------------


def assignment_rows(
    rows: Sequence, d: Downtime, number: int, week: int, how: str, s: PlanSettings
) -> list[dict]:
    """One :data:`ASSIGNMENT_COLUMNS` row per member of downtime ``d`` planned in ``week``."""
    out = []
    for i in d.members:
        row = rows[i]
        late_weeks, late_days = lateness(row.due_date, row.due_days, week, s)
        own_due_week = pd.NA if math.isnan(row.due_days) else s.week_of(row.due_days)
        out.append(
            {
                "downtime": number,
                "unit": row.unit,
                "site": row.site,
                "position": row.position,
                "component_model": row.component_model,
                "week": week,
                "week_start": s.week_start(week),
                "due_date": row.due_date,
                "due_week": own_due_week,
                "remaining_h": row.remaining_h,
                "paired_with": _partners(rows, d, i),
                "late_weeks": late_weeks,
                "late_days": late_days,
                "reason": member_reason(rows, d, i, how, s),
            }
        )
    return out


def unplanned_rows(rows: Sequence, d: Downtime, how: str, s: PlanSettings) -> list[dict]:
    """One :data:`UNPLANNED_COLUMNS` row per member of a downtime no week has room for."""
    return [
        {c: getattr(rows[i], c) for c in (*ID_COLUMNS, "due_date", "remaining_h")}
        | {"paired_with": _partners(rows, d, i), "reason": member_reason(rows, d, i, how, s)}
        for i in d.members
    ]


def unscheduled_frame(comp: pd.DataFrame, grouped: set[int]) -> pd.DataFrame:
    """Components without a due date and in no downtime, with the reason why."""
    rows = []
    for i in comp.index[comp["due_days"].isna()]:
        if i in grouped:
            continue
        row = comp.loc[i]
        if math.isnan(row.remaining_h):
            why = f"no remaining-hours estimate (status: {row.status or 'none'}); check its data"
        else:
            why = (
                f"unscheduled: no utilisation - {_hours(row.remaining_h)} left but no recent "
                "operating hours, so no due date can be set"
            )
        rows.append({c: row[c] for c in (*ID_COLUMNS, "remaining_h")} | {"reason": why})
    return pd.DataFrame(rows, columns=list(UNSCHEDULED_COLUMNS))


# --- weekly tables -------------------------------------------------------------------------


def capacity_frame(
    s: PlanSettings, fleet_used: np.ndarray, site_used: Mapping[str, np.ndarray]
) -> pd.DataFrame:
    """Slots used per week [rebuilds], fleet-wide and per site (:data:`CAPACITY_COLUMNS`)."""
    rows = []
    for week in range(s.horizon_weeks):
        start = s.week_start(week)
        rows.append((week, start, ALL_SITES, int(fleet_used[week]), s.capacity_per_week))
        for site in sorted(site_used):
            cap = s.site_capacity.get(site, pd.NA)
            rows.append((week, start, site, int(site_used[site][week]), cap))
    frame = pd.DataFrame(rows, columns=list(CAPACITY_COLUMNS))
    frame["capacity"] = frame["capacity"].astype("Int64")
    return frame


def stock_frame(
    s: PlanSettings,
    used: Mapping[str, np.ndarray],
    returned: Mapping[str, np.ndarray],
    at_end: Mapping[str, np.ndarray],
) -> pd.DataFrame:
    """Exchange units per stocked model and week [units] (:data:`STOCK_COLUMNS`).

    ``used``, ``returned`` and ``at_end`` hold one entry per week: units taken,
    cores back in stock, and units in stock at the end of the week.
    """
    rows = []
    for model in sorted(at_end):
        for week in range(s.horizon_weeks):
            end = int(at_end[model][week])
            taken, back = int(used[model][week]), int(returned[model][week])
            rows.append((week, s.week_start(week), model, end + taken, taken, back, end))
    return pd.DataFrame(rows, columns=list(STOCK_COLUMNS))


# --- the plan --------------------------------------------------------------------------------


def _assignments_frame(planned: list[dict]) -> pd.DataFrame:
    frame = pd.DataFrame(planned, columns=list(ASSIGNMENT_COLUMNS))
    frame = frame.sort_values(["week", "downtime", "position"], kind="stable")
    frame = frame.reset_index(drop=True)
    order = {d: n for n, d in enumerate(dict.fromkeys(frame["downtime"]), start=1)}
    frame["downtime"] = frame["downtime"].map(order)  # numbered in the order they are shown
    for col in ("downtime", "week", "late_weeks", "late_days"):
        frame[col] = frame[col].astype("int64")
    frame["due_week"] = frame["due_week"].astype("Int64")
    frame["remaining_h"] = frame["remaining_h"].astype(float)
    return frame


def build_plan(
    comp: pd.DataFrame,
    s: PlanSettings,
    downtimes: list[Downtime],
    planned: list[dict],
    unplanned: list[dict],
    capacity: pd.DataFrame,
    stock: pd.DataFrame,
) -> Plan:
    """Freeze the scheduler's rows and weekly tables into a :class:`Plan`.

    ``comp`` is the prepared status table (with ``due_days`` [d] from the as-of
    date); components in no downtime with a due date after the horizon are counted
    in :attr:`Plan.beyond_horizon`.
    """
    assignments = _assignments_frame(planned)
    late = assignments.loc[assignments["late_days"] > 0, list(LATE_COLUMNS)]
    grouped = {i for d in downtimes for i in d.members}
    beyond = comp.index[(comp["due_days"] >= s.horizon_days) & ~comp.index.isin(grouped)]
    return Plan(
        settings=s,
        assignments=assignments,
        capacity=capacity,
        stock=stock,
        late=late.reset_index(drop=True),
        unplanned=pd.DataFrame(unplanned, columns=list(UNPLANNED_COLUMNS)),
        unscheduled=unscheduled_frame(comp, grouped),
        beyond_horizon=len(beyond),
    )


NO_ROOM = "no room in the horizon"
NO_DATE = "cannot be placed by date"
NOT_PLACED_COLUMNS = (*ID_COLUMNS, "due_date", "remaining_h", "not_placed", "reason")
"""Columns of :func:`not_placed_frame`; ``not_placed`` is :data:`NO_ROOM` or :data:`NO_DATE`."""


def not_placed_frame(plan: Plan) -> pd.DataFrame:
    """Every drive the plan could not place, with why: first those due within the horizon
    with no week that has room, then those without a due date (:data:`NOT_PLACED_COLUMNS`)."""
    parts = [
        plan.unplanned.assign(not_placed=NO_ROOM),
        plan.unscheduled.assign(not_placed=NO_DATE, due_date=None),
    ]
    parts = [p.reindex(columns=list(NOT_PLACED_COLUMNS)) for p in parts if len(p)]
    if not parts:
        return pd.DataFrame(columns=list(NOT_PLACED_COLUMNS))
    return pd.concat(parts, ignore_index=True)


def _count(n: int, one: str, many: str | None = None) -> str:
    return f"{n} {one if n == 1 else (many or one + 's')}"


def plan_summary(plan: Plan) -> list[str]:
    """Plain-words headline lines for a plan, ending with :data:`ESTIMATE_NOTICE`."""
    s, a = plan.settings, plan.assignments
    lines = [
        f"Rebuild plan from {s.as_of.isoformat()} for {_count(s.horizon_weeks, 'week')} "
        f"(weeks {s.week_label(0)} to {s.week_label(s.horizon_weeks - 1)}), "
        f"{_count(s.capacity_per_week, 'rebuild slot')} per week fleet-wide.",
        f"{_count(len(a), 'rebuild')} in {_count(a['downtime'].nunique(), 'downtime')} "
        f"planned; {len(plan.late)} late (largest {_count(plan.max_late_days, 'day')}); "
        f"{_count(len(plan.unplanned), 'drive')} not placed for lack of room.",
    ]
    if len(plan.unscheduled):
        lines.append(
            f"{_count(len(plan.unscheduled), 'drive')} cannot be placed by date "
            "(no recent operation or no estimate)."
        )
    if plan.beyond_horizon:
        lines.append(f"{_count(plan.beyond_horizon, 'drive')} fall due after the horizon.")
    lines.append(ESTIMATE_NOTICE)
    return lines
