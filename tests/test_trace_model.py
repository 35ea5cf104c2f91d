"""Tests of monitor.models.trace: loop sides, sample durations, time at pressure, envelope."""

import numpy as np
import pytest

from monitor.models import trace as T

RATE_BAR_S = 128.0  # triangle wave slope [bar/s]
DT_S = 1.0 / 1024.0  # sample interval [s]; both exact in binary, so sums are exact
P_LOW, P_HIGH = 90.0, 310.0  # triangle vertices [bar]
HALF = int((P_HIGH - P_LOW) / (RATE_BAR_S * DT_S))  # samples per ramp: 220 / 0.125 = 1760


def triangle(periods: int) -> tuple[np.ndarray, np.ndarray]:
    """Triangle wave 90 -> 310 -> 90 bar at 128 bar/s, sampled every 1/1024 s half a step
    off the vertices (so the up and down ramps hit the same pressures)."""
    k = np.arange(2 * HALF * periods)
    j = k % (2 * HALF)
    steps = np.where(j < HALF, j + 0.5, 2 * HALF - j - 0.5)
    return (k + 0.5) * DT_S, P_LOW + RATE_BAR_S * DT_S * steps


def test_triangle_time_per_band_is_analytic():
    periods = 3
    t, p = triangle(periods)
    dt, gap = T.sample_durations_s(t)
    hours = T.time_at_pressure_h(p, dt, T.band_edges())
    seconds = hours * 3600.0
    # hand-computed: a band of 25 bar is crossed in 25 / 128 = 0.1953125 s per ramp, two
    # ramps per period; the end bands hold 10 bar (90-100 and 300-310): 10 / 128 s per ramp.
    per_band = 2 * 25.0 / RATE_BAR_S * periods
    per_end = 2 * 10.0 / RATE_BAR_S * periods
    np.testing.assert_allclose(seconds[4:12], per_band, rtol=0, atol=1e-12)  # 100..300 bar
    # the last sample (90.0625 bar, in 75-100) stands for no time: one interval less
    assert seconds[3] == pytest.approx(per_end - DT_S, abs=1e-12)
    assert seconds[12] == pytest.approx(per_end, abs=1e-12)
    assert seconds[:3].sum() == 0 and seconds[13:].sum() == 0
    assert seconds.sum() == pytest.approx(t[-1] - t[0], abs=1e-12)
    assert not gap.any()


def test_sides_swap_gives_the_same_histogram():
    t, p = triangle(1)
    low = np.full(p.size, 20.0)
    high_a, low_a = T.loop_sides_bar(p, low)
    high_b, low_b = T.loop_sides_bar(low, p)  # the other travel direction
    np.testing.assert_array_equal(high_a, high_b)
    np.testing.assert_array_equal(low_a, np.full(p.size, 20.0))
    np.testing.assert_array_equal(low_a, low_b)


def test_irregular_sampling_and_gap():
    # hand-computed: durations 0.5, 0.2, 1.0, (gap of 3.3 s: none), 0.25, 0.75, (last: none)
    t = np.array([0.0, 0.5, 0.7, 1.7, 5.0, 5.25, 6.0])
    p = np.array([10.0, 60.0, 60.0, 130.0, 10.0, 30.0, 200.0])
    dt, gap = T.sample_durations_s(t, max_gap_s=2.0)
    np.testing.assert_allclose(dt, [0.5, 0.2, 1.0, 0.0, 0.25, 0.75, 0.0], atol=1e-12)
    np.testing.assert_array_equal(gap, [False, False, False, True, False, False, False])
    hours = T.time_at_pressure_h(p, dt, [0.0, 25.0, 50.0, 75.0, 125.0, 150.0])
    # 0-25: 0.5 + 0.25; 25-50: 0.75; 50-75: 0.2 + 1.0; 130 bar is followed by the gap
    np.testing.assert_allclose(hours * 3600, [0.75, 0.75, 1.2, 0.0, 0.0], atol=1e-12)
    # a wider gap limit keeps the 3.3 s at 130 bar
    dt2, _ = T.sample_durations_s(t, max_gap_s=5.0)
    assert T.time_at_pressure_h(p, dt2, [125.0, 150.0])[0] * 3600 == pytest.approx(3.3)


def test_pressure_by_speed_matrix():
    # hand-computed: 1 s at (60 bar, 100 rpm), 2 s at (60 bar, 900 rpm), 0.5 s at (130, 900)
    t = np.array([0.0, 1.0, 3.0, 3.5])
    p = np.array([60.0, 60.0, 130.0, 0.0])
    n = np.array([100.0, 900.0, 900.0, 0.0])
    dt, _ = T.sample_durations_s(t)
    m = T.time_at_pressure_speed_h(p, n, dt, [0.0, 100.0, 200.0], [0.0, 500.0, 1000.0]) * 3600
    np.testing.assert_allclose(m, [[1.0, 2.0], [0.0, 0.5]])
    # the matrix summed over speed is the plain histogram
    np.testing.assert_allclose(m.sum(axis=1), T.time_at_pressure_h(p, dt, [0, 100, 200]) * 3600)


def test_band_edges_and_edge_values():
    e = T.band_edges([100.0, 250.0, 420.0], width=25.0, top=500.0)
    np.testing.assert_array_equal(e, [0, 100, 250, 420, 445, 470, 495, 520])
    np.testing.assert_array_equal(T.band_edges(width=250.0, top=1000.0), [0, 250, 500, 750, 1000])
    # half-open bands; the top edge belongs to the last band; outside -> -1
    idx = T.band_index(np.array([0.0, 25.0, 49.9, 50.0, 60.0, np.nan]), np.array([0.0, 25, 50]))
    np.testing.assert_array_equal(idx, [0, 1, 1, 1, -1, -1])


def test_used_bands():
    edges = np.arange(0.0, 1001.0, 25.0)
    hours = np.zeros(40)
    hours[[2, 5]] = 1.0
    assert T.used_bands(hours, edges, keep_to=0.0) == 6  # up to the 125-150 band
    assert T.used_bands(hours, edges, keep_to=450.0) == 18  # up to the relief: 0..450
    assert T.used_bands(hours, edges, keep_to=460.0) == 19  # rounded up to 475
    assert T.used_bands(np.zeros(40), edges, keep_to=0.0) == 1


def test_minmax_envelope_hand_computed():
    t = np.arange(10.0)
    v = np.array([0, 5, 1, 9, 2, 8, 3, 7, 4, 6], dtype=float)
    start, lo, hi = T.minmax_envelope(t, v, 5)
    # buckets of 9 / 5 = 1.8 s: samples {0,1}, {2,3}, {4,5}, {6,7}, {8,9}
    np.testing.assert_allclose(start, [0, 1.8, 3.6, 5.4, 7.2])
    np.testing.assert_array_equal(lo, [0, 1, 2, 3, 4])
    np.testing.assert_array_equal(hi, [5, 9, 8, 7, 6])
    # an empty bucket (a gap) is nan; every extreme survives decimation
    _, lo, hi = T.minmax_envelope([0.0, 0.1, 9.9, 10.0], [1.0, 7.0, -3.0, 2.0], 4)
    assert np.isnan(lo[1]) and np.isnan(hi[2])
    assert np.nanmax(hi) == 7.0 and np.nanmin(lo) == -3.0


def test_zero_duration_and_empty_input():
    assert T.time_at_pressure_h([], [], [0.0, 25.0]).tolist() == [0.0]
    dt, gap = T.sample_durations_s([5.0])
    assert dt.tolist() == [0.0] and gap.tolist() == [False]


def test_errors():
    with pytest.raises(ValueError, match="time_s must be finite and strictly increasing"):
        T.sample_durations_s([0.0, 1.0, 1.0])
    with pytest.raises(ValueError, match="max_gap_s must be a time > 0 s"):
        T.sample_durations_s([0.0, 1.0], max_gap_s=0.0)
    with pytest.raises(ValueError, match="edges must be at least two finite, strictly increasing"):
        T.band_edges([100.0, 50.0])
    with pytest.raises(ValueError, match="edges_bar must be at least two strictly increasing"):
        T.time_at_pressure_h([1.0], [1.0], [0.0])
    with pytest.raises(ValueError, match="pressure_a_bar and pressure_b_bar must have the same"):
        T.loop_sides_bar([1.0, 2.0], [1.0])
    with pytest.raises(ValueError, match="n_buckets must be an integer >= 1"):
        T.minmax_envelope([0.0], [1.0], 0)


def test_against_numpy_histogram():
    # numpy's weighted histogram uses the same bands: half-open, the last one closed
    rng = np.random.default_rng(7)
    t = np.cumsum(rng.uniform(0.001, 0.5, 5000))
    p = rng.uniform(0.0, 1000.0, 5000)
    p[:3] = [0.0, 25.0, 1000.0]  # values on edges
    dt, _ = T.sample_durations_s(t, max_gap_s=0.4)
    edges = T.band_edges()
    ref, _ = np.histogram(p, bins=edges, weights=dt)
    np.testing.assert_allclose(T.time_at_pressure_h(p, dt, edges) * 3600, ref, rtol=1e-12)
    speed = rng.uniform(0.0, 3000.0, 5000)
    s_edges = T.band_edges(width=500.0, top=3000.0)
    ref2, _, _ = np.histogram2d(p, speed, bins=[edges, s_edges], weights=dt)
    got = T.time_at_pressure_speed_h(p, speed, dt, edges, s_edges) * 3600
    np.testing.assert_allclose(got, ref2, rtol=1e-12, atol=1e-12)
