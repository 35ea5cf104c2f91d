"""Tests of monitor.relief: hours at relief / cut-off and relief heat."""

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st
from hypothesis.extra import numpy as hnp

from monitor.models import relief

LO = np.array([0.0, 100.0, 200.0, 300.0, 400.0, 420.0])
HI = np.array([100.0, 200.0, 300.0, 400.0, 420.0, 440.0])  # midpoints 50..410, 430
MODEL = dict(displacement_cm3=100.0, relief_bar=430.0, low_side_bar=30.0)


def test_relief_heat_reference():
    # REFERENCES §5: 100 L/min across 400 bar -> 66.667 kW. Vg 100 cm3 at 1000 rpm gives
    # Q_stall = 100 L/min; a band at 430 bar over a 30-bar low side has dp = 400 bar.
    h = np.array([0, 0, 0, 0, 0, 1.5])
    s = relief.relief_summary(LO, HI, h, speed_rpm=1000.0, **MODEL)
    assert s.relief_hours[0] == pytest.approx(1.5)
    assert s.relief_heat_kwh[0] == pytest.approx(1.5 * 66.667, rel=1e-5)
    assert s.cutoff_hours[0] == 0.0


def test_threshold_95_percent_and_band_choice():
    # 0.95 * 430 = 408.5 bar: the 400-420 band (midpoint 410) counts, 300-400 does not
    h = np.array([1.0, 1.0, 1.0, 1.0, 2.0, 3.0])
    got = relief.hours_at_or_above_h(LO, HI, h, setting_bar=430.0)
    assert got[0] == pytest.approx(5.0)
    # a band exactly at 95 %: midpoint 408.5 counts ("at or above")
    assert relief.hours_at_or_above_h([407.0], [410.0], [2.0], setting_bar=430.0)[0] == 2.0
    # setting 410 bar: 0.95 * 410 = 389.5 bar. Upper edges 400, 420, 440 reach it (1+2+3 h);
    # midpoints 350 does not, 410 and 430 do (2+3 h).
    up = relief.hours_at_or_above_h(LO, HI, h, setting_bar=410.0, band_pressure="upper")
    assert up[0] == pytest.approx(6.0)
    assert relief.hours_at_or_above_h(LO, HI, h, setting_bar=410.0)[0] == pytest.approx(5.0)


def test_cutoff_reports_hours_and_no_heat():
    h = np.array([[0, 0, 0, 2.0, 1.0, 0.5]])
    s = relief.relief_summary(LO, HI, h, speed_rpm=[1800.0], cutoff_bar=400.0, **MODEL)
    assert s.cutoff_hours[0] == pytest.approx(1.5)  # 0.95 * 400 = 380: bands 410 and 430
    assert s.relief_hours[0] == pytest.approx(1.5)
    assert s.relief_heat_kwh[0] == 0.0


def test_per_band_speed_and_padding():
    h = np.array([[0, 0, 0, 0, 1.0, 1.0], [0, 0, 0, 0, 0, 0]])
    lo = np.where(h > 0, LO, np.nan)
    speed = np.array([[0, 0, 0, 0, 1000.0, 2000.0], [np.nan] * 6])
    s = relief.relief_summary(lo, np.where(h > 0, HI, np.nan), h, speed_rpm=speed, **MODEL)
    # hand-computed, Q dp / 600: 100 L/min x 380 bar + 200 L/min x 400 bar
    assert s.relief_heat_kwh[0] == pytest.approx((100 * 380 + 200 * 400) / 600.0)
    assert s.relief_heat_kwh[1] == 0.0 and s.relief_hours[1] == 0.0


def test_errors():
    with pytest.raises(ValueError, match="setting_bar must be a pressure setting > 0"):
        relief.hours_at_or_above_h(LO, HI, np.ones(6), setting_bar=0.0)
    with pytest.raises(ValueError, match="band_pressure must be one of"):
        relief.hours_at_or_above_h(LO, HI, np.ones(6), setting_bar=400.0, band_pressure="x")
    with pytest.raises(ValueError, match="hours must be finite and >= 0"):
        relief.hours_at_or_above_h(LO, HI, -np.ones(6), setting_bar=400.0)
    with pytest.raises(ValueError, match="speed_rpm must be a speed >= 0"):
        relief.relief_summary(LO, HI, np.ones(6), speed_rpm=np.nan, **MODEL)
    with pytest.raises(ValueError, match="displacement_cm3 must be > 0"):
        relief.relief_heat_kwh(
            LO, HI, np.ones(6), speed_rpm=1000.0, displacement_cm3=0.0, relief_bar=430.0
        )


@given(hnp.arrays(float, (4, 6), elements=st.floats(0.0, 50.0)), st.floats(500.0, 3000.0))
def test_vector_equals_scalar_and_additive(h, n):
    batch = relief.relief_summary(LO, HI, h, speed_rpm=n, **MODEL)
    for i in range(4):
        one = relief.relief_summary(LO, HI, h[i], speed_rpm=n, **MODEL)
        assert one.relief_heat_kwh[0] == pytest.approx(batch.relief_heat_kwh[i], rel=1e-12)
    whole = relief.relief_summary(LO, HI, h.sum(0), speed_rpm=n, **MODEL)
    assert whole.relief_heat_kwh[0] == pytest.approx(batch.relief_heat_kwh.sum(), rel=1e-9)
    assert whole.relief_hours[0] == pytest.approx(batch.relief_hours.sum(), rel=1e-9)
