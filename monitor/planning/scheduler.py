"""Rebuild planner: fit the components that fall due into the shop's weekly capacity.

Pure model, no I/O. Input is the fleet-status table (one row per component, the
stable ``rank`` columns) at an as-of date; output is a frozen :class:`Plan` with
one row per planned rebuild, the capacity and exchange-stock use per week, and
the components that end up late, unplanned or unschedulable.

Rules, in plain words
---------------------
- Weeks are calendar weeks (ISO 8601, Monday to Sunday): week 0 is the week of the
  as-of date, week ``k`` starts on its Monday + 7 k days.
- A component is due within the horizon when its due date falls before the Monday
  that ends the horizon; a component with ``remaining_h <= 0`` is due now.
- Pairing: when another component of the same unit has remaining hours within
  ``pair_within_h`` of the earliest-due one, both share one downtime; the downtime
  uses one rebuild slot and one exchange unit per component, all in the same week.
- Order: earliest due date first, ties by remaining hours, then unit tag and
  position, so the plan is stable and explainable.
- Week: the latest week up to the due week that has room (use as much of the life
  as the capacity allows); if none has room, the earliest week after it, reported
  late; if no week of the horizon has room, the component is unplanned with reason.
- Exchange stock: a rebuild takes one exchange unit of its component model in its
  week; the removed core is back in stock from the week containing
  ``week_start + turnaround_days``, but never in the week it was removed (the plan
  does not sequence rebuilds within a week). Models without configured stock have
  unlimited exchange units.

Why the order is earliest-due-date: with unit-length jobs and the same capacity in
every week, earliest-due-date list scheduling minimises the largest lateness
(Jackson's rule; J. R. Jackson, "Scheduling a production line to minimize maximum
tardiness", Research Report 43, Management Science Research Project, UCLA, 1955).
Per-site limits and exchange stock are honoured but make the plan a good, not a
proven best, one.

The plan's types and column layouts live in :mod:`monitor.planning.types`, its
plain-words reasons and output tables in :mod:`monitor.planning.report`; every
public name of both is importable from here.
"""

from __future__ import annotations

import math
from collections import Counter
from collections.abc import Mapping
from datetime import date, datetime
from types import MappingProxyType

import numpy as np
import pandas as pd

from monitor.planning.report import (
    NO_DATE,
    NO_ROOM,
    NOT_PLACED_COLUMNS,
    assignment_rows,
    build_plan,
    capacity_frame,
    not_placed_frame,
    plan_summary,
    stock_frame,
    unplanned_rows,
)
from monitor.planning.types import (
    ALL_SITES,
    ASSIGNMENT_COLUMNS,
    CAPACITY_COLUMNS,
    ESTIMATE_NOTICE,
    ID_COLUMNS,
    LATE_COLUMNS,
    STATUS_COLUMNS,
    STOCK_COLUMNS,
    UNPLANNED_COLUMNS,
    UNSCHEDULED_COLUMNS,
    Downtime,
    Plan,
    PlanSettings,
)

__all__ = [
    "ALL_SITES",
    "ASSIGNMENT_COLUMNS",
    "CAPACITY_COLUMNS",
    "ESTIMATE_NOTICE",
    "ID_COLUMNS",
    "LATE_COLUMNS",
    "STATUS_COLUMNS",
    "STOCK_COLUMNS",
    "UNPLANNED_COLUMNS",
    "UNSCHEDULED_COLUMNS",
    "Plan",
    "PlanSettings",
    "make_settings",
    "plan_rebuilds",
    "plan_summary",
    "not_placed_frame",
    "NOT_PLACED_COLUMNS",
    "NO_ROOM",
    "NO_DATE",
]


# --- settings and input checks ------------------------------------------------------


def _whole(value: object, name: str, minimum: int) -> int:
    if isinstance(value, bool) or not isinstance(value, (int, np.integer, float)):
        raise ValueError(f"{name} must be a whole number >= {minimum}, got {value!r}")
    if not float(value).is_integer() or value < minimum:
        raise ValueError(f"{name} must be a whole number >= {minimum}, got {value!r}")
    return int(value)


def _as_date(value: object, name: str) -> date:
    if isinstance(value, pd.Timestamp) and not pd.isna(value):
        return value.date()
    if isinstance(value, datetime):
        return value.date()
    if isinstance(value, date):
        return value
    raise ValueError(f"{name} must be a date (datetime.date), got {value!r}")


def _per_model_days(
    turnaround_days: float | Mapping[str, float] | None, stock: Mapping[str, int]
) -> dict[str, float]:
    out: dict[str, float] = {}
    for model in stock:
        if isinstance(turnaround_days, Mapping):
            days = turnaround_days.get(model)
        else:
            days = turnaround_days
        if days is None:
            raise ValueError(
                f"turnaround_days has no value for component model {model!r}: give the "
                "days until a removed core is back in stock, as one number or per model"
            )
        if isinstance(days, bool) or not isinstance(days, (int, float, np.number)):
            raise ValueError(f"turnaround_days for {model!r} must be a number of days")
        if not math.isfinite(days) or days < 0:
            raise ValueError(f"turnaround_days for {model!r} must be >= 0 days, got {days!r}")
        out[str(model)] = float(days)
    return out


def make_settings(
    as_of: date,
    horizon_weeks: int,
    capacity_per_week: int,
    *,
    site_capacity: Mapping[str, int] | None = None,
    exchange_stock: Mapping[str, int] | None = None,
    turnaround_days: float | Mapping[str, float] | None = None,
    pair_within_h: float | None = 500.0,
) -> PlanSettings:
    """Check the planning settings and freeze them (see :func:`plan_rebuilds`)."""
    sites = {
        str(s): _whole(c, f"site_capacity[{s!r}]", 0) for s, c in (site_capacity or {}).items()
    }
    stock = {
        str(m): _whole(n, f"exchange_stock[{m!r}]", 0) for m, n in (exchange_stock or {}).items()
    }
    if pair_within_h is not None:
        ok = isinstance(pair_within_h, (int, float, np.number)) and not isinstance(
            pair_within_h, bool
        )
        if not ok or not math.isfinite(pair_within_h) or pair_within_h < 0:
            raise ValueError(
                f"pair_within_h must be hours >= 0 or None (no pairing), got {pair_within_h!r}"
            )
        pair_within_h = float(pair_within_h)
    return PlanSettings(
        as_of=_as_date(as_of, "as_of"),
        horizon_weeks=_whole(horizon_weeks, "horizon_weeks", 1),
        capacity_per_week=_whole(capacity_per_week, "capacity_per_week", 0),
        site_capacity=MappingProxyType(sites),
        exchange_stock=MappingProxyType(stock),
        turnaround_days=MappingProxyType(_per_model_days(turnaround_days, stock)),
        pair_within_h=pair_within_h,
    )


def _due_dates(column: pd.Series) -> pd.Series:
    try:
        stamps = pd.to_datetime(column, errors="raise")
    except (ValueError, TypeError) as exc:
        raise ValueError(
            f"status column 'due_date' must hold dates (or empty for none): {exc}"
        ) from exc
    return pd.Series(
        [None if pd.isna(t) else t.date() for t in stamps], index=column.index, dtype=object
    )


def _text(column: pd.Series, name: str, required: bool) -> pd.Series:
    missing = column.isna()
    if required and missing.any():
        first = int(np.flatnonzero(missing.to_numpy())[0])
        raise ValueError(f"status column {name!r} is empty in row {first}: every row needs one")
    return column.astype(object).where(~missing, "").map(str)


def _prepare(status: pd.DataFrame, as_of: date) -> pd.DataFrame:
    """Normalise the fleet-status table into the columns the planner uses."""
    if not isinstance(status, pd.DataFrame):
        raise ValueError(f"status must be a pandas DataFrame, got {type(status).__name__}")
    missing = [c for c in STATUS_COLUMNS if c not in status.columns]
    if missing:
        raise ValueError(
            f"status is missing column(s) {missing}; expected at least {list(STATUS_COLUMNS)}"
        )
    src = status.reset_index(drop=True)
    comp = pd.DataFrame(
        {c: _text(src[c], c, c != "site") for c in ("unit", "site", "position")}
        | {"component_model": _text(src["component_model"], "component_model", True)}
    )
    try:
        comp["remaining_h"] = pd.to_numeric(src["remaining_h"], errors="raise").astype(float)
    except (ValueError, TypeError) as exc:
        raise ValueError(f"status column 'remaining_h' must be hours (or NaN): {exc}") from exc
    comp["status"] = _text(src["status"], "status", False)
    comp["due_date"] = _due_dates(src["due_date"])
    due_now = comp["remaining_h"] <= 0
    comp.loc[due_now & comp["due_date"].isna(), "due_date"] = as_of
    comp["due_days"] = [np.nan if d is None else float((d - as_of).days) for d in comp.due_date]
    dup = comp.duplicated(["unit", "position"], keep=False)
    if dup.any():
        row = comp[dup].iloc[0]
        raise ValueError(
            f"status has more than one row for unit {row.unit!r} position {row.position!r}: "
            "expected one row per component"
        )
    return comp


# --- downtimes ------------------------------------------------------------------------


def _sort_key(rows: list, i: int) -> tuple:
    row = rows[i]
    due = row.due_days if not math.isnan(row.due_days) else math.inf
    rem = row.remaining_h if not math.isnan(row.remaining_h) else math.inf
    return (due, rem, row.unit, row.position)


def _downtime(rows: list, members: list[int], settings: PlanSettings, note: str = "") -> Downtime:
    anchor = rows[members[0]]
    return Downtime(
        members=members,
        site=anchor.site,
        models=Counter(rows[i].component_model for i in members),
        key=_sort_key(rows, members[0]),
        due_week=settings.week_of(anchor.due_days),
        note=note,
    )


def _unit_downtimes(rows: list, unit_rows: list[int], settings: PlanSettings) -> list[list]:
    """Group the due components of one unit into downtimes (anchor first)."""
    end_days = settings.horizon_days
    unit_rows = sorted(unit_rows, key=lambda i: _sort_key(rows, i))
    taken: set[int] = set()
    groups = []
    for i in unit_rows:
        due = rows[i].due_days
        if i in taken or math.isnan(due) or due >= end_days:
            continue
        members = [i]
        if settings.pair_within_h is not None:
            rem = rows[i].remaining_h
            for j in unit_rows:
                other = rows[j].remaining_h
                if j != i and j not in taken and not math.isnan(other):
                    if abs(other - rem) <= settings.pair_within_h:
                        members.append(j)
        taken.update(members)
        groups.append(members)
    return groups


def _room(settings: PlanSettings, site: str) -> int:
    return min(settings.capacity_per_week, settings.site_capacity.get(site, math.inf))


def _split_if_never_fits(rows: list, members: list[int], settings: PlanSettings) -> list[Downtime]:
    """Keep a group as one downtime unless no single week could ever hold it."""
    group = _downtime(rows, members, settings)
    room = _room(settings, group.site)
    short = [m for m, n in group.models.items() if n > settings.exchange_stock.get(m, math.inf)]
    if len(members) == 1 or room == 0 or (len(members) <= room and not short):
        return [group]
    why = (
        f"exchange stock of {', '.join(short)} is too small"
        if len(members) <= room
        else f"one week has room for only {room} rebuild(s)"
    )
    note = f"Not combined with the other loop(s) of the unit: {why} for one joint downtime."
    end_days = settings.horizon_days
    due = [i for i in members if rows[i].due_days < end_days]  # NaN compares False
    return [_downtime(rows, [i], settings, note) for i in due]


def _downtimes(rows: list, settings: PlanSettings) -> list[Downtime]:
    by_unit: dict[str, list[int]] = {}
    for i, row in enumerate(rows):
        by_unit.setdefault(row.unit, []).append(i)
    out: list[Downtime] = []
    for unit_rows in by_unit.values():
        for members in _unit_downtimes(rows, unit_rows, settings):
            out.extend(_split_if_never_fits(rows, members, settings))
    return sorted(out, key=lambda d: d.key)


# --- the schedule ---------------------------------------------------------------------


class _Shop:
    """Slots and exchange units booked so far, one array entry per week."""

    def __init__(self, settings: PlanSettings, sites: list[str]) -> None:
        h = settings.horizon_weeks
        self.settings = settings
        self.fleet_used = np.zeros(h, dtype=int)
        self.site_used = {s: np.zeros(h, dtype=int) for s in sites}
        self.used = {m: np.zeros(h, dtype=int) for m in settings.exchange_stock}
        self.returned = {m: np.zeros(h, dtype=int) for m in settings.exchange_stock}
        self.net = {m: np.full(h, n, dtype=int) for m, n in settings.exchange_stock.items()}

    def _return_week(self, model: str, week: int) -> int:
        return week + max(1, int(self.settings.turnaround_days[model] // 7))

    def blockers(self, d: Downtime, week: int) -> list[str]:
        """Why ``d`` does not fit in ``week`` (empty when it fits)."""
        s, k, out = self.settings, len(d.members), []
        if self.fleet_used[week] + k > s.capacity_per_week:
            out.append(f"fleet-wide limit of {s.capacity_per_week} rebuild(s) per week")
        cap = s.site_capacity.get(d.site)
        if cap is not None and self.site_used[d.site][week] + k > cap:
            out.append(f"site {d.site} limit of {cap} rebuild(s) per week")
        for model, n in sorted(d.models.items()):
            if model in self.net:
                stop = min(self._return_week(model, week), s.horizon_weeks)
                if self.net[model][week:stop].min() < n:
                    out.append(f"no exchange unit of {model} free")
        return out

    def book(self, d: Downtime, week: int) -> None:
        k = len(d.members)
        self.fleet_used[week] += k
        self.site_used[d.site][week] += k
        for model, n in d.models.items():
            if model in self.net:
                back = self._return_week(model, week)
                self.used[model][week] += n
                self.net[model][week:] -= n
                if back < self.settings.horizon_weeks:
                    self.returned[model][back] += n
                    self.net[model][back:] += n


def _choose_week(shop: _Shop, d: Downtime) -> tuple[int | None, str]:
    """Latest week with room up to the due week, else the earliest after it."""
    h = shop.settings.horizon_weeks
    for week in range(d.due_week, -1, -1):
        if not shop.blockers(d, week):
            if week == d.due_week:
                return week, "planned in its due week"
            why = "; ".join(shop.blockers(d, d.due_week))
            label, due = shop.settings.week_label(week), shop.settings.week_label(d.due_week)
            return week, f"brought forward to week {label} because week {due} is full ({why})"
    why = "; ".join(shop.blockers(d, d.due_week))
    for week in range(d.due_week + 1, h):
        if not shop.blockers(d, week):
            s = shop.settings
            span = (
                f"week {s.week_label(0)}"
                if d.due_week == 0
                else (f"weeks {s.week_label(0)} to {s.week_label(d.due_week)}")
            )
            return week, f"no room in {span} ({why}); earliest week with room: {s.week_label(week)}"
    reasons = sorted({b for w in range(h) for b in shop.blockers(d, w)})
    return None, f"no week of the {h}-week horizon has room ({'; '.join(reasons)})"


# --- the plan ----------------------------------------------------------------------------


def plan_rebuilds(
    status: pd.DataFrame,
    as_of: date,
    *,
    horizon_weeks: int,
    capacity_per_week: int,
    site_capacity: Mapping[str, int] | None = None,
    exchange_stock: Mapping[str, int] | None = None,
    turnaround_days: float | Mapping[str, float] | None = None,
    pair_within_h: float | None = 500.0,
) -> Plan:
    """Assign a rebuild week to every component that falls due within the horizon.

    Parameters
    ----------
    status : pandas.DataFrame
        Fleet status, one row per component, with columns :data:`STATUS_COLUMNS`:
        ``remaining_h`` [h] (NaN: no estimate), ``due_date`` (date, or None/NaT when
        there is no utilisation).
    as_of : datetime.date
        As-of date; week 0 starts on it.
    horizon_weeks : int
        Weeks to plan [weeks], >= 1.
    capacity_per_week : int
        Fleet-wide rebuild slots per week [rebuilds/week], >= 0.
    site_capacity : Mapping[str, int], optional
        Per-site slots per week [rebuilds/week]; both limits must hold.
    exchange_stock : Mapping[str, int], optional
        Exchange units in stock per component model [units]; unlisted: unlimited.
    turnaround_days : float or Mapping[str, float], optional
        Days until a removed core is back in stock [d], one value or per model;
        required for every model in ``exchange_stock``.
    pair_within_h : float or None, default 500
        Other loops of a unit whose remaining hours are within this many hours of
        the earliest-due one share its downtime [h]; ``None`` turns pairing off.

    Returns
    -------
    Plan
        Assignments, weekly capacity and stock use, late, unplanned and
        unscheduled components, and the settings.

    Raises
    ------
    ValueError
        A setting is out of range (the message names it) or ``status`` lacks a
        column, has an unreadable value or repeats a component.

    Notes
    -----
    Downtimes are taken in earliest-due-date order (ties: remaining hours, unit,
    position); each goes to the latest week up to its due week with room for all
    its components (fleet-wide and site slots, exchange units until the cores are
    back), else the earliest later week (late), else it is unplanned.

    References
    ----------
    .. [1] J. R. Jackson, "Scheduling a production line to minimize maximum
       tardiness", Research Report 43, Management Science Research Project,
       University of California, Los Angeles, 1955 (earliest-due-date rule).
    """
    s = make_settings(
        as_of,
        horizon_weeks,
        capacity_per_week,
        site_capacity=site_capacity,
        exchange_stock=exchange_stock,
        turnaround_days=turnaround_days,
        pair_within_h=pair_within_h,
    )
    comp = _prepare(status, s.as_of)
    rows = list(comp.itertuples(index=False))  # row i is comp label i (fast access)
    downtimes = _downtimes(rows, s)
    shop = _Shop(s, sorted(set(comp["site"]) | set(s.site_capacity)))
    planned, unplanned, number = [], [], 0
    for d in downtimes:
        week, how = _choose_week(shop, d)
        if week is None:
            unplanned.extend(unplanned_rows(rows, d, how, s))
            continue
        shop.book(d, week)
        number += 1
        planned.extend(assignment_rows(rows, d, number, week, how, s))
    capacity = capacity_frame(s, shop.fleet_used, shop.site_used)
    stock = stock_frame(s, shop.used, shop.returned, shop.net)
    return build_plan(comp, s, downtimes, planned, unplanned, capacity, stock)
