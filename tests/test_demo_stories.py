"""The demo's stories, read through drivespan's own outputs.

The shared demo fleet of the test run (``full_demo`` in tests/conftest.py: the whole fleet
built by :func:`monitor.usecases.demo.build_demo` — generate, create a SQLite store,
import the registry, ingest every export — on a fixed end date) is read only through
what a planner would see: ``usecases.fleet_status`` at the demo's as-of date and
``service_plan.make_plan``. The stories are placed relative to the end date, so they
read the same on any end date.
"""

from __future__ import annotations

from datetime import timedelta

import pandas as pd
import pytest

from demo_fleet.scenario import DUE_ROLES
from monitor import usecases
from monitor.store import db, queries
from monitor.usecases import plan as service_plan
from tests.conftest import GOLDEN_END

BANDS = ("act now", "due soon", "plan ahead", "healthy")


def _band(remaining_h: float) -> str:
    """Status band of a remaining life [h] with the default limits 0 / 250 / 1000 h."""
    if remaining_h <= 0:
        return "act now"
    return "due soon" if remaining_h <= 250 else "plan ahead" if remaining_h <= 1000 else "healthy"


@pytest.fixture(scope="module")
def demo(full_demo):
    return full_demo


@pytest.fixture(scope="module")
def engine(demo):
    eng = db.make_engine(demo.db_url)
    yield eng
    eng.dispose()


@pytest.fixture(scope="module")
def status(demo, engine) -> pd.DataFrame:
    return usecases.fleet_status(engine, demo.as_of)


@pytest.fixture(scope="module")
def plan(demo, engine):
    return service_plan.make_plan(engine, demo.as_of)


def _rows(status: pd.DataFrame, tag: str) -> pd.DataFrame:
    rows = status[status["unit"] == tag]
    assert not rows.empty, f"{tag} missing from the fleet status"
    return rows


def test_as_of_is_the_day_after_the_end_date(demo):
    assert demo.as_of == GOLDEN_END + timedelta(days=1)


BROKEN = "broken_export.csv"


def _messages(result: usecases.FileResult) -> list[str]:
    return [p.message.lower() for p in result.problems]


def test_every_generated_file_except_the_broken_one_is_accepted(demo, engine):
    good = [r for r in demo.results if r.name != BROKEN]
    assert len(good) > 10
    refused = [r.summary for r in good if r.status != usecases.ACCEPTED or r.problems]
    assert refused == []
    assert good[0].kind == "registry"
    with engine.connect() as conn:
        counts = queries.table_counts(conn)
    assert counts["histogram"] == sum(r.histograms for r in good) > 0
    assert counts["reading"] == sum(r.readings for r in good) > 0


def test_broken_export_is_rejected_and_stores_nothing(demo, engine):
    for result in (r for r in demo.results if r.name == BROKEN):  # when the demo shows it
        assert result.status == usecases.REJECTED and result.histograms == 0
    broken = demo.folder / "exports" / BROKEN
    with engine.connect() as conn:
        before = queries.table_counts(conn)
    result = usecases.upload(engine, broken.read_bytes(), broken.name)
    with engine.connect() as conn:
        after = queries.table_counts(conn)
    assert result.status == usecases.REJECTED
    assert any("overlap" in m for m in _messages(result)), _messages(result)
    assert any("hour meter" in m for m in _messages(result)), _messages(result)
    assert after == before


def test_stalling_loader_has_heavy_relief_and_most_relief_heat(demo, status):
    tag = demo.stories["stalling_loader"]
    rows = _rows(status, tag)
    assert all("heavy_relief" in flags for flags in rows["flags"])
    heat = status.groupby("unit")["relief_heat_kwh"].sum()
    assert heat.idxmax() == tag
    assert heat[tag] > 2 * heat.drop(tag).max()


def test_near_end_conveyor_is_near_the_top_on_bearing_life(demo, status):
    tag = demo.stories["near_end_conveyor"]
    ranked = status.sort_values("remaining_bearing_h", kind="stable").reset_index(drop=True)
    top = ranked.head(3)
    hit = top[(top["unit"] == tag) & (top["position"] == "pump")]
    assert len(hit) == 1, ranked[["unit", "position", "remaining_bearing_h"]].head(5)
    row = hit.iloc[0]
    assert row["limiting"] == "bearing"
    assert 0.85 < row["consumed_fraction"] < 1.0
    assert row["status"] in ("due soon", "plan ahead")


def test_contaminated_unit_is_limited_by_wear(demo, status):
    rows = _rows(status, demo.stories["contaminated"])
    assert (rows["limiting"] == "wear").all()
    assert (rows["remaining_wear_h"] < 0.25 * rows["remaining_bearing_h"]).all()


def test_silent_unit_is_flagged_stale_and_no_other(demo, status):
    tag = demo.stories["silent"]
    stale = status[status["flags"].map(lambda f: "stale" in f)]
    assert set(stale["unit"]) == {tag}
    assert (_rows(status, tag)["data_age_days"] > 14).all()


def test_recently_rebuilt_unit_is_healthy(demo, status):
    tag, position = demo.stories["rebuilt_recently"]
    row = _rows(status, tag).set_index("position").loc[position]
    assert row["status"] == "healthy"
    assert row["consumed_fraction"] < 0.1


def test_due_roles_land_in_their_status_bands(status):
    """Each component the shop let run on stands where the scenario put it."""
    kept = set(status["unit"])
    checked = 0
    for tag, roles in DUE_ROLES.items():
        if tag not in kept:
            continue
        rows = _rows(status, tag).set_index("position")
        for role in roles:
            row = rows.loc[role.position]
            assert row["limiting"] == role.mode, (tag, role)
            assert row["status"] == _band(role.remaining_h), (tag, role, row["remaining_h"])
            checked += 1
    assert checked >= 8


def test_there_is_something_to_plan_on_every_site(status):
    urgent = status[status["status"] != "healthy"]
    assert set(urgent["site"]) == set(status["site"])
    assert (status["status"] == "act now").sum() >= 1
    assert (status["status"] == "due soon").sum() >= 2


def test_plan_takes_every_component_due_within_the_horizon(plan, status, demo):
    end = plan.settings.horizon_end
    due = status[
        (status["remaining_h"] <= 0)
        | status["due_date"].map(lambda d: d is not None and not pd.isna(d) and d < end)
    ]
    assert len(due) >= 4
    keys = {tuple(k) for k in due[["unit", "position"]].to_numpy()}
    planned = {tuple(k) for k in plan.assignments[["unit", "position"]].to_numpy()}
    unplanned = {tuple(k) for k in plan.unplanned[["unit", "position"]].to_numpy()}
    late = {tuple(k) for k in plan.late[["unit", "position"]].to_numpy()}
    assert keys <= planned | unplanned  # none silently dropped
    assert late <= planned
    assert plan.settings.as_of == demo.as_of


def test_plan_never_exceeds_the_weekly_capacity(plan):
    per_week = plan.assignments.groupby("week").size()
    assert (per_week <= plan.settings.capacity_per_week).all()
    fleet = plan.capacity[plan.capacity["site"] == "(all sites)"]
    assert (fleet["used"] <= fleet["capacity"]).all()
    assert fleet.set_index("week")["used"].reindex(per_week.index).tolist() == per_week.tolist()


def test_plan_pairs_both_loops_of_one_machine(plan):
    shared = plan.assignments.groupby("downtime").agg(
        units=("unit", "nunique"), parts=("position", "size"), weeks=("week", "nunique")
    )
    pairs = shared[shared["parts"] >= 2]
    assert len(pairs) >= 1
    assert (pairs["units"] == 1).all() and (pairs["weeks"] == 1).all()
