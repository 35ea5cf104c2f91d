"""Tests of monitor.wear: normalisation law, Theil-Sen against scipy, remaining hours."""

import math

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st
from scipy import stats

from monitor.models import oil, wear

VG46 = oil.oil_line_from_spec(iso_vg=46, viscosity_index=100)


def test_normalisation_law_reference():
    # REFERENCES §6: Q_ref = Q (dp_ref/dp) (nu/nu_ref); VG 46 VI 100 viscosities from
    # REFERENCES §4: nu80 = 11.050, nu60 = 20.562 mm2/s (computed, +-0.5 %).
    # Reading 2.0 L/min at 200 bar and 80 degC, reference 250 bar and 60 degC.
    q = wear.normalise_case_drain_lpm(
        2.0, 200.0, 80.0, ref_dp_bar=250.0, ref_temp_c=60.0, oil_line=VG46
    )
    assert float(q) == pytest.approx(2.0 * 250 / 200 * 11.050 / 20.562, rel=5e-3)


def test_normalisation_identity_flushing_and_missing_conditions():
    kw = dict(ref_dp_bar=250.0, ref_temp_c=50.0, oil_line=VG46, flushing_lpm=0.5)
    q = wear.normalise_case_drain_lpm(
        np.array([2.0, 2.0, 2.0, 2.0]),
        np.array([250.0, np.nan, 125.0, np.nan]),
        np.array([50.0, np.nan, np.nan, 50.0]),
        **kw,
    )
    # at reference conditions: flow less flushing; without conditions: as is, less flushing
    np.testing.assert_allclose(q, [1.5, 1.5, 3.0, 1.5], rtol=1e-12)
    # no reference conditions in the model: readings used as they are
    raw = wear.normalise_case_drain_lpm(
        2.0, 100.0, 80.0, ref_dp_bar=None, ref_temp_c=None, oil_line=None
    )
    assert float(raw) == 2.0
    # hotter oil is thinner and leaks more: normalising to a cooler reference lowers it
    hot = wear.normalise_case_drain_lpm(2.0, 250.0, 70.0, **kw)
    assert float(hot) < 1.5
    with pytest.raises(ValueError, match="test_dp_bar must be > 0 bar"):
        wear.normalise_case_drain_lpm(2.0, 0.0, 50.0, **kw)


def test_clearance_ratio():
    # REFERENCES §6: doubling leakage means the gap grew by 2^(1/3) = 1.26
    assert float(wear.clearance_ratio(2.0)) == pytest.approx(1.26, abs=0.005)
    assert np.isnan(wear.clearance_ratio(-1.0))


@pytest.mark.parametrize("seed", range(8))
def test_theil_sen_matches_scipy(seed):
    # Oracle: scipy.stats.theilslopes for slope and intercept, on data with and without
    # ties; the interval is the exact one (tests below), scipy's is the normal approximation
    rng = np.random.default_rng(seed)
    n = int(rng.integers(3, 40))
    x = rng.uniform(0, 3000, n) if seed % 2 else rng.integers(0, 10, n).astype(float) * 100
    y = 1.5 + 4e-4 * x + rng.normal(0, 0.2, n)
    if seed % 4 == 0:
        y = np.round(y, 1)  # ties in y
    if np.unique(x).size < 2:
        x[0] += 1.0
    ref = stats.theilslopes(y, x, alpha=0.95, method="separate")
    got = wear.theil_sen(x, y, alpha=0.95)
    np.testing.assert_allclose(got[:2], [ref.slope, ref.intercept], rtol=1e-12, atol=1e-15)


def _ranks(x: np.ndarray, y: np.ndarray, values: tuple) -> list[int]:
    """Positions of interval ends among the sorted pairwise slopes (pairs with x_i < x_j)."""
    i, j = np.triu_indices(x.size, 1)
    ok = x[i] != x[j]
    slopes = np.sort((y[j] - y[i])[ok] / (x[j] - x[i])[ok])
    return [int(np.flatnonzero(slopes == v)[0]) for v in values]


@pytest.mark.parametrize("n", [40, 60, 90])
def test_interval_agrees_with_scipy_for_many_readings(n):
    # For many readings the exact interval and scipy.stats.theilslopes' normal
    # approximation (Sen 1968) aim at the same order statistics: the same ranks, or one apart
    rng = np.random.default_rng(n)
    x = rng.uniform(0, 3000, n)
    y = 1.5 + 4e-4 * x + rng.normal(0, 0.2, n)
    ref = stats.theilslopes(y, x, alpha=0.95, method="separate")
    got = wear.theil_sen(x, y, alpha=0.95)
    mine = _ranks(x, y, got[2:])
    theirs = _ranks(x, y, (ref.low_slope, ref.high_slope))
    assert all(abs(a - b) <= 1 for a, b in zip(mine, theirs, strict=True))


def test_interval_hand_computed_four_and_five_readings():
    # Hand-computed (Sen 1968; Hollander, Wolfe and Chicken 2014, ch. 9): x = 0..4,
    # y = 0, 2, 3, 7, 8; the ten pairwise slopes sorted are 1, 1, 1.5, 2, 2, 2, 7/3, 2.5,
    # 2.5, 4, median 2. Five readings: at 95 % only the widest interval holds the level
    # (P(K = 0) = 1/120, P(K <= 1) = 5/120 > 0.025): [S_(1), S_(10)] = [1, 4]; at 90 %
    # [S_(2), S_(9)] = [1, 2.5].
    x, y = np.arange(5.0), np.array([0.0, 2, 3, 7, 8])
    assert wear.theil_sen(x, y, 0.95)[0] == 2.0
    assert wear.theil_sen(x, y, 0.95)[2:] == (1.0, 4.0)
    assert wear.theil_sen(x, y, 0.90)[2:] == (1.0, 2.5)
    # Four readings (slopes 1, 1.5, 2, 7/3, 2.5, 4): the widest interval covers
    # 1 - 2/24 = 0.917, so no 95 % interval, and [1, 4] at 90 %
    slope, _, low, high = wear.theil_sen(x[:4], y[:4], 0.95)
    assert slope == pytest.approx((2 + 7 / 3) / 2) and math.isnan(low) and math.isnan(high)
    assert wear.theil_sen(x[:4], y[:4], 0.90)[2:] == (1.0, 4.0)
    # the trend keeps the point estimate and gives no range
    t = wear.case_drain_trend(x[:4] * 100, 1 + y[:4] / 100, limit_lpm=2.0)
    assert t.remaining_h > 0 and math.isnan(t.remaining_h_low) and math.isnan(t.remaining_h_high)


MC_REPS = 2000
"""Replications per sample size of the coverage Monte Carlo."""


def _coverage_samples(rng, n: int, slope: float) -> tuple[list, list]:
    x = rng.uniform(0, 3000, (MC_REPS, n))
    # normal errors for half the samples, Cauchy for the other half: the interval is
    # distribution-free, so heavy tails must not lower its coverage
    e = np.where(np.arange(MC_REPS)[:, None] % 2 == 0, 0.2, 0.05) * np.where(
        np.arange(MC_REPS)[:, None] % 2 == 0,
        rng.standard_normal((MC_REPS, n)),
        rng.standard_cauchy((MC_REPS, n)),
    )
    return list(x), list(1.2 + slope * x + e)


def test_interval_coverage_monte_carlo():
    # Seeded Monte Carlo, 3 to 30 readings: the 95 % interval either holds its level or is
    # not claimed. Margin: with R = 2000 replications the observed coverage of a true 0.95
    # has a binomial standard error sqrt(0.95 * 0.05 / R) = 0.0049; 3.5 of them (0.017)
    # make a false alarm at one sample size about 2.3e-4 likely (normal approximation to
    # the binomial), 0.7 % over the 28 sizes, while the old normal-approximation interval
    # (about 0.67 at 3 readings and 0.92 at 4, checked below) fails it.
    level, slope = 0.95, 4e-4
    margin = 3.5 * math.sqrt(level * (1 - level) / MC_REPS)
    rng = np.random.default_rng(20261212)
    for n in range(3, 31):
        xs, ys = _coverage_samples(rng, n, slope)
        fit = wear.theil_sen_batch(xs, ys, level)
        claimed = ~np.isnan(fit[:, 2]) & ~np.isnan(fit[:, 3])
        if n <= 4:  # 1 - 2/n! < 0.95: never a range
            assert not claimed.any(), n
            old = [stats.theilslopes(y, x, alpha=level) for x, y in zip(xs, ys, strict=True)]
            old_cov = np.mean([r.low_slope <= slope <= r.high_slope for r in old])
            assert old_cov < level - margin, (n, old_cov)  # the check has teeth
            continue
        assert claimed.all(), n
        covered = (fit[:, 2] <= slope) & (slope <= fit[:, 3])
        assert covered.mean() >= level - margin, (n, covered.mean())


def test_theil_sen_errors():
    with pytest.raises(ValueError, match="at least two distinct values"):
        wear.theil_sen(np.ones(4), np.arange(4.0))
    with pytest.raises(ValueError, match="equal length >= 2"):
        wear.theil_sen(np.ones(1), np.ones(1))
    with pytest.raises(ValueError, match="must be finite"):
        wear.theil_sen(np.array([0.0, 1.0, np.nan]), np.ones(3))


def test_trend_remaining_hours_hand_computed():
    # Exact line Q = 1.0 + 0.001 H, limit 3.0 L/min, now at H = 1000 -> level 2.0,
    # remaining (3.0 - 2.0) / 0.001 = 1000 h (hand-computed); exact data: zero-width interval
    h = np.array([0.0, 250.0, 500.0, 750.0, 1000.0])
    t = wear.case_drain_trend(h, 1.0 + 0.001 * h, limit_lpm=3.0)
    assert t.n == 5
    assert t.slope == pytest.approx(0.001) and t.intercept == pytest.approx(1.0)
    assert t.level_now == pytest.approx(2.0)
    assert t.remaining_h == pytest.approx(1000.0)
    assert t.remaining_h_low == pytest.approx(1000.0) and t.remaining_h_high == pytest.approx(
        1000.0
    )
    later = wear.case_drain_trend(h, 1.0 + 0.001 * h, limit_lpm=3.0, hour_meter_now_h=1500.0)
    assert later.remaining_h == pytest.approx(500.0)


def test_trend_interval_orders_remaining_hours():
    rng = np.random.default_rng(11)
    h = np.sort(rng.uniform(0, 2000, 25))
    q = 1.2 + 5e-4 * h + rng.normal(0, 0.05, 25)
    t = wear.case_drain_trend(h, q, limit_lpm=2.8)
    assert t.slope_low <= t.slope <= t.slope_high
    assert t.remaining_h_low <= t.remaining_h <= t.remaining_h_high
    assert t.remaining_h == pytest.approx((2.8 - t.level_now) / t.slope)


def test_trend_edges():
    # fewer than three readings (after dropping nan): no estimate
    t = wear.case_drain_trend([0.0, 100.0, np.nan], [1.0, 1.1, 1.2], limit_lpm=3.0)
    assert t.n == 2 and math.isnan(t.slope) and math.isnan(t.remaining_h)
    assert wear.case_drain_trend([], [], limit_lpm=3.0).n == 0
    # flat or falling: no estimate
    flat = wear.case_drain_trend([0.0, 100.0, 200.0], [1.0, 1.0, 1.0], limit_lpm=3.0)
    assert flat.slope == 0.0 and math.isnan(flat.remaining_h)
    # past the limit: 0 h, whatever the slope
    past = wear.case_drain_trend([0.0, 100.0, 200.0], [3.5, 3.4, 3.3], limit_lpm=3.0)
    assert past.remaining_h == 0.0 and past.remaining_h_high == 0.0
    # rising, but lower slope bound not positive: upper end of the range unbounded
    h6 = [0.0, 100.0, 200.0, 300.0, 400.0, 500.0]
    noisy = wear.case_drain_trend(h6, [1.0, 1.3, 1.0, 1.4, 1.0, 1.5], limit_lpm=3.0)
    assert noisy.slope > 0 and noisy.slope_low <= 0 and math.isinf(noisy.remaining_h_high)
    with pytest.raises(ValueError, match="limit_lpm must be a flow > 0"):
        wear.case_drain_trend([0.0, 1.0, 2.0], [1.0, 1.0, 1.0], limit_lpm=0.0)


@given(st.floats(1e-5, 1e-2), st.floats(0.5, 3.0), st.floats(0.1, 10.0))
def test_trend_scales_with_units(slope, q0, k):
    # Scaling the flow by k scales slope, level and limit alike: remaining hours unchanged
    h = np.array([0.0, 300.0, 650.0, 900.0, 1400.0])
    q = q0 + slope * h + np.array([0.0, 0.01, -0.01, 0.02, 0.0])
    limit = q0 + slope * 3000.0
    a = wear.case_drain_trend(h, q, limit_lpm=limit)
    b = wear.case_drain_trend(h, k * q, limit_lpm=k * limit)
    assert b.slope == pytest.approx(k * a.slope, rel=1e-9)
    if math.isfinite(a.remaining_h):
        assert b.remaining_h == pytest.approx(a.remaining_h, rel=1e-6)


def _series(seed: int, count: int) -> tuple[list, list]:
    """Random series with ties in x and y, a few all-equal x, lengths 2..45."""
    rng = np.random.default_rng(seed)
    xs, ys = [], []
    for s in range(count):
        n = int(rng.integers(2, 46))
        if s % 7 == 0:
            x = np.full(n, 500.0)  # one distinct hour meter: no slope
        elif s % 3 == 0:
            x = rng.integers(0, 8, n).astype(float) * 100  # ties in x
        else:
            x = np.sort(rng.uniform(0, 3000, n))
        y = np.round(1.5 + 4e-4 * x + rng.normal(0, 0.2, n), 1 if s % 2 else 6)
        xs.append(x)
        ys.append(y)
    return xs, ys


@pytest.mark.parametrize("alpha", [0.95, 0.9])
def test_theil_sen_batch_equals_one_at_a_time(alpha):
    # Oracle: wear.theil_sen (itself checked against scipy above), exactly, row by row
    xs, ys = _series(11, 400)
    got = wear.theil_sen_batch(xs, ys, alpha)
    for i, (x, y) in enumerate(zip(xs, ys, strict=True)):
        if np.unique(x).size < 2:
            assert np.isnan(got[i]).all()
            continue
        np.testing.assert_array_equal(got[i], wear.theil_sen(x, y, alpha))


def test_theil_sen_batch_small_blocks_and_errors(monkeypatch):
    xs, ys = _series(12, 60)
    whole = wear.theil_sen_batch(xs, ys)
    monkeypatch.setattr(wear, "PAIR_BLOCK", 1)  # one series per block
    np.testing.assert_array_equal(wear.theil_sen_batch(xs, ys), whole)
    assert wear.theil_sen_batch([], []).shape == (0, 4)
    with pytest.raises(ValueError, match="finite"):
        wear.theil_sen_batch([np.array([0.0, 1.0, 2.0])], [np.array([1.0, np.nan, 2.0])])
    with pytest.raises(ValueError, match="equal length >= 2"):
        wear.theil_sen_batch([np.array([0.0])], [np.array([1.0])])
    with pytest.raises(ValueError, match="alpha"):
        wear.theil_sen_batch(xs, ys, alpha=1.5)


@pytest.mark.parametrize("rows", [256, 3])
def test_fit_before_last_equals_one_at_a_time(monkeypatch, rows):
    # Oracle: wear.theil_sen of each series without its last point, exactly; the fits of
    # whole series stay those of theil_sen_batch. Blocks of 3 series leave a remainder.
    monkeypatch.setattr(wear, "PAIR_ROWS", rows)
    xs, ys = _series(13, 300)
    whole, before = wear.theil_sen_batch_and_before_last(xs, ys)
    np.testing.assert_array_equal(whole, wear.theil_sen_batch(xs, ys))
    checked = 0
    for i, (x, y) in enumerate(zip(xs, ys, strict=True)):
        if x.size < 3 or np.unique(x[:-1]).size < 2:
            assert np.isnan(before[i]).all()
            continue
        np.testing.assert_array_equal(before[i], wear.theil_sen(x[:-1], y[:-1]))
        checked += 1
    assert checked > 200
    monkeypatch.setattr(wear, "PAIR_BLOCK", 1)  # one series per block
    again = wear.theil_sen_batch_and_before_last(xs, ys)
    np.testing.assert_array_equal(again[0], whole)
    np.testing.assert_array_equal(again[1], before)


def test_fit_before_last_errors():
    assert [a.shape for a in wear.theil_sen_batch_and_before_last([], [])] == [(0, 4), (0, 4)]
    with pytest.raises(ValueError, match="equal length >= 2"):
        wear.theil_sen_batch_and_before_last([np.zeros((2, 3))], [np.zeros((2, 3))])
    with pytest.raises(ValueError, match="equal length >= 2"):
        wear.theil_sen_batch_and_before_last([np.arange(3.0)], [np.arange(4.0)])
    with pytest.raises(ValueError, match="same number"):
        wear.theil_sen_batch_and_before_last([np.arange(3.0)], [])


def test_remaining_wear_batch_equals_scalar():
    # Oracle: wear.remaining_wear_h case by case (limit 3 L/min): growing, past the limit,
    # at it, flat, falling, no slope, no level, low bound <= 0 or unknown, high bound <= 0.
    nan, inf = math.nan, math.inf
    cases = [
        (2.0, 0.001, 0.0005, 0.002),
        (3.5, 0.001, 0.0005, 0.002),
        (3.0, 0.001, 0.0005, 0.002),
        (2.0, 0.0, -0.001, 0.001),
        (2.0, -0.001, -0.002, 0.0),
        (2.0, nan, nan, nan),
        (nan, 0.001, 0.0005, 0.002),
        (2.0, 0.001, -0.0005, 0.002),
        (2.0, 0.001, 0.0, 0.002),
        (2.0, 0.001, nan, nan),
        (2.0, 0.001, 0.0005, 0.0),
        (2.0, 1e-300, 1e-300, inf),
    ]
    level, slope, low, high = (np.array(c) for c in zip(*cases, strict=True))
    got = wear.remaining_wear_h_batch(np.full(level.size, 3.0), level, slope, low, high)
    want = np.array([wear.remaining_wear_h(3.0, *c) for c in cases])
    np.testing.assert_array_equal(got, want)
    assert wear.remaining_wear_h_batch(*(np.zeros(0),) * 5).shape == (0, 3)


def test_off_reference_readings():
    # Why the limit exists: normalising a reading at 5 degC in ISO VG 46 (VI 100) oil to a
    # 50 degC reference multiplies it by nu(5)/nu(50), about 13 (ASTM D341 line).
    q = wear.normalise_case_drain_lpm(1.0, 250.0, 5.0, ref_dp_bar=250.0, ref_temp_c=50.0,
                                      oil_line=VG46)  # fmt: skip
    assert 12.0 < float(q) < 14.0
    kw = dict(ref_dp_bar=250.0, ref_temp_c=50.0)
    dp = np.array([250.0, 250.0, 250.0, 125.0, 124.0, 500.0, 501.0, np.nan, np.nan])
    temp = np.array([50.0, 70.0, 70.5, 50.0, 50.0, 50.0, 50.0, np.nan, 29.0])
    # 20 K and 0.5-2 are inclusive limits; a condition not recorded counts as within
    want = [False, False, True, False, True, False, True, False, True]
    np.testing.assert_array_equal(wear.off_reference(dp, temp, **kw), want)
    wide = wear.off_reference(dp, temp, **kw, max_temp_distance_k=25.0, dp_ratio_range=(0.4, 3))
    np.testing.assert_array_equal(wide, [False] * 9)
    none = wear.off_reference(dp, temp, ref_dp_bar=None, ref_temp_c=None)
    assert not none.any() and none.shape == (9,)
    assert wear.off_reference(250.0, 5.0, **kw).shape == ()
    with pytest.raises(ValueError, match="max_temp_distance_k must be"):
        wear.off_reference(dp, temp, **kw, max_temp_distance_k=0.0)
    with pytest.raises(ValueError, match="dp_ratio_range must be"):
        wear.off_reference(dp, temp, **kw, dp_ratio_range=(1.5, 2.0))
