"""Tests for the rebuild planner (monitor/planning.py).

Expected weeks and lateness are hand-computed from the rules in the module docstring
(week k starts on as_of + 7k days; latest week with room up to the due week, else the
earliest later week). The optimality check compares with an exhaustive search, which is
the outside reference: earliest-due-date order minimises the largest lateness for
unit-length jobs with the same capacity every week (Jackson's rule; J. R. Jackson 1955,
"Scheduling a production line to minimize maximum tardiness", UCLA Research Report 43).
"""

from __future__ import annotations

import itertools
import math
from collections import Counter
from datetime import date, datetime, timedelta

import numpy as np
import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from monitor.planning import (
    ALL_SITES,
    ESTIMATE_NOTICE,
    STATUS_COLUMNS,
    plan_rebuilds,
    plan_summary,
)

AS_OF = date(2026, 3, 2)  # invented as-of date (a Monday)


def comp(unit, position="left", *, days=None, rem=None, site="North Pit", model="CP-75"):
    """One fleet-status row; ``days`` after AS_OF gives the due date."""
    due = None if days is None else AS_OF + timedelta(days=days)
    if rem is None:
        rem = float("nan") if days is None else 10.0 * max(days, 0)
    util = float("nan") if days is None else 10.0
    return {
        "unit": unit,
        "site": site,
        "position": position,
        "component_model": model,
        "remaining_h": float(rem),
        "utilisation_h_per_day": util,
        "due_date": due,
        "status": "watch",
        "limiting": "bearing",
    }


def fleet(*rows):
    return pd.DataFrame(list(rows), columns=list(STATUS_COLUMNS))


def weeks_of(plan):
    a = plan.assignments
    return {(u, p): int(w) for u, p, w in zip(a.unit, a.position, a.week, strict=True)}


# --- hand-computed small plans ----------------------------------------------------------


def test_single_component_goes_to_its_due_week():
    # due 2026-03-20 = 18 days after AS_OF -> week 18 // 7 = 2, starting 2026-03-16
    plan = plan_rebuilds(fleet(comp("A-1", days=18)), AS_OF, horizon_weeks=6, capacity_per_week=1)
    row = plan.assignments.iloc[0]
    assert (row.week, row.week_start, row.due_week) == (2, date(2026, 3, 16), 2)
    assert (row.late_weeks, row.late_days) == (0, 0)
    assert "due week" in row.reason
    assert plan.late.empty and plan.unplanned.empty and plan.unscheduled.empty


def test_full_due_week_brings_the_later_due_one_forward():
    # capacity 1; both due in week 2; EDD takes the day-15 one first -> week 2;
    # the day-16 one finds week 2 full and goes to week 1 (on time)
    # (weeks are ISO weeks: week 1 from AS_OF, a Monday, is 2026-W11)
    f = fleet(comp("A-1", days=16), comp("A-2", days=15))
    plan = plan_rebuilds(f, AS_OF, horizon_weeks=4, capacity_per_week=1)
    assert weeks_of(plan) == {("A-2", "left"): 2, ("A-1", "left"): 1}
    assert plan.late.empty
    reason = plan.assignments.set_index("unit").loc["A-1", "reason"]
    assert "brought forward to week 2026-W11 (Mon 2026-03-09)" in reason


def test_capacity_forces_lateness_in_weeks_and_days():
    # capacity 1; three due on day 3 (week 0): weeks 0, 1, 2; the last two late by
    # 1 and 2 weeks = (AS_OF+7) - (AS_OF+3) = 4 days and (AS_OF+14) - (AS_OF+3) = 11 days.
    # Tie order: equal due dates, then remaining hours (10, 20, 30 h).
    f = fleet(comp("C", days=3, rem=10), comp("B", days=3, rem=20), comp("A", days=3, rem=30))
    plan = plan_rebuilds(f, AS_OF, horizon_weeks=3, capacity_per_week=1)
    assert weeks_of(plan) == {("C", "left"): 0, ("B", "left"): 1, ("A", "left"): 2}
    late = plan.late.set_index("unit")
    assert late.loc["B", ["late_weeks", "late_days"]].tolist() == [1, 4]
    assert late.loc["A", ["late_weeks", "late_days"]].tolist() == [2, 11]
    assert plan.max_late_days == 11
    assert "earliest week with room: 2026-W12 (Mon 2026-03-16)" in late.loc["A", "reason"]


def test_ties_broken_by_tag_and_input_order_does_not_matter():
    rows = [comp(u, days=2, rem=20) for u in ("U-3", "U-1", "U-2")]
    a = plan_rebuilds(fleet(*rows), AS_OF, horizon_weeks=3, capacity_per_week=1)
    b = plan_rebuilds(fleet(*rows[::-1]), AS_OF, horizon_weeks=3, capacity_per_week=1)
    # equal due date and hours -> tag order U-1, U-2, U-3 takes weeks 0, 1, 2
    assert weeks_of(a) == {("U-1", "left"): 0, ("U-2", "left"): 1, ("U-3", "left"): 2}
    pd.testing.assert_frame_equal(a.assignments, b.assignments)


def test_overdue_and_due_now_go_to_week_zero():
    f = fleet(comp("OLD", days=-5), comp("ZERO", rem=0.0))
    f.loc[1, "due_date"] = None  # remaining 0 h without a due date is due now
    plan = plan_rebuilds(f, AS_OF, horizon_weeks=2, capacity_per_week=5)
    assert weeks_of(plan) == {("OLD", "left"): 0, ("ZERO", "left"): 0}
    old = plan.assignments.set_index("unit").loc["OLD"]
    assert (old.late_weeks, old.late_days) == (0, 5)  # 5 days past due on AS_OF
    assert "already past its due date" in old.reason
    assert list(plan.late.unit) == ["OLD"]
    zero = plan.assignments.set_index("unit").loc["ZERO"]
    assert zero.due_date == AS_OF and zero.late_days == 0


def test_site_limit_holds_alongside_fleet_limit():
    # fleet 3/week, North Pit 1/week: three North Pit units due in week 1 -> weeks 1, 0, 2;
    # the Mill Yard unit due in week 1 still fits in week 1 (fleet 2 of 3 used)
    f = fleet(
        comp("N-1", days=8),
        comp("N-2", days=9),
        comp("N-3", days=10),
        comp("M-1", days=11, site="Mill Yard"),
    )
    plan = plan_rebuilds(
        f, AS_OF, horizon_weeks=3, capacity_per_week=3, site_capacity={"North Pit": 1}
    )
    assert weeks_of(plan) == {
        ("N-1", "left"): 1,
        ("N-2", "left"): 0,
        ("N-3", "left"): 2,
        ("M-1", "left"): 1,
    }
    n3 = plan.late.set_index("unit").loc["N-3"]
    assert "site North Pit limit of 1" in n3.reason
    cap = plan.capacity.set_index(["week", "site"])
    assert cap.loc[(1, ALL_SITES), "used"] == 2 and cap.loc[(1, ALL_SITES), "capacity"] == 3
    assert cap.loc[(1, "North Pit"), "capacity"] == 1
    assert pd.isna(cap.loc[(1, "Mill Yard"), "capacity"])


def test_exchange_stock_and_turnaround():
    # one CP-75 exchange unit, cores back after 14 days (two weeks): three CP-75 due
    # now at capacity 5 -> weeks 0, 2, 4, late by 14 and 28 days. The CM-90 (no stock
    # configured, unlimited) goes in week 0.
    f = fleet(
        comp("A", days=0, rem=1),
        comp("B", days=0, rem=2),
        comp("C", days=0, rem=3),
        comp("D", days=0, rem=4, model="CM-90"),
    )
    plan = plan_rebuilds(
        f,
        AS_OF,
        horizon_weeks=5,
        capacity_per_week=5,
        exchange_stock={"CP-75": 1},
        turnaround_days=14,
    )
    assert weeks_of(plan) == {
        ("A", "left"): 0,
        ("B", "left"): 2,
        ("C", "left"): 4,
        ("D", "left"): 0,
    }
    assert plan.late.set_index("unit").late_days.to_dict() == {"B": 14, "C": 28}
    assert "no exchange unit of CP-75 free" in plan.late.reason.iloc[0]
    stock = plan.stock.set_index("week")
    assert stock.in_stock_at_start.tolist() == [1, 0, 1, 0, 1]
    assert stock.returned.tolist() == [0, 0, 1, 0, 1]


def test_short_turnaround_core_is_back_next_week_not_same_week():
    f = fleet(comp("A", days=0, rem=1), comp("B", days=0, rem=2))
    plan = plan_rebuilds(
        f,
        AS_OF,
        horizon_weeks=3,
        capacity_per_week=5,
        exchange_stock={"CP-75": 1},
        turnaround_days={"CP-75": 2},
    )
    assert weeks_of(plan) == {("A", "left"): 0, ("B", "left"): 1}


def test_zero_stock_cannot_plan_that_model():
    f = fleet(comp("A", days=3))
    plan = plan_rebuilds(
        f, AS_OF, horizon_weeks=3, capacity_per_week=5, exchange_stock={"CP-75": 0},
        turnaround_days=7,
    )  # fmt: skip
    assert plan.assignments.empty
    assert "no exchange unit of CP-75 free" in plan.unplanned.reason.iloc[0]


# --- pairing ------------------------------------------------------------------------------


def test_pair_within_rule_shares_one_downtime():
    # left has 100 h, right 400 h: 300 h apart <= 500 h -> one downtime, week of left
    # (left due day 10 -> week 1); right (due day 40, week 5) comes along early
    f = fleet(comp("P-1", "left", days=10, rem=100), comp("P-1", "right", days=40, rem=400))
    plan = plan_rebuilds(f, AS_OF, horizon_weeks=8, capacity_per_week=2)
    a = plan.assignments.set_index("position")
    assert a.week.tolist() == [1, 1]
    assert a.downtime.nunique() == 1
    assert a.loc["left", "paired_with"] == "right" and a.loc["right", "paired_with"] == "left"
    assert "one downtime" in a.loc["right", "reason"]
    assert (a.loc["right", "late_days"], a.loc["right", "due_week"]) == (0, 5)


def test_pair_pulls_in_a_partner_due_after_the_horizon():
    f = fleet(comp("P-1", "left", days=3, rem=30), comp("P-1", "right", days=50, rem=500))
    plan = plan_rebuilds(f, AS_OF, horizon_weeks=2, capacity_per_week=2)
    assert weeks_of(plan) == {("P-1", "left"): 0, ("P-1", "right"): 0}
    assert plan.beyond_horizon == 0


def test_no_pair_when_outside_the_window_or_pairing_off():
    # 30 h vs 540 h: 510 h apart > 500 h -> separate
    far = fleet(comp("P-1", "left", days=3, rem=30), comp("P-1", "right", days=54, rem=540))
    plan = plan_rebuilds(far, AS_OF, horizon_weeks=10, capacity_per_week=2)
    assert weeks_of(plan) == {("P-1", "left"): 0, ("P-1", "right"): 7}
    assert set(plan.assignments.paired_with) == {""}
    near = fleet(comp("P-1", "left", days=3, rem=30), comp("P-1", "right", days=5, rem=50))
    off = plan_rebuilds(near, AS_OF, horizon_weeks=10, capacity_per_week=2, pair_within_h=None)
    assert off.assignments.downtime.nunique() == 2
    # exactly on the window edge counts as within
    edge = fleet(comp("P-1", "left", days=3, rem=30), comp("P-1", "right", days=53, rem=530))
    assert (
        plan_rebuilds(edge, AS_OF, horizon_weeks=10, capacity_per_week=2)
        .assignments["downtime"]
        .nunique()
        == 1
    )


def test_pair_takes_two_slots_and_other_units_yield():
    # capacity 2; the pair (due week 1) fills week 1, so X (due week 1, later day) moves to 0
    f = fleet(
        comp("P-1", "left", days=7, rem=70),
        comp("P-1", "right", days=8, rem=80),
        comp("X", days=9, rem=90),
    )
    plan = plan_rebuilds(f, AS_OF, horizon_weeks=3, capacity_per_week=2)
    assert weeks_of(plan) == {("P-1", "left"): 1, ("P-1", "right"): 1, ("X", "left"): 0}


def test_pair_split_when_a_week_holds_only_one_rebuild():
    f = fleet(comp("P-1", "left", days=3, rem=30), comp("P-1", "right", days=4, rem=40))
    plan = plan_rebuilds(f, AS_OF, horizon_weeks=3, capacity_per_week=1)
    assert sorted(weeks_of(plan).values()) == [0, 1]
    assert plan.assignments.reason.str.contains("Not combined").all()


# --- not schedulable, edge cases, errors -----------------------------------------------------


def test_unscheduled_components_are_reported_not_dropped():
    no_util = comp("IDLE", rem=300.0)  # hours left but no utilisation -> no due date
    no_est = comp("NODATA")  # no estimate at all
    plan = plan_rebuilds(fleet(no_util, no_est), AS_OF, horizon_weeks=4, capacity_per_week=2)
    reasons = plan.unscheduled.set_index("unit").reason
    assert "no utilisation" in reasons["IDLE"]
    assert "no remaining-hours estimate" in reasons["NODATA"]
    assert plan.assignments.empty


def test_empty_fleet():
    plan = plan_rebuilds(fleet(), AS_OF, horizon_weeks=3, capacity_per_week=2)
    assert plan.assignments.empty and plan.unplanned.empty and plan.unscheduled.empty
    assert plan.capacity.site.tolist() == [ALL_SITES] * 3
    assert plan.capacity.used.tolist() == [0, 0, 0]
    assert plan.max_late_days == 0
    assert plan_summary(plan)[-1] == ESTIMATE_NOTICE


def test_all_healthy_nothing_due():
    # due dates on/after AS_OF + 4 weeks = day 28 are outside a 4-week horizon
    plan = plan_rebuilds(
        fleet(comp("A", days=28), comp("B", days=400)), AS_OF, horizon_weeks=4, capacity_per_week=2
    )
    assert plan.assignments.empty and plan.unplanned.empty
    assert plan.beyond_horizon == 2
    assert any("after the horizon" in line for line in plan_summary(plan))


def test_zero_capacity_leaves_everything_unplanned_with_reason():
    f = fleet(comp("A", days=0), comp("B", days=10), comp("C", "left", days=20, rem=5))
    plan = plan_rebuilds(f, AS_OF, horizon_weeks=4, capacity_per_week=0)
    assert plan.assignments.empty
    assert sorted(plan.unplanned.unit) == ["A", "B", "C"]
    assert plan.unplanned.reason.str.contains("fleet-wide limit of 0").all()


@pytest.mark.parametrize(
    ("kwargs", "match"),
    [
        ({"capacity_per_week": -1}, "capacity_per_week"),
        ({"horizon_weeks": -2}, "horizon_weeks"),
        ({"horizon_weeks": 0}, "horizon_weeks"),
        ({"capacity_per_week": 1.5}, "capacity_per_week"),
        ({"site_capacity": {"North Pit": -1}}, "site_capacity"),
        ({"exchange_stock": {"CP-75": -3}, "turnaround_days": 7}, "exchange_stock"),
        ({"exchange_stock": {"CP-75": 2}}, "turnaround_days"),
        ({"exchange_stock": {"CP-75": 2}, "turnaround_days": -1}, "turnaround_days"),
        ({"pair_within_h": -5.0}, "pair_within_h"),
    ],
)
def test_bad_settings_name_the_argument(kwargs, match):
    args = {"horizon_weeks": 4, "capacity_per_week": 2} | kwargs
    with pytest.raises(ValueError, match=match):
        plan_rebuilds(fleet(comp("A", days=3)), AS_OF, **args)


def test_bad_status_tables_are_explained():
    with pytest.raises(ValueError, match="missing column.*due_date"):
        plan_rebuilds(fleet().drop(columns="due_date"), AS_OF, horizon_weeks=2, capacity_per_week=1)
    with pytest.raises(ValueError, match="more than one row for unit 'A' position 'left'"):
        plan_rebuilds(
            fleet(comp("A", days=1), comp("A", days=2)), AS_OF, horizon_weeks=2, capacity_per_week=1
        )
    bad = fleet(comp("A", days=1))
    bad["due_date"] = ["next tuesday"]
    with pytest.raises(ValueError, match="due_date"):
        plan_rebuilds(bad, AS_OF, horizon_weeks=2, capacity_per_week=1)
    with pytest.raises(ValueError, match="as_of"):
        plan_rebuilds(fleet(), "2026-03-02", horizon_weeks=2, capacity_per_week=1)


def test_datetime_and_timestamp_inputs_are_accepted():
    f = fleet(comp("A", days=9))
    f["due_date"] = pd.to_datetime(f["due_date"])
    plan = plan_rebuilds(f, datetime(2026, 3, 2, 15, 0), horizon_weeks=3, capacity_per_week=1)
    assert weeks_of(plan) == {("A", "left"): 1}
    assert plan.assignments.due_date.iloc[0] == date(2026, 3, 11)


# --- properties ------------------------------------------------------------------------


def _independent_stock_check(plan, stock, turnaround):
    """Re-simulate exchange stock week by week from the assignments alone."""
    a = plan.assignments
    for model, units in stock.items():
        weeks = a.loc[a.component_model == model, "week"].tolist()
        back = [w + max(1, turnaround // 7) for w in weeks]
        for t in range(plan.settings.horizon_weeks):
            on_shelf = units + sum(b <= t for b in back) - sum(w < t for w in weeks)
            assert weeks.count(t) <= on_shelf, (model, t)


def _check_pairing(plan, pair):
    """Two planned loops of a unit share a downtime exactly when the rule says so."""
    a = plan.assignments
    for _unit, g in a.groupby("unit"):
        if len(g) != 2:
            continue
        within = pair is not None and abs(g.remaining_h.iloc[0] - g.remaining_h.iloc[1]) <= pair
        split = g.reason.str.contains("Not combined").any()
        assert (g.downtime.nunique() == 1) == (within and not split)


@st.composite
def fleets(draw):
    n_units = draw(st.integers(0, 7))
    rows = []
    for u in range(n_units):
        site = draw(st.sampled_from(["North Pit", "Mill Yard"]))
        for pos in draw(st.sampled_from([["left"], ["left", "right"]])):
            kind = draw(st.sampled_from(["dated", "dated", "dated", "no_util", "no_est"]))
            days = draw(st.integers(-4, 60))
            model = draw(st.sampled_from(["CP-75", "CM-90"]))
            row = comp(f"U-{u:02d}", pos, days=days, rem=10.0 * max(days, 0), site=site)
            row["component_model"] = model
            if kind != "dated":
                row.update(due_date=None, utilisation_h_per_day=float("nan"))
                row["remaining_h"] = float("nan") if kind == "no_est" else row["remaining_h"] + 1
            rows.append(row)
    return fleet(*rows)


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(
    f=fleets(),
    horizon=st.integers(1, 6),
    cap=st.integers(0, 4),
    site_cap=st.dictionaries(st.sampled_from(["North Pit", "Mill Yard"]), st.integers(0, 3)),
    stock=st.dictionaries(st.sampled_from(["CP-75", "CM-90"]), st.integers(0, 3)),
    turnaround=st.integers(0, 30),
    pair=st.sampled_from([None, 0.0, 150.0, 500.0]),
)
def test_plan_never_exceeds_capacity_or_stock(f, horizon, cap, site_cap, stock, turnaround, pair):
    plan = plan_rebuilds(
        f,
        AS_OF,
        horizon_weeks=horizon,
        capacity_per_week=cap,
        site_capacity=site_cap,
        exchange_stock=stock,
        turnaround_days=turnaround,
        pair_within_h=pair,
    )
    a = plan.assignments
    assert all(n <= cap for n in Counter(a.week).values())
    for (site, _week), n in Counter(zip(a.site, a.week, strict=True)).items():
        assert n <= site_cap.get(site, math.inf)
    _independent_stock_check(plan, stock, turnaround)
    # every component is in at most one list; every dated one due in the horizon is placed
    keys = [
        list(zip(x.unit, x.position, strict=True)) for x in (a, plan.unplanned, plan.unscheduled)
    ]
    flat = [k for ks in keys for k in ks]
    assert len(flat) == len(set(flat))
    end = AS_OF + timedelta(weeks=horizon)
    due = f[f.due_date.map(lambda d: d is not None and d < end).astype(bool)]
    assert set(zip(due.unit, due.position, strict=True)) <= set(flat)
    # a downtime is one week, and lateness agrees with the week start
    assert (a.groupby("downtime").week.nunique() <= 1).all()
    for row in a.itertuples():
        assert row.week_start == AS_OF + timedelta(weeks=row.week)
        if row.due_date is not None:
            assert row.late_days == max(0, (row.week_start - row.due_date).days)
    assert not a.reason.str.len().eq(0).any()
    _check_pairing(plan, pair)
    fleet_rows = plan.capacity[plan.capacity.site == ALL_SITES].set_index("week").used
    assert fleet_rows.to_dict() == {w: Counter(a.week).get(w, 0) for w in range(horizon)}


def _brute_force_max_late(due_days, horizon, cap):
    """Smallest achievable largest lateness [d] over all capacity-feasible assignments."""
    best = math.inf
    for weeks in itertools.product(range(horizon), repeat=len(due_days)):
        if max(Counter(weeks).values(), default=0) > cap:
            continue
        worst = max((max(0, 7 * w - d) for w, d in zip(weeks, due_days, strict=True)), default=0)
        best = min(best, worst)
    return best


@settings(max_examples=120, deadline=None)
@given(
    data=st.data(),
    horizon=st.integers(1, 4),
    cap=st.integers(1, 2),
)
def test_largest_lateness_matches_brute_force(data, horizon, cap):
    # Jackson (1955), EDD rule: with unit jobs and uniform capacity EDD is optimal for Lmax,
    # so the plan's largest lateness must equal the exhaustive minimum.
    n = data.draw(st.integers(0, min(6, cap * horizon)))
    due_days = data.draw(st.lists(st.integers(-3, 7 * horizon - 1), min_size=n, max_size=n))
    rems = data.draw(st.lists(st.sampled_from([5.0, 50.0, 500.0]), min_size=n, max_size=n))
    pairs = enumerate(zip(due_days, rems, strict=True))
    rows = [comp(f"T-{i}", days=d, rem=r) for i, (d, r) in pairs]
    plan = plan_rebuilds(
        fleet(*rows), AS_OF, horizon_weeks=horizon, capacity_per_week=cap, pair_within_h=None
    )
    assert plan.unplanned.empty and len(plan.assignments) == n
    assert plan.max_late_days == _brute_force_max_late(due_days, horizon, cap)


def test_larger_fleet_every_component_accounted_for():
    # Not a timing test (speed belongs in a benchmark script): 400 components, every
    # one is planned, unplanned or after the horizon.
    rng = np.random.default_rng(7)
    rows = [
        comp(f"F-{u:03d}", pos, days=int(rng.integers(-2, 90)))
        for u in range(200)
        for pos in ("left", "right")
    ]
    plan = plan_rebuilds(fleet(*rows), AS_OF, horizon_weeks=12, capacity_per_week=10)
    total = len(plan.assignments) + len(plan.unplanned) + plan.beyond_horizon
    assert total == 400


def test_split_pair_leaves_a_partner_due_after_the_horizon_unplanned():
    # capacity 1 cannot hold the pair; the partner is due after the 1-week horizon, so
    # only the due loop is planned and the partner is counted after the horizon
    f = fleet(comp("P-1", "left", days=0, rem=0), comp("P-1", "right", days=10, rem=100))
    plan = plan_rebuilds(f, AS_OF, horizon_weeks=1, capacity_per_week=1)
    assert weeks_of(plan) == {("P-1", "left"): 0}
    assert plan.beyond_horizon == 1 and plan.unplanned.empty


def test_every_public_name_is_still_importable_from_planning():
    # the split keeps monitor.planning the one import for callers (exports, CLI, dashboard)
    import monitor.planning as planning
    import monitor.planning.report as report
    import monitor.planning.types as types

    names = [n for n in dir(types) if n.isupper() and not n.startswith("_")]
    names += ["Plan", "PlanSettings", "plan_summary", "make_settings", "plan_rebuilds"]
    missing = [n for n in names if not hasattr(planning, n)]
    assert not missing, f"monitor.planning no longer exports {missing}"
    assert set(planning.__all__) <= set(dir(planning))
    assert planning.Plan is types.Plan and planning.plan_summary is report.plan_summary


def test_weeks_are_calendar_weeks_from_monday_when_the_as_of_is_midweek():
    # as-of Thursday 2026-12-31 (ISO 2026-W53); due Tuesday 2027-01-05 -> ISO 2027-W01,
    # week 1, which starts on Monday 2027-01-04 (ISO 8601 calendar, hand-checked)
    as_of = date(2026, 12, 31)
    f = fleet(comp("Y-1", days=None))
    f.loc[0, "due_date"] = date(2027, 1, 5)
    plan = plan_rebuilds(f, as_of, horizon_weeks=4, capacity_per_week=1)
    row = plan.assignments.iloc[0]
    assert (row.week, row.week_start, row.late_days) == (1, date(2027, 1, 4), 0)
    assert plan.settings.week_label(0) == "2026-W53 (Mon 2026-12-28)"
    assert plan.settings.week_label(1) == "2027-W01 (Mon 2027-01-04)"
