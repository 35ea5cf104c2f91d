"""Tests of monitor.spectrum (Life model v1) and the oil life factor in monitor.bearings."""

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from hypothesis.extra import numpy as hnp

from monitor.models import bearings, spectrum

RATED = dict(rated_life_h=4000.0, rated_dp_bar=380.0, rated_speed_rpm=2500.0)
EDGES_LO = np.arange(0.0, 500.0, 50.0)  # ten 50-bar bands, 0-500 bar
EDGES_HI = EDGES_LO + 50.0

# REFERENCES §2 (ISO 281 variable load, roller, C 100 kN, 2000 rpm): band "pressures" 10,
# 20, 35 stand for loads in kN; L10h at 10 kN = 17 953.62 h (ISO 281 Eq. 1).
MINER = dict(rated_life_h=17953.6224169, rated_dp_bar=10.0, rated_speed_rpm=2000.0)
MINER_LO, MINER_HI = np.array([9.0, 19.0, 34.0]), np.array([11.0, 21.0, 36.0])
MINER_U = np.array([0.3, 0.5, 0.2])


def test_band_lives_reference():
    # REFERENCES §2: band lives 17 953.62 h, 1 781.22 h, 275.80 h
    lives = spectrum.band_life_h(np.array([10.0, 20.0, 35.0]), 2000.0, **MINER)
    np.testing.assert_allclose(lives, [17953.62, 1781.22, 275.80], rtol=2e-5)


def test_miner_life_reference_roller():
    # REFERENCES §2: Miner life of the spectrum 977.916 h -> that many hours is damage 1
    d = spectrum.damage_1d(MINER_LO, MINER_HI, MINER_U * 977.916, **MINER)
    assert float(d) == pytest.approx(1.0, rel=1e-6)
    # REFERENCES §2: equivalent load P_m = 23.94171 kN
    p_m = spectrum.equivalent_pressure_bar(MINER_LO, MINER_HI, MINER_U)
    assert float(p_m) == pytest.approx(23.94171, rel=1e-6)


def test_miner_life_reference_ball():
    # REFERENCES §2: ball bearing, P_m = 23.43774 kN and 647.249 h; rated point at 10 kN:
    # L10h = (100/10)^3 * 1e6 / (60 * 2000) = 8333.33 h (ISO 281 Eq. 1)
    ball = dict(MINER, rated_life_h=1e9 / 120000.0)
    d = spectrum.damage_1d(MINER_LO, MINER_HI, MINER_U * 647.249, life_exponent=3.0, **ball)
    assert float(d) == pytest.approx(1.0, rel=1e-6)
    p_m = spectrum.equivalent_pressure_bar(MINER_LO, MINER_HI, MINER_U, life_exponent=3.0)
    assert float(p_m) == pytest.approx(23.43774, rel=1e-6)


def test_rated_point_consumes_exactly_one_life():
    # Identity of the model: one band at the rated point for L_R hours is damage 1.0 (a1 = 1)
    d = spectrum.damage_1d([370.0], [390.0], [4000.0], **RATED)
    assert float(d) == pytest.approx(1.0, rel=1e-12)
    # with a low side, the rated dp is a differential pressure: band at dp_R + p_L
    d = spectrum.damage_1d([395.0], [415.0], [4000.0], low_side_bar=25.0, **RATED)
    assert float(d) == pytest.approx(1.0, rel=1e-12)
    # upper-edge choice: a band whose upper edge is the rated pressure
    d = spectrum.damage_1d([330.0], [380.0], [4000.0], band_pressure="upper", **RATED)
    assert float(d) == pytest.approx(1.0, rel=1e-12)
    # the reliability factor divides the life: a1(99 %) = 0.25 (ISO 281 table, 2 s.f.)
    a1 = bearings.reliability_factor(99.0)
    d = spectrum.damage_1d([370.0], [390.0], [4000.0], life_factor=a1, **RATED)
    assert float(d) == pytest.approx(1.0 / 0.25, rel=0.02)


def test_speed_scaling_and_mean_speed():
    # Life inversely proportional to speed (ISO 281 L10h = 1e6 L10 / (60 n)).
    h = np.array([[100.0] * 10, [100.0] * 10, [100.0] * 10])
    d = spectrum.damage_1d(EDGES_LO, EDGES_HI, h, mean_speed_rpm=[np.nan, 1250.0, 0.0], **RATED)
    assert d[1] == pytest.approx(d[0] / 2.0, rel=1e-12)
    assert d[2] == 0.0  # not turning: no revolutions, no fatigue


def test_zero_pressure_and_padding_add_nothing():
    h = np.array([[0.0, 5.0, 0.0]])
    lo, hi = np.array([[np.nan, 0.0, np.nan]]), np.array([[np.nan, 20.0, np.nan]])
    # band midpoint 10 bar below a 25-bar low side: dp = 0, no damage; nan padding ignored
    assert spectrum.damage_1d(lo, hi, h, low_side_bar=25.0, **RATED)[0] == 0.0
    assert spectrum.damage_1d(EDGES_LO, EDGES_HI, np.zeros((2, 10)), **RATED).tolist() == [0, 0]


def test_damage_1d_errors():
    with pytest.raises(ValueError, match="band_pressure must be one of"):
        spectrum.damage_1d(EDGES_LO, EDGES_HI, np.ones(10), band_pressure="mean", **RATED)
    with pytest.raises(ValueError, match="hours must be finite and >= 0"):
        spectrum.damage_1d(EDGES_LO, EDGES_HI, -np.ones((1, 10)), **RATED)
    with pytest.raises(ValueError, match="pressure edges of bands with hours"):
        spectrum.damage_1d([np.nan], [10.0], [[1.0]], **RATED)
    with pytest.raises(ValueError, match="rated_life_h must be a finite number > 0"):
        spectrum.damage_1d(EDGES_LO, EDGES_HI, np.ones(10), **dict(RATED, rated_life_h=0.0))
    with pytest.raises(ValueError, match="life_factor must be a scalar"):
        spectrum.damage_1d(EDGES_LO, EDGES_HI, np.ones((2, 10)), life_factor=np.ones(3), **RATED)
    with pytest.raises(ValueError, match="mean_speed_rpm must be a scalar or have shape"):
        spectrum.damage_1d(EDGES_LO, EDGES_HI, np.ones((2, 10)), mean_speed_rpm=[1, 2, 3], **RATED)


def test_life_factor_shapes():
    h = np.full((2, 10), 10.0)
    base = spectrum.damage_1d(EDGES_LO, EDGES_HI, h, **RATED)
    per_upload = spectrum.damage_1d(EDGES_LO, EDGES_HI, h, life_factor=[2.0, 4.0], **RATED)
    np.testing.assert_allclose(per_upload, base / [2.0, 4.0])
    per_band = spectrum.damage_1d(EDGES_LO, EDGES_HI, h, life_factor=np.full((2, 10), 0.5), **RATED)
    np.testing.assert_allclose(per_band, base * 2.0)


def test_damage_2d_matches_1d_at_one_speed_and_scales_with_speed():
    rng = np.random.default_rng(3)
    h1 = rng.uniform(0, 50, (4, 10))
    d1 = spectrum.damage_1d(EDGES_LO, EDGES_HI, h1, mean_speed_rpm=1800.0, **RATED)
    h2 = h1[:, :, np.newaxis]  # one speed band 1700-1900 rpm, midpoint 1800
    d2 = spectrum.damage_2d(EDGES_LO, EDGES_HI, [1700.0], [1900.0], h2, **RATED)
    np.testing.assert_allclose(d2, d1, rtol=1e-12)
    # two speed bands, hours split evenly: damage is the mean speed's damage (linear in n)
    h3 = np.concatenate([h2 / 2, h2 / 2], axis=2)
    d3 = spectrum.damage_2d(EDGES_LO, EDGES_HI, [1000.0, 2400.0], [1200.0, 2800.0], h3, **RATED)
    d_mean = spectrum.damage_1d(EDGES_LO, EDGES_HI, h1, mean_speed_rpm=1850.0, **RATED)
    np.testing.assert_allclose(d3, d_mean, rtol=1e-12)
    with pytest.raises(ValueError, match="speed edges of bands with hours"):
        spectrum.damage_2d(EDGES_LO, EDGES_HI, [np.nan], [1.0], h2, **RATED)


def test_equivalent_pressure_reproduces_damage():
    rng = np.random.default_rng(5)
    h = rng.uniform(0, 20, (3, 10))
    p_eq = spectrum.equivalent_pressure_bar(EDGES_LO, EDGES_HI, h, low_side_bar=20.0)
    d_spec = spectrum.damage_1d(EDGES_LO, EDGES_HI, h, low_side_bar=20.0, **RATED)
    d_eq = spectrum.damage_1d(
        (p_eq - 1.0)[:, None], (p_eq + 1.0)[:, None], h.sum(1)[:, None], low_side_bar=20.0, **RATED
    )
    np.testing.assert_allclose(d_eq, d_spec, rtol=1e-9)
    assert np.isnan(spectrum.equivalent_pressure_bar(EDGES_LO, EDGES_HI, np.zeros(10)))
    # 2-D: speed-weighted equivalent pressure also reproduces the damage at the mean speed
    h2 = rng.uniform(0, 20, (2, 10, 2))
    s_lo, s_hi = np.array([900.0, 1900.0]), np.array([1100.0, 2100.0])
    p2 = spectrum.equivalent_pressure_bar(
        EDGES_LO, EDGES_HI, h2, speed_low_rpm=s_lo, speed_high_rpm=s_hi
    )
    d2 = spectrum.damage_2d(EDGES_LO, EDGES_HI, s_lo, s_hi, h2, **RATED)
    n_mean = (h2 * np.array([1000.0, 2000.0])).sum((1, 2)) / h2.sum((1, 2))
    d2_eq = spectrum.damage_1d(
        (p2 - 1)[:, None],
        (p2 + 1)[:, None],
        h2.sum((1, 2))[:, None],
        mean_speed_rpm=n_mean,
        **RATED,
    )
    np.testing.assert_allclose(d2_eq, d2, rtol=1e-9)


# --- properties (hypothesis) ---------------------------------------------------------

hours_10 = hnp.arrays(float, 10, elements=st.floats(0.0, 200.0))


@given(hours_10, hnp.arrays(float, 10, elements=st.floats(0.0, 1.0)))
def test_split_into_two_uploads_keeps_total(h, frac):
    a, b = h * frac, h * (1.0 - frac)
    both = spectrum.damage_1d(EDGES_LO, EDGES_HI, np.stack([a, b]), **RATED)
    whole = spectrum.damage_1d(EDGES_LO, EDGES_HI, h, **RATED)
    assert both.sum() == pytest.approx(float(whole), rel=1e-9, abs=1e-15)


@given(hours_10, st.integers(0, 9), st.floats(0.0, 500.0))
def test_more_hours_never_lower_damage(h, band, extra):
    more = h.copy()
    more[band] += extra
    d0 = spectrum.damage_1d(EDGES_LO, EDGES_HI, h, low_side_bar=20.0, **RATED)
    d1 = spectrum.damage_1d(EDGES_LO, EDGES_HI, more, low_side_bar=20.0, **RATED)
    assert d1 >= d0


@given(hours_10, st.floats(0.0, 40.0), st.sampled_from([3.0, 10.0 / 3.0]))
def test_doubling_pressure_above_low_side_scales_by_2_to_p(h, low_side, p):
    lo, hi = EDGES_LO + low_side, EDGES_HI + low_side
    lo2, hi2 = low_side + 2 * (lo - low_side), low_side + 2 * (hi - low_side)
    kw = dict(RATED, low_side_bar=low_side, life_exponent=p)
    d1 = spectrum.damage_1d(lo, hi, h, **kw)
    d2 = spectrum.damage_1d(lo2, hi2, h, **kw)
    assert float(d2) == pytest.approx(2.0**p * float(d1), rel=1e-9, abs=1e-15)


@settings(max_examples=30)
@given(
    hnp.arrays(float, (5, 10), elements=st.floats(0.0, 100.0)),
    hnp.arrays(float, 5, elements=st.floats(500.0, 3000.0) | st.just(np.nan)),
)
def test_vector_equals_scalar(h, speeds):
    batch = spectrum.damage_1d(EDGES_LO, EDGES_HI, h, mean_speed_rpm=speeds, **RATED)
    one_by_one = [
        float(spectrum.damage_1d(EDGES_LO, EDGES_HI, h[i], mean_speed_rpm=speeds[i], **RATED))
        for i in range(5)
    ]
    np.testing.assert_allclose(batch, one_by_one, rtol=1e-12)


# --- oil life factor (ISO 281 aISO relative to the reference condition) --------------

BEARING = dict(
    bearing_type="ball",
    pitch_diameter_mm=50.0,
    fatigue_limit_kn=2.0,
    load_at_rated_kn=10.0,
    rated_dp_bar=380.0,
)


def test_oil_life_factor_reference_values():
    # ISO 281 nu1 at 1000 rpm, dm 50 mm = 20.1246 mm2/s (REFERENCES §1). Reference
    # condition: kappa 1, eC 0.5 -> x = 0.5 * 2/10 = 0.1 -> aISO 2.4305 (REFERENCES §1).
    # Band at the rated point with kappa 0.5 and eC 1.0 -> x = 0.2 -> aISO 0.8617.
    a = bearings.oil_life_factor(
        np.array([380.0]),
        np.array([1000.0]),
        viscosity_mm2s=0.5 * 20.1246,
        contamination_ec=1.0,
        reference_ec=0.5,
        **BEARING,
    )
    assert float(a[0]) == pytest.approx(0.8617 / 2.4305, rel=2e-4)


def test_oil_life_factor_identity_and_trends():
    nu_ref = float(bearings.rated_viscosity_mm2s(2000.0, 50.0))  # kappa = 1 at 2000 rpm
    ec_ref = bearings.contamination_factor("normal", 50.0)
    dp = np.array([[380.0, 190.0, 0.0]])
    kw = dict(BEARING, viscosity_mm2s=[nu_ref], contamination_ec=[ec_ref])
    a = bearings.oil_life_factor(dp, np.full((1, 3), 2000.0), **kw)
    assert a[0, 0] == pytest.approx(1.0, rel=1e-12)  # reference condition at rated point
    assert a[0, 1] > 1.0  # lighter load: larger x, longer modified life
    assert a[0, 2] == pytest.approx(
        50.0 / float(bearings.life_modification_factor(1.0, ec_ref * 0.2, "ball"))
    )
    dirty = bearings.oil_life_factor(dp, np.full((1, 3), 2000.0), **dict(kw, contamination_ec=0.1))
    assert np.all(dirty[0, :2] < a[0, :2])
    stopped = bearings.oil_life_factor(dp, np.zeros((1, 3)), **kw)
    assert np.all(np.isnan(stopped))  # kappa 0 is outside the method
    with pytest.raises(ValueError, match="fatigue_limit_kn must be a finite number > 0"):
        bearings.oil_life_factor(dp, 2000.0, **dict(kw, fatigue_limit_kn=0.0))


def test_band_conditions_feed_damage_with_oil_factor():
    h = np.full((2, 10), 10.0)
    dp, n = spectrum.band_conditions_1d(
        EDGES_LO,
        EDGES_HI,
        2,
        rated_speed_rpm=2500.0,
        low_side_bar=20.0,
        mean_speed_rpm=[np.nan, 1500.0],
    )
    assert dp.shape == n.shape == (2, 10)
    np.testing.assert_allclose(n[:, 0], [2500.0, 1500.0])
    np.testing.assert_allclose(dp[0], np.fmax(EDGES_LO + 25.0 - 20.0, 0.0))
    a = bearings.oil_life_factor(dp, n, viscosity_mm2s=30.0, contamination_ec=0.3, **BEARING)
    d = spectrum.damage_1d(
        EDGES_LO,
        EDGES_HI,
        h,
        low_side_bar=20.0,
        mean_speed_rpm=[np.nan, 1500.0],
        life_factor=a,
        **RATED,
    )
    expected = (h / (a * spectrum.band_life_h(dp, n, **RATED))).sum(axis=1)
    np.testing.assert_allclose(d, expected, rtol=1e-12)
    dp2, n2 = spectrum.band_conditions_2d(EDGES_LO, EDGES_HI, [0, 1000], [1000, 2000], 3)
    assert dp2.shape == n2.shape == (3, 10, 2)
    np.testing.assert_allclose(n2[0, 0], [500.0, 1500.0])
