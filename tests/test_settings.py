"""Stored settings on a real SQLite file: status settings (monitor.service) and the
rebuild plan's shop settings (monitor.usecases.plan).

Ranges checked: the reliability must lie in 90-99.95 % because ISO 281:2007 gives the
life-modification factor a1 only in that range (the a1 table, Table 12 from memory; see
docs/life-model.md section 2). The order overdue < due < plan of the status band
limits, at least three wear readings for a trend, positive windows, non-negative
capacities and stock, and a turnaround for every stocked model are the service's own
rules (common practice, no source).

Defects these tests found (settings of the wrong type, an unbounded horizon, pairing
that could not be turned off for one plan) are fixed; their tests stay as regression
checks.
"""

from __future__ import annotations

import copy
from datetime import date
from pathlib import Path

import pytest

from monitor import usecases
from monitor.planning import ALL_SITES
from monitor.store import db, queries
from monitor.usecases import plan as sp

DATA = Path(__file__).parent / "data"
AS_OF = date(2026, 3, 2)  # invented as-of date (a Monday)
QUARRY, SAWMILL = "Larkspur Ridge Quarry", "Tamsin Vale Sawmill"  # sites of tests/data/fleet.yaml


@pytest.fixture
def engine(sqlite_url):
    eng = usecases.init_db(sqlite_url)
    usecases.import_registry(eng, (DATA / "fleet.yaml").read_bytes(), "fleet.yaml")
    yield eng
    eng.dispose()


def stored(engine) -> dict:
    """The raw settings rows, bypassing the defaults overlay."""
    with engine.connect() as conn:
        return queries.get_settings(conn)


# --- status settings ---------------------------------------------------------------------


def test_status_defaults_when_nothing_is_stored(engine):
    assert stored(engine) == {}
    got = usecases.get_settings(engine)
    assert got == usecases.DEFAULT_SETTINGS
    assert got["reliability_pct"] == 90.0  # ISO 281 reference reliability (a1 = 1)
    got["status_limits"]["due_h"] = -1.0  # the caller's copy, not the defaults
    assert usecases.get_settings(engine)["status_limits"]["due_h"] == 250.0


def test_saved_status_value_is_returned_and_survives_a_new_engine(engine, sqlite_url):
    now = usecases.save_settings(engine, {"reliability_pct": 95.0, "rate_window_h": 800.0})
    assert now["reliability_pct"] == 95.0 and now["rate_window_h"] == 800.0
    assert now["stale_days"] == usecases.DEFAULT_SETTINGS["stale_days"]
    engine.dispose()
    fresh = db.make_engine(sqlite_url)
    try:
        again = usecases.get_settings(fresh)
    finally:
        fresh.dispose()
    assert again == now


def test_a_partial_band_update_keeps_the_other_limits(engine):
    now = usecases.save_settings(engine, {"status_limits": {"due_h": 400.0}})
    assert now["status_limits"] == {"overdue_h": 0.0, "due_h": 400.0, "plan_h": 1000.0}
    assert stored(engine)["status_limits"] == now["status_limits"]


@pytest.mark.parametrize("pct", [90.0, 99.95])  # ISO 281:2007 Table 12 end points
def test_reliability_range_end_points_are_accepted(engine, pct):
    assert usecases.save_settings(engine, {"reliability_pct": pct})["reliability_pct"] == pct


@pytest.mark.parametrize(
    ("values", "field"),
    [
        ({"reliability_pct": 89.99}, "reliability_pct"),  # below ISO 281 Table 12
        ({"reliability_pct": 99.96}, "reliability_pct"),  # above ISO 281 Table 12
        ({"reliability_pct": float("nan")}, "reliability_pct"),
        ({"reliability_pct": "high"}, "reliability_pct"),
        ({"status_limits": {"due_h": 2000.0}}, "status_limits"),  # due above plan
        ({"status_limits": {"overdue_h": 250.0}}, "status_limits"),  # equal limits
        ({"status_limits": {"plan_h": "soon"}}, "status_limits"),
        ({"rate_window_h": 0}, "rate_window_h"),
        ({"rate_window_h": -100.0}, "rate_window_h"),
        ({"utilisation_days": 0}, "utilisation_days"),
        ({"stale_days": None}, "stale_days"),
        ({"min_wear_readings": 2}, "min_wear_readings"),
        ({"min_wear_readings": 3.5}, "min_wear_readings"),
        ({"case_drain_step_factor": 1.0}, "case_drain_step_factor"),
        ({"heavy_relief_fraction": 1.0}, "heavy_relief_fraction"),
        ({"reliabilty_pct": 95.0}, "reliabilty_pct"),  # misspelt: unknown key
        ({"case_drain_step_min_before": 2}, "case_drain_step_min_before"),
        ({"case_drain_step_min_before": 4.5}, "case_drain_step_min_before"),
        ({"case_drain_temp_distance_k": 0}, "case_drain_temp_distance_k"),
        ({"case_drain_temp_distance_k": "far"}, "case_drain_temp_distance_k"),
        ({"case_drain_dp_ratio_min": 1.5}, "case_drain_dp_ratio_min"),  # must hold 1
        ({"case_drain_dp_ratio_max": 0.8}, "case_drain_dp_ratio_max"),
        ({"case_drain_dp_ratio_min": -0.5}, "case_drain_dp_ratio_min"),
    ],
)
def test_invalid_status_setting_names_the_field_and_changes_nothing(engine, values, field):
    usecases.save_settings(engine, {"reliability_pct": 95.0})
    before_raw, before = stored(engine), usecases.get_settings(engine)
    with pytest.raises(usecases.DomainError, match=field):
        usecases.save_settings(engine, values)
    assert stored(engine) == before_raw
    assert usecases.get_settings(engine) == before


def test_wear_reference_settings_reach_the_status_params(engine):
    # defaults: 20 K, 0.5-2 (common practice, no source), step after 4 readings
    now = usecases.save_settings(
        engine, {"case_drain_temp_distance_k": 30, "case_drain_dp_ratio_max": 3.0}
    )
    assert now["case_drain_temp_distance_k"] == 30.0 and now["case_drain_dp_ratio_max"] == 3.0
    assert now["case_drain_dp_ratio_min"] == 0.5 and now["case_drain_step_min_before"] == 4
    from monitor.usecases.settings import _params_for

    p = _params_for(engine, None, None)
    assert (p.case_drain_temp_distance_k, p.case_drain_dp_ratio_max) == (30.0, 3.0)
    assert p.case_drain_step_min_before == 4 and p.case_drain_dp_ratio_min == 0.5


def test_the_error_says_what_is_expected(engine):
    with pytest.raises(usecases.DomainError, match=r"between 90 and 99\.95 %"):
        usecases.save_settings(engine, {"reliability_pct": 80.0})
    with pytest.raises(usecases.DomainError, match="known are .*reliability_pct"):
        usecases.save_settings(engine, {"colour": "red"})


def test_band_limits_that_are_not_a_mapping_give_a_domain_error(engine):
    with pytest.raises(usecases.DomainError, match="status_limits"):
        usecases.save_settings(engine, {"status_limits": 5})


def test_a_yes_no_value_is_not_a_number_of_days(engine):
    with pytest.raises(usecases.DomainError, match="stale_days"):
        usecases.save_settings(engine, {"stale_days": True})


# --- plan settings ---------------------------------------------------------------------------


def test_plan_defaults_when_nothing_is_stored(engine):
    assert stored(engine) == {}
    got = sp.get_plan_settings(engine)
    assert got == sp.DEFAULT_PLAN_SETTINGS
    got["site_capacity"]["anywhere"] = 9  # the caller's copy, not the defaults
    assert sp.get_plan_settings(engine)["site_capacity"] == {}


def test_saved_plan_settings_are_returned_and_survive_a_new_engine(engine, sqlite_url):
    values = {
        "capacity_per_week": 2,
        "site_capacity": {QUARRY: 1},
        "exchange_stock": {"HX-90": 1, "HX-55": 0},
        "turnaround_days": {"HX-90": 28.0, "HX-55": 10.0},
        "pair_within_h": None,
    }
    now = sp.save_plan_settings(engine, values)
    assert now == {**sp.DEFAULT_PLAN_SETTINGS, **values}
    engine.dispose()
    fresh = usecases.init_db(sqlite_url)  # reopening runs the (no-op) upgrade too
    try:
        assert sp.get_plan_settings(fresh) == now
        plan = sp.make_plan(fresh, AS_OF)
    finally:
        fresh.dispose()
    # the stored settings drive the plan: 12 default weeks, per-site limit, stock rows
    s = plan.settings
    assert (s.capacity_per_week, dict(s.site_capacity)) == (2, {QUARRY: 1})
    assert s.pair_within_h is None and dict(s.turnaround_days) == values["turnaround_days"]
    quarry = plan.capacity[plan.capacity["site"] == QUARRY]
    assert len(quarry) == 12 and set(quarry["capacity"]) == {1}
    assert sorted(plan.stock["component_model"].unique()) == ["HX-55", "HX-90"]


@pytest.mark.parametrize(
    ("values", "field"),
    [
        ({"capacity_per_week": -1}, "capacity_per_week"),
        ({"capacity_per_week": 2.5}, "capacity_per_week"),
        ({"horizon_weeks": 0}, "horizon_weeks"),
        ({"site_capacity": {QUARRY: -1}}, "site_capacity"),
        ({"exchange_stock": {"HX-90": -2}}, "exchange_stock"),
        ({"exchange_stock": {"HX-90": 2}, "turnaround_days": None}, "turnaround_days"),
        ({"exchange_stock": {"HX-90": 2}, "turnaround_days": {"HX-55": 7}}, "turnaround_days"),
        ({"exchange_stock": {"HX-90": 2}, "turnaround_days": -3.0}, "turnaround_days"),
        ({"pair_within_h": -1.0}, "pair_within_h"),
        ({"pair_within_h": "close"}, "pair_within_h"),
        ({"capacity": 4}, "capacity"),  # unknown key
    ],
)
def test_invalid_plan_setting_names_the_field_and_changes_nothing(engine, values, field):
    sp.save_plan_settings(engine, {"capacity_per_week": 4})
    before_raw, before = stored(engine), sp.get_plan_settings(engine)
    with pytest.raises(usecases.DomainError, match=field):
        sp.save_plan_settings(engine, values)
    assert stored(engine) == before_raw
    assert sp.get_plan_settings(engine) == before


def test_stock_that_is_not_a_mapping_gives_a_domain_error(engine):
    with pytest.raises(usecases.DomainError, match="exchange_stock"):
        sp.save_plan_settings(engine, {"exchange_stock": [1, 2]})


def test_an_absurd_horizon_is_refused_when_saved(engine):
    with pytest.raises(usecases.DomainError, match="horizon_weeks"):
        sp.save_plan_settings(engine, {"horizon_weeks": 10**9})


# --- per-call overrides -------------------------------------------------------------------------


def test_plan_overrides_apply_to_one_plan_only(engine):
    sp.save_plan_settings(engine, {"capacity_per_week": 4, "site_capacity": {SAWMILL: 1}})
    usecases.save_settings(engine, {"reliability_pct": 95.0})
    before_raw = copy.deepcopy(stored(engine))
    plan = sp.make_plan(
        engine,
        AS_OF,
        reliability_pct=99.0,
        horizon_weeks=3,
        capacity_per_week=1,
        site_capacity={QUARRY: 0},
    )
    assert plan.settings.horizon_weeks == 3 and plan.settings.capacity_per_week == 1
    fleet_rows = plan.capacity[plan.capacity["site"] == ALL_SITES]
    assert list(fleet_rows["week"]) == [0, 1, 2] and set(fleet_rows["capacity"]) == {1}
    assert set(plan.capacity.loc[plan.capacity["site"] == QUARRY, "capacity"]) == {0}
    assert stored(engine) == before_raw
    assert sp.get_plan_settings(engine)["capacity_per_week"] == 4
    assert usecases.get_settings(engine)["reliability_pct"] == 95.0
    # the next plan without overrides is back on the stored settings
    again = sp.make_plan(engine, AS_OF)
    assert again.settings.capacity_per_week == 4 and dict(again.settings.site_capacity) == {
        SAWMILL: 1
    }


@pytest.mark.parametrize(
    ("kwargs", "field"),
    [
        ({"capacity_per_week": -1}, "capacity_per_week"),
        ({"horizon_weeks": 0}, "horizon_weeks"),
        ({"reliability_pct": 80.0}, "reliability_pct"),
        ({"exchange_stock": {"HX-90": 1}, "turnaround_days": {"HX-55": 5}}, "turnaround_days"),
        ({"shifts": 2}, "shifts"),
    ],
)
def test_a_bad_override_is_refused_and_stores_nothing(engine, kwargs, field):
    sp.save_plan_settings(engine, {"capacity_per_week": 4})
    before_raw = stored(engine)
    with pytest.raises(usecases.DomainError, match=field):
        sp.make_plan(engine, AS_OF, **kwargs)
    assert stored(engine) == before_raw


def test_pairing_can_be_turned_off_for_one_plan(engine):
    plan = sp.make_plan(engine, AS_OF, pair_within_h=None)
    assert plan.settings.pair_within_h is None
