"""Tests of monitor.lifecycle: remaining life, utilisation, due dates, status bands."""

import math
from datetime import UTC, date, datetime, timedelta

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from monitor.models import lifecycle as lc
from tests import reference_life as ref


def test_rate_window_takes_most_recent_uploads():
    # Hand-computed: uploads (D, t) oldest first; the last three hold 200+200+200 = 600 h
    # >= 500 h, so the rate is (0.03 + 0.02 + 0.01) / 600 h.
    d = np.array([0.5, 0.04, 0.03, 0.02, 0.01])
    h = np.array([1000.0, 200.0, 200.0, 200.0, 200.0])
    rate, used = ref.damage_rate_per_h(d, h)
    assert used == 600.0
    assert rate == pytest.approx(0.06 / 600.0)
    # window exactly met by the last two uploads (400 h)
    rate, used = ref.damage_rate_per_h(d, h, rate_window_h=400.0)
    assert used == 400.0 and rate == pytest.approx(0.03 / 400.0)
    # fewer hours than the window: all uploads since rebuild
    rate, used = ref.damage_rate_per_h(d[1:], h[1:], rate_window_h=5000.0)
    assert used == 800.0 and rate == pytest.approx(0.10 / 800.0)


def test_bearing_life_remaining_hours():
    # consumed 0.6, rate 0.06/600 = 1e-4 per h -> remaining (1 - 0.6) / 1e-4 = 4000 h
    d = np.array([0.54, 0.03, 0.02, 0.01])
    h = np.array([1000.0, 200.0, 200.0, 200.0])
    life = ref.bearing_life(d, h)
    assert life.consumed == pytest.approx(0.6)
    assert life.rate_per_h == pytest.approx(1e-4)
    assert life.remaining_h == pytest.approx(4000.0)
    # planning at 99 % reliability: a1 = 0.25 (ISO 281 table, 2 s.f.) -> life / a1
    strict = ref.bearing_life(d, h, life_factor=0.25)
    assert strict.consumed == pytest.approx(2.4) and strict.remaining_h == 0.0


def test_bearing_life_edges():
    empty = ref.bearing_life([], [])
    assert empty.consumed == 0.0 and math.isnan(empty.remaining_h)  # no operation
    idle = ref.bearing_life([0.2, 0.0], [100.0, 0.0], rate_window_h=50.0)
    assert idle.rate_per_h == pytest.approx(0.002)  # the 0-h upload adds no hours
    no_load = ref.bearing_life([0.0, 0.0], [100.0, 100.0])
    assert math.isinf(no_load.remaining_h)  # load below damage: no end in sight
    np.testing.assert_array_equal(
        lc.remaining_bearing_h([0.5, 1.2, 0.5], [1e-3, 1e-3, np.nan]), [500.0, 0.0, np.nan]
    )
    with pytest.raises(ValueError, match="damage and hours must have equal length"):
        ref.bearing_life([0.1], [1.0, 2.0])
    with pytest.raises(ValueError, match="hours must be finite operating hours"):
        ref.bearing_life([0.1], [-1.0])
    with pytest.raises(ValueError, match="rate_window_h must be > 0"):
        ref.damage_rate_per_h([0.1], [1.0], rate_window_h=0.0)


@given(
    st.lists(st.tuples(st.floats(0, 0.1), st.floats(0, 300)), min_size=1, max_size=30),
    st.tuples(st.floats(0, 1.0), st.floats(0, 3000)),
)
def test_rate_ignores_uploads_before_the_window(rows, older):
    d, h = np.array(rows).T
    rate, used = ref.damage_rate_per_h(d, h)
    assert used >= min(500.0, h.sum()) - 1e-9
    rate2, used2 = ref.damage_rate_per_h(np.r_[older[0], d], np.r_[older[1], h])
    if h.sum() >= 500.0:  # the recent uploads already fill the window
        assert (rate2, used2) == (rate, used)
    elif h.sum() > 0:  # otherwise all uploads count: total damage over total hours
        assert rate2 == pytest.approx((d.sum() + older[0]) / (h.sum() + older[1]))


def _end(days_before: float) -> datetime:
    return datetime(2026, 5, 1, tzinfo=UTC) - timedelta(days=days_before)


def test_utilisation_window():
    # as-of 2026-05-01: uploads that ended after 2026-04-01 00:00 up to and including
    # 05-01 00:00 count ("data up to its start count", design brief)
    ends = [_end(31), _end(30), _end(10), _end(0.001), _end(0), _end(-1)]
    hours = np.array([100.0, 30.0, 60.0, 90.0, 45.0, 500.0])
    u = ref.utilisation_h_per_day(ends, hours, date(2026, 5, 1))
    assert u == pytest.approx((60.0 + 90.0 + 45.0) / 30.0)  # hand-computed: 6.5 h/day
    assert ref.utilisation_h_per_day([], [], date(2026, 5, 1)) == 0.0
    with pytest.raises(ValueError, match="timezone-aware"):
        ref.utilisation_h_per_day([datetime(2026, 4, 20)], [1.0], date(2026, 5, 1))
    with pytest.raises(ValueError, match="as_of must be a datetime.date"):
        ref.utilisation_h_per_day(ends, hours, datetime(2026, 5, 1, tzinfo=UTC))


def test_due_date():
    # 1000 h at 6 h/day -> floor(166.7) = 166 days after 2026-05-01 = 2026-10-14
    assert lc.due_date(date(2026, 5, 1), 1000.0, 6.0) == date(2026, 10, 14)
    assert lc.due_date(date(2026, 5, 1), 0.0, 6.0) == date(2026, 5, 1)
    assert lc.due_date(date(2026, 5, 1), 1000.0, 0.0) is None  # no utilisation
    assert lc.due_date(date(2026, 5, 1), math.nan, 6.0) is None
    assert lc.due_date(date(2026, 5, 1), math.inf, 6.0) is None
    assert lc.due_date(date(2026, 5, 1), 1e12, 1e-3) is None  # past the calendar


def test_limiting_mode():
    assert lc.limiting_mode(300.0, 800.0) == (300.0, "bearing")
    assert lc.limiting_mode(900.0, 800.0) == (800.0, "wear")
    assert lc.limiting_mode(math.nan, 800.0) == (800.0, "wear")
    rem, mode = lc.limiting_mode(math.nan, math.nan)
    assert math.isnan(rem) and mode is None


def test_status_bands():
    assert lc.STATUS_BANDS == ("act now", "due soon", "plan ahead", "healthy")
    r = np.array([-5.0, 0.0, 0.1, 250.0, 250.1, 1000.0, 1000.1, np.inf, np.nan])
    got = lc.status_band(r).tolist()
    assert got == [
        "act now",
        "act now",
        "due soon",
        "due soon",
        "plan ahead",
        "plan ahead",
        "healthy",
        "healthy",
        lc.NO_ESTIMATE,
    ]
    assert lc.status_band(120.0) == "due soon"
    assert lc.status_band(120.0, overdue_h=0, due_h=100, plan_h=200) == "plan ahead"
    with pytest.raises(ValueError, match="status limits must be ascending"):
        lc.status_band(1.0, due_h=2000.0)
