"""Rebuild planner: fit the components that fall due into the shop's weekly capacity.

Pure model, no I/O. Input is the fleet-status table (one row per component, the
stable ``rank`` columns) at an as-of date; output is a frozen :class:`Plan` with
one row per planned rebuild, the capacity and exchange-stock use per week, and
the components that end up late, unplanned or unschedulable.

Rules, in plain words
---------------------
- Weeks are counted from the as-of date: week ``k`` starts on ``as_of + 7 k`` days.
- A component is due within the horizon when its due date falls before
  ``as_of + 7 * horizon_weeks``; a component with ``remaining_h <= 0`` is due now.
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
"""

from __future__ import annotations

import math
from collections import Counter
from collections.abc import Mapping
from dataclasses import dataclass, field
from datetime import date, datetime, timedelta
from types import MappingProxyType

import numpy as np
import pandas as pd

ESTIMATE_NOTICE = (
    "All dates and hours in this plan are estimates from logged loads and wear trends. "
    "The maker's service limits, local codes and qualified technicians decide when a "
    "pump or motor is rebuilt. Pressurised hydraulic systems are dangerous: only "
    "trained people should work on them, after isolating and relieving all pressure."
)
"""Plain-words notice every user-facing view or export of a plan must carry."""

ALL_SITES = "(all sites)"
"""Value of ``site`` in the fleet-wide rows of :attr:`Plan.capacity`."""

_ID = ("unit", "site", "position", "component_model")
STATUS_COLUMNS = (*_ID, "remaining_h", "utilisation_h_per_day", "due_date", "status", "limiting")
"""Columns the fleet-status table must have (the stable ``rank`` keys)."""

ASSIGNMENT_COLUMNS = (
    "downtime", *_ID, "week", "week_start", "due_date", "due_week", "remaining_h",
    "paired_with", "late_weeks", "late_days", "reason",
)  # fmt: skip
LATE_COLUMNS = (*_ID, "due_date", "week", "week_start", "late_weeks", "late_days", "reason")
UNPLANNED_COLUMNS = (*_ID, "due_date", "remaining_h", "paired_with", "reason")
UNSCHEDULED_COLUMNS = (*_ID, "remaining_h", "reason")
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
        First day of week 0.
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

    def week_start(self, week: int) -> date:
        """First day of ``week`` (week 0 starts on the as-of date)."""
        return self.as_of + timedelta(days=7 * int(week))

    @property
    def horizon_end(self) -> date:
        """First day after the horizon."""
        return self.week_start(self.horizon_weeks)


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


@dataclass
class _Downtime:
    members: list[int]  # row labels of the prepared table; members[0] is the anchor
    site: str
    models: Counter
    key: tuple
    due_week: int
    note: str = ""


def _sort_key(rows: list, i: int) -> tuple:
    row = rows[i]
    due = row.due_days if not math.isnan(row.due_days) else math.inf
    rem = row.remaining_h if not math.isnan(row.remaining_h) else math.inf
    return (due, rem, row.unit, row.position)


def _downtime(rows: list, members: list[int], note: str = "") -> _Downtime:
    anchor = rows[members[0]]
    return _Downtime(
        members=members,
        site=anchor.site,
        models=Counter(rows[i].component_model for i in members),
        key=_sort_key(rows, members[0]),
        due_week=max(0, int(anchor.due_days // 7)),
        note=note,
    )


def _unit_downtimes(rows: list, unit_rows: list[int], settings: PlanSettings) -> list[list]:
    """Group the due components of one unit into downtimes (anchor first)."""
    end_days = 7 * settings.horizon_weeks
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


def _split_if_never_fits(rows: list, members: list[int], settings: PlanSettings) -> list[_Downtime]:
    """Keep a group as one downtime unless no single week could ever hold it."""
    group = _downtime(rows, members)
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
    end_days = 7 * settings.horizon_weeks
    due = [i for i in members if rows[i].due_days < end_days]  # NaN compares False
    return [_downtime(rows, [i], note) for i in due]


def _downtimes(rows: list, settings: PlanSettings) -> list[_Downtime]:
    by_unit: dict[str, list[int]] = {}
    for i, row in enumerate(rows):
        by_unit.setdefault(row.unit, []).append(i)
    out: list[_Downtime] = []
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

    def blockers(self, d: _Downtime, week: int) -> list[str]:
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

    def book(self, d: _Downtime, week: int) -> None:
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


def _choose_week(shop: _Shop, d: _Downtime) -> tuple[int | None, str]:
    """Latest week with room up to the due week, else the earliest after it."""
    h = shop.settings.horizon_weeks
    for week in range(d.due_week, -1, -1):
        if not shop.blockers(d, week):
            if week == d.due_week:
                return week, "planned in its due week"
            why = "; ".join(shop.blockers(d, d.due_week))
            return week, f"brought forward to week {week} because week {d.due_week} is full ({why})"
    why = "; ".join(shop.blockers(d, d.due_week))
    for week in range(d.due_week + 1, h):
        if not shop.blockers(d, week):
            span = "week 0" if d.due_week == 0 else f"weeks 0-{d.due_week}"
            return week, f"no room in {span} ({why}); earliest week with room is week {week}"
    reasons = sorted({b for w in range(h) for b in shop.blockers(d, w)})
    return None, f"no week of the {h}-week horizon has room ({'; '.join(reasons)})"


# --- explanations and output frames ---------------------------------------------------


def _hours(value: float) -> str:
    return "no estimate" if math.isnan(value) else f"{value:,.0f} h"


def _lateness(due: date | None, due_days: float, week: int, settings: PlanSettings) -> tuple:
    if due is None:
        return 0, 0
    due_week = max(0, int(due_days // 7))
    late_days = max(0, (settings.week_start(week) - due).days)
    return max(0, week - due_week), late_days


def _member_reason(rows: list, d: _Downtime, i: int, how: str, s: PlanSettings) -> str:
    row, anchor = rows[i], rows[d.members[0]]
    others = [rows[j].position for j in d.members if j != i]
    due = "no due date" if row.due_date is None else f"due {row.due_date.isoformat()}"
    if i == d.members[0]:
        text = f"{row.position}: {due} (week {d.due_week}); {how}."
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


def _assignment_rows(
    rows: list, d: _Downtime, number: int, week: int, how: str, s: PlanSettings
) -> list[dict]:
    out = []
    for i in d.members:
        row = rows[i]
        late_weeks, late_days = _lateness(row.due_date, row.due_days, week, s)
        own_due_week = pd.NA if math.isnan(row.due_days) else max(0, int(row.due_days // 7))
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
                "paired_with": ", ".join(rows[j].position for j in d.members if j != i),
                "late_weeks": late_weeks,
                "late_days": late_days,
                "reason": _member_reason(rows, d, i, how, s),
            }
        )
    return out


def _unplanned_rows(rows: list, d: _Downtime, how: str, s: PlanSettings) -> list[dict]:
    out = []
    for i in d.members:
        row = rows[i]
        out.append(
            {c: getattr(row, c) for c in (*_ID, "due_date", "remaining_h")}
            | {
                "paired_with": ", ".join(rows[j].position for j in d.members if j != i),
                "reason": _member_reason(rows, d, i, how, s),
            }
        )
    return out


def _unscheduled(comp: pd.DataFrame, grouped: set[int]) -> pd.DataFrame:
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
        rows.append({c: row[c] for c in UNSCHEDULED_COLUMNS[:5]} | {"reason": why})
    return pd.DataFrame(rows, columns=list(UNSCHEDULED_COLUMNS))


def _capacity_frame(shop: _Shop, s: PlanSettings) -> pd.DataFrame:
    rows = []
    for week in range(s.horizon_weeks):
        start = s.week_start(week)
        rows.append((week, start, ALL_SITES, int(shop.fleet_used[week]), s.capacity_per_week))
        for site in sorted(shop.site_used):
            cap = s.site_capacity.get(site, pd.NA)
            rows.append((week, start, site, int(shop.site_used[site][week]), cap))
    frame = pd.DataFrame(rows, columns=list(CAPACITY_COLUMNS))
    frame["capacity"] = frame["capacity"].astype("Int64")
    return frame


def _stock_frame(shop: _Shop, s: PlanSettings) -> pd.DataFrame:
    rows = []
    for model in sorted(shop.net):
        for week in range(s.horizon_weeks):
            end = int(shop.net[model][week])
            used, back = int(shop.used[model][week]), int(shop.returned[model][week])
            start = s.week_start(week)
            rows.append((week, start, model, end + used, used, back, end))
    return pd.DataFrame(rows, columns=list(STOCK_COLUMNS))


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
            unplanned.extend(_unplanned_rows(rows, d, how, s))
            continue
        shop.book(d, week)
        number += 1
        planned.extend(_assignment_rows(rows, d, number, week, how, s))
    return _assemble(comp, s, shop, downtimes, planned, unplanned)


def _assemble(
    comp: pd.DataFrame,
    s: PlanSettings,
    shop: _Shop,
    downtimes: list[_Downtime],
    planned: list[dict],
    unplanned: list[dict],
) -> Plan:
    assignments = pd.DataFrame(planned, columns=list(ASSIGNMENT_COLUMNS))
    assignments = assignments.sort_values(["week", "downtime", "position"], kind="stable")
    assignments = assignments.reset_index(drop=True)
    for col in ("downtime", "week", "late_weeks", "late_days"):
        assignments[col] = assignments[col].astype("int64")
    assignments["due_week"] = assignments["due_week"].astype("Int64")
    assignments["remaining_h"] = assignments["remaining_h"].astype(float)
    late = assignments.loc[assignments["late_days"] > 0, list(LATE_COLUMNS)]
    grouped = {i for d in downtimes for i in d.members}
    beyond = comp.index[(comp["due_days"] >= 7 * s.horizon_weeks) & ~comp.index.isin(grouped)]
    return Plan(
        settings=s,
        assignments=assignments,
        capacity=_capacity_frame(shop, s),
        stock=_stock_frame(shop, s),
        late=late.reset_index(drop=True),
        unplanned=pd.DataFrame(unplanned, columns=list(UNPLANNED_COLUMNS)),
        unscheduled=_unscheduled(comp, grouped),
        beyond_horizon=len(beyond),
    )


def plan_summary(plan: Plan) -> list[str]:
    """Plain-words headline lines for a plan, ending with :data:`ESTIMATE_NOTICE`."""
    s, a = plan.settings, plan.assignments
    lines = [
        f"Rebuild plan from {s.as_of.isoformat()} for {s.horizon_weeks} week(s), "
        f"{s.capacity_per_week} rebuild slot(s) per week fleet-wide.",
        f"{len(a)} rebuild(s) in {a['downtime'].nunique()} downtime(s) planned; "
        f"{len(plan.late)} late (largest {plan.max_late_days} days); "
        f"{len(plan.unplanned)} unplanned for lack of room.",
    ]
    if len(plan.unscheduled):
        lines.append(
            f"{len(plan.unscheduled)} component(s) cannot be placed by date "
            "(no utilisation or no estimate)."
        )
    if plan.beyond_horizon:
        lines.append(f"{plan.beyond_horizon} component(s) fall due after the horizon.")
    lines.append(ESTIMATE_NOTICE)
    return lines
