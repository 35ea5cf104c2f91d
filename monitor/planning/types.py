"""Data types and column layouts of a rebuild plan.

Pure, no I/O. :class:`PlanSettings` holds the validated settings (built by
:func:`monitor.planning.make_settings`), :class:`Plan` the result of
:func:`monitor.planning.plan_rebuilds`; the ``*_COLUMNS`` tuples name the columns of
the input status table and of every output table. :class:`Downtime` is the planner's
working record of components that share one downtime.
"""

from __future__ import annotations

from collections import Counter
from collections.abc import Mapping
from dataclasses import dataclass, field
from datetime import date, timedelta
from types import MappingProxyType

import pandas as pd

from monitor.domain.notices import ESTIMATE_NOTICE  # noqa: F401 - every plan view carries it

ALL_SITES = "(all sites)"
"""Value of ``site`` in the fleet-wide rows of :attr:`Plan.capacity`."""

ID_COLUMNS = ("unit", "site", "position", "component_model")
"""Columns that name one component (the first columns of every per-component table)."""
STATUS_COLUMNS = (
    *ID_COLUMNS,
    "remaining_h",
    "utilisation_h_per_day",
    "due_date",
    "status",
    "limiting",
)
"""Columns the fleet-status table must have (the stable ``rank`` keys)."""

ASSIGNMENT_COLUMNS = (
    "downtime", *ID_COLUMNS, "week", "week_start", "due_date", "due_week", "remaining_h",
    "paired_with", "late_weeks", "late_days", "reason",
)  # fmt: skip
LATE_COLUMNS = (*ID_COLUMNS, "due_date", "week", "week_start", "late_weeks", "late_days", "reason")
UNPLANNED_COLUMNS = (*ID_COLUMNS, "due_date", "remaining_h", "paired_with", "reason")
UNSCHEDULED_COLUMNS = (*ID_COLUMNS, "remaining_h", "reason")
CAPACITY_COLUMNS = ("week", "week_start", "site", "used", "capacity")
STOCK_COLUMNS = tuple(
    "week week_start component_model in_stock_at_start used returned in_stock_at_end".split()
)


@dataclass(frozen=True)
class PlanSettings:
    """The validated settings a plan was made with.

    Attributes
    ----------
    as_of : datetime.date
        The as-of date; week 0 is its ISO 8601 week (Monday to Sunday).
    horizon_weeks : int
        Number of weeks planned [weeks].
    capacity_per_week : int
        Fleet-wide rebuild slots per week [rebuilds/week].
    site_capacity : Mapping[str, int]
        Extra per-site limits [rebuilds/week]; sites not listed have only the
        fleet-wide limit.
    exchange_stock : Mapping[str, int]
        Exchange units in stock on the as-of date per component model [units];
        models not listed are unlimited.
    turnaround_days : Mapping[str, float]
        Days until a removed core is back in stock, per stocked model [d].
    pair_within_h : float or None
        Pairing window [h]; ``None`` turns pairing off.
    """

    as_of: date
    horizon_weeks: int
    capacity_per_week: int
    site_capacity: Mapping[str, int] = field(default_factory=lambda: MappingProxyType({}))
    exchange_stock: Mapping[str, int] = field(default_factory=lambda: MappingProxyType({}))
    turnaround_days: Mapping[str, float] = field(default_factory=lambda: MappingProxyType({}))
    pair_within_h: float | None = 500.0

    @property
    def first_monday(self) -> date:
        """Monday of the week holding the as-of date: the first day of week 0."""
        return self.as_of - timedelta(days=self.as_of.weekday())

    def week_start(self, week: int) -> date:
        """Monday that starts ``week`` (week 0 is the ISO 8601 week of the as-of date)."""
        return self.first_monday + timedelta(days=7 * int(week))

    def week_of(self, days_from_as_of: float) -> int:
        """The week [-] holding the day ``days_from_as_of`` [d] after the as-of date (>= 0)."""
        return max(0, int((days_from_as_of + self.as_of.weekday()) // 7))

    def week_label(self, week: int) -> str:
        """A week as a person reads it: its Monday's date and ISO 8601 week number."""
        return week_label(self.week_start(week))

    @property
    def horizon_end(self) -> date:
        """First day after the horizon (a Monday)."""
        return self.week_start(self.horizon_weeks)

    @property
    def horizon_days(self) -> float:
        """Days from the as-of date to the end of the horizon [d]."""
        return float((self.horizon_end - self.as_of).days)


def week_label(monday: date) -> str:
    """``"2026-W49 (Mon 2026-11-30)"``: a week's ISO 8601 number and its Monday's date."""
    year, week, _ = monday.isocalendar()
    return f"{year}-W{week:02d} (Mon {monday.isoformat()})"


@dataclass(frozen=True)
class Plan:
    """A rebuild plan and everything needed to explain it.

    Attributes
    ----------
    settings : PlanSettings
        The settings used.
    assignments : pandas.DataFrame
        One row per planned rebuild, columns :data:`ASSIGNMENT_COLUMNS`, sorted by
        week, then downtime. Components sharing a downtime have the same
        ``downtime`` number and ``week``; ``paired_with`` names the other
        positions ("" when alone). ``late_weeks`` [weeks] counts weeks after the due
        week; ``late_days`` [d] is the days from the due date to the week start
        (also > 0 for a component already past due on the as-of date).
        ``reason`` says in plain words why this week.
    capacity : pandas.DataFrame
        Slots used per week, columns :data:`CAPACITY_COLUMNS`; ``site`` is
        :data:`ALL_SITES` for the fleet-wide limit; ``capacity`` is ``<NA>`` for a
        site without its own limit.
    stock : pandas.DataFrame
        Exchange units per stocked model and week, columns :data:`STOCK_COLUMNS`.
    late : pandas.DataFrame
        Planned rebuilds after their due date, columns :data:`LATE_COLUMNS`.
    unplanned : pandas.DataFrame
        Components due within the horizon for which no week has room, columns
        :data:`UNPLANNED_COLUMNS`.
    unscheduled : pandas.DataFrame
        Components that cannot be placed by date (no utilisation, or no estimate),
        columns :data:`UNSCHEDULED_COLUMNS`.
    beyond_horizon : int
        Number of components with a due date after the horizon (not planned).
    """

    settings: PlanSettings
    assignments: pd.DataFrame
    capacity: pd.DataFrame
    stock: pd.DataFrame
    late: pd.DataFrame
    unplanned: pd.DataFrame
    unscheduled: pd.DataFrame
    beyond_horizon: int

    @property
    def max_late_days(self) -> int:
        """Largest lateness of a planned rebuild [d] (0 when all are on time)."""
        if self.assignments.empty:
            return 0
        return int(self.assignments["late_days"].max())


@dataclass
class Downtime:
    """Components of one unit that share one downtime (the planner's working record).

    Attributes
    ----------
    members : list of int
        Row numbers of the prepared status table; ``members[0]`` is the anchor (the
        earliest-due component of the group).
    site : str
        Site of the unit.
    models : collections.Counter
        Component models of the members and how many of each [units].
    key : tuple
        Sort key of the anchor (due days, remaining hours, unit, position).
    due_week : int
        Week the anchor falls due in [weeks], >= 0.
    note : str
        Extra plain-words remark for every member's reason ("" when none).
    """

    members: list[int]
    site: str
    models: Counter
    key: tuple
    due_week: int
    note: str = ""
