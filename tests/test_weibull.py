"""Tests for monitor.models.weibull: censored Weibull fits, LR bounds, plotting positions."""

from __future__ import annotations

import contextlib
import io
import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import optimize, stats

from monitor.models.weibull import (
    B_LIFE_FRACTION,
    b_life,
    b_life_bounds,
    fit_weibull,
    plotting_positions,
    weibull_cdf,
)

# Lieblein, J. and Zelen, M., Statistical investigation of the fatigue life of deep-groove
# ball bearings, J. Res. Natl. Bur. Stand. 57 (1956): 23 complete lives [million revolutions].
LIEBLEIN_ZELEN = (
    17.88, 28.92, 33.00, 41.52, 42.12, 45.60, 48.48, 51.84, 51.96, 54.12, 55.56, 67.80,
    68.64, 68.64, 68.88, 84.12, 93.12, 98.64, 105.12, 105.84, 127.92, 128.04, 173.40,
)  # fmt: skip

K10 = -math.log1p(-B_LIFE_FRACTION)  # -ln(0.9): (B10 / scale)**shape


def censored_sample(seed, n, shape=1.7, scale=100.0, censor_max=200.0):
    """Weibull lives with random (uniform) right censoring; at least 2 failures."""
    rng = np.random.default_rng(seed)
    life = scale * rng.weibull(shape, n)
    censor = rng.uniform(0.0, censor_max, n)
    failed = life <= censor
    assert failed.sum() >= 2
    return life[failed], censor[~failed]


@pytest.fixture(scope="module")
def lz_fit():
    return fit_weibull(LIEBLEIN_ZELEN, confidence=0.95)


# --- point estimates against published values and reference libraries -------------------


def test_lieblein_zelen_mle_as_published(lz_fit):
    # Lawless, Statistical Models and Methods for Lifetime Data, 2nd ed. (2003), ball-bearing
    # example (ch. 5): maximum-likelihood shape 2.102 and scale 81.88, printed to 4 figures.
    assert lz_fit.shape == pytest.approx(2.102, abs=0.0005)
    assert lz_fit.scale == pytest.approx(81.88, abs=0.005)
    # The same estimates to six figures, 2.10206 / 81.8783, as reproduced by an independent
    # general-purpose optimiser (scipy.stats.weibull_min.fit; see the scipy test below).
    assert lz_fit.shape == pytest.approx(2.10206, rel=1e-5)
    assert lz_fit.scale == pytest.approx(81.8783, rel=1e-5)
    assert (lz_fit.failures, lz_fit.suspensions) == (23, 0)
    assert lz_fit.method == "likelihood ratio"


def test_lieblein_zelen_against_scipy_and_loglikelihood(lz_fit):
    shape, _, scale = stats.weibull_min.fit(LIEBLEIN_ZELEN, floc=0)
    assert lz_fit.shape == pytest.approx(shape, rel=1e-4)
    assert lz_fit.scale == pytest.approx(scale, rel=1e-4)
    # Log-likelihood from scipy's own density at the fitted parameters.
    expected = stats.weibull_min.logpdf(LIEBLEIN_ZELEN, lz_fit.shape, scale=lz_fit.scale).sum()
    assert lz_fit.log_likelihood == pytest.approx(expected, rel=1e-9)
    # B10 from its definition, Eq. B_q = eta * (-ln(1-q))**(1/beta).
    assert lz_fit.b10 == pytest.approx(lz_fit.scale * K10 ** (1 / lz_fit.shape), rel=1e-9)


SEEDS = [(11, 30, 1.7), (12, 12, 0.8), (13, 60, 3.5), (14, 8, 2.2), (15, 200, 1.2)]


@pytest.mark.parametrize(("seed", "n", "shape"), SEEDS)
def test_censored_fit_matches_scipy(seed, n, shape):
    failures, suspensions = censored_sample(seed, n, shape=shape)
    fit = fit_weibull(failures, suspensions)
    data = stats.CensoredData(uncensored=failures, right=suspensions)
    ref_shape, _, ref_scale = stats.weibull_min.fit(data, floc=0)
    assert fit.shape == pytest.approx(ref_shape, rel=1e-4)
    assert fit.scale == pytest.approx(ref_scale, rel=1e-4)
    assert (fit.failures, fit.suspensions) == (failures.size, suspensions.size)
    expected_ll = (
        stats.weibull_min.logpdf(failures, fit.shape, scale=fit.scale).sum()
        + stats.weibull_min.logsf(suspensions, fit.shape, scale=fit.scale).sum()
    )
    assert fit.log_likelihood == pytest.approx(expected_ll, rel=1e-9)


@pytest.mark.parametrize(("seed", "n", "shape"), SEEDS)
def test_censored_fit_matches_reliability(seed, n, shape):
    fitters = pytest.importorskip("reliability.Fitters")
    failures, suspensions = censored_sample(seed, n, shape=shape)
    with contextlib.redirect_stdout(io.StringIO()):
        ref = fitters.Fit_Weibull_2P(
            failures=list(failures),
            right_censored=list(suspensions),
            method="MLE",
            show_probability_plot=False,
            print_results=False,
        )
    fit = fit_weibull(failures, suspensions)
    assert fit.shape == pytest.approx(ref.beta, rel=1e-4)
    assert fit.scale == pytest.approx(ref.alpha, rel=1e-4)


# --- likelihood-ratio bounds ----------------------------------------------------------------


def _independent_loglik(shape, scale, failures, suspensions):
    """Censored log-likelihood from scipy's density and survival function."""
    return (
        stats.weibull_min.logpdf(failures, shape, scale=scale).sum()
        + stats.weibull_min.logsf(suspensions, shape, scale=scale).sum()
    )


def _profile(failures, suspensions, shape=None, scale=None, b10=None):
    """Profile log-likelihood with a generic bounded optimiser over the free parameter."""
    if shape is not None:
        res = optimize.minimize_scalar(
            lambda ls: -_independent_loglik(shape, math.exp(ls), failures, suspensions),
            bounds=(math.log(failures.min()) - 5, math.log(failures.max()) + 10),
            method="bounded",
            options={"xatol": 1e-10},
        )
    else:
        k = 1.0 if scale is not None else K10
        quantile = scale if scale is not None else b10
        res = optimize.minimize_scalar(
            lambda lb: (
                -_independent_loglik(
                    math.exp(lb), quantile * k ** (-1 / math.exp(lb)), failures, suspensions
                )
            ),
            bounds=(math.log(0.05), math.log(50.0)),
            method="bounded",
            options={"xatol": 1e-10},
        )
    return -res.fun


@pytest.mark.parametrize("confidence", [0.80, 0.95])
def test_lr_bounds_solve_their_definition_independently(confidence):
    # Meeker & Escobar (1998), ch. 8: a bound is where 2 (l_hat - l_profile) equals the
    # chi-square(1) quantile. Here the profile comes from scipy's density and a generic
    # optimiser, independent of the closed forms inside fit_weibull.
    failures, suspensions = censored_sample(21, 25, shape=1.4)
    fit = fit_weibull(failures, suspensions, confidence=confidence)
    l_hat = _independent_loglik(fit.shape, fit.scale, failures, suspensions)
    crit = stats.chi2.ppf(confidence, 1)
    for name in ("shape", "scale", "b10"):
        for side in ("low", "high"):
            value = getattr(fit, f"{name}_{side}")
            stat = 2 * (l_hat - _profile(failures, suspensions, **{name: value}))
            assert stat == pytest.approx(crit, rel=1e-5), (name, side)
        inside = 0.5 * (getattr(fit, f"{name}_low") + getattr(fit, name))
        assert 2 * (l_hat - _profile(failures, suspensions, **{name: inside})) < crit


def test_lr_bounds_bracket_estimate_and_narrow_with_n():
    rng = np.random.default_rng(5)
    life = 100.0 * rng.weibull(2.0, 800)
    censor = rng.uniform(0.0, 250.0, 800)
    widths = []
    for n in (20, 80, 320, 800):
        failed = life[:n] <= censor[:n]
        fit = fit_weibull(life[:n][failed], censor[:n][~failed])
        for name in ("shape", "scale", "b10"):
            low, est, high = (getattr(fit, f"{name}{s}") for s in ("_low", "", "_high"))
            assert 0 < low < est < high < math.inf, (n, name)
        widths.append([math.log(fit.shape_high / fit.shape_low), fit.b10_high / fit.b10_low])
    widths = np.array(widths)
    assert np.all(np.diff(widths, axis=0) < 0)


def test_lr_bounds_close_to_fisher_bounds_for_a_large_sample():
    # Asymptotically the likelihood-ratio and Fisher-matrix (Wald, log scale) intervals agree
    # (Meeker & Escobar 1998, ch. 8); the reference Fisher bounds come from `reliability`.
    fitters = pytest.importorskip("reliability.Fitters")
    failures, suspensions = censored_sample(31, 3000, shape=1.8, censor_max=150.0)
    with contextlib.redirect_stdout(io.StringIO()):
        ref = fitters.Fit_Weibull_2P(
            failures=list(failures),
            right_censored=list(suspensions),
            CI=0.90,
            show_probability_plot=False,
            print_results=False,
        )
    fit = fit_weibull(failures, suspensions, confidence=0.90)
    # rel 2e-3: at n = 3000 the half-widths are ~4 % and the two methods differ by O(1/n);
    # a one-sided instead of a two-sided quantile would move the bounds by ~1 %.
    assert fit.shape_low == pytest.approx(ref.beta_lower, rel=2e-3)
    assert fit.shape_high == pytest.approx(ref.beta_upper, rel=2e-3)
    assert fit.scale_low == pytest.approx(ref.alpha_lower, rel=2e-3)
    assert fit.scale_high == pytest.approx(ref.alpha_upper, rel=2e-3)


def test_b10_interval_coverage_on_a_synthetic_fleet():
    # Lives in consumed-fraction units from a known Weibull whose B10 is exactly 1.0 (a
    # calibrated rating, scale 4.48); units still running or removed for other reasons are
    # censored uniformly over (0, 10), which leaves about 60 % of the lives as failures.
    true_shape, true_b10 = 1.5, 1.0
    true_scale = true_b10 / K10 ** (1 / true_shape)
    rng = np.random.default_rng(2024)
    repeats, n, confidence = 200, 20, 0.90
    covered = 0
    for _ in range(repeats):
        life = true_scale * rng.weibull(true_shape, n)
        censor = rng.uniform(0.0, 10.0, n)
        failed = life <= censor
        fit = fit_weibull(life[failed], censor[~failed], confidence=confidence)
        covered += fit.b10_low <= true_b10 <= fit.b10_high
    # Binomial standard error of the observed share at the nominal level:
    # sqrt(0.9 * 0.1 / 200) = 0.0212. A margin of 3 standard errors (0.064) is exceeded by
    # chance with probability about 0.1 % if the true coverage is nominal; the upper check
    # guards against intervals wider than they need to be.
    se = math.sqrt(confidence * (1 - confidence) / repeats)
    share = covered / repeats
    assert confidence - 3 * se <= share <= confidence + 3 * se, share


def test_b_life_bounds_match_fit_and_are_monotone():
    failures, suspensions = censored_sample(41, 40)
    fit = fit_weibull(failures, suspensions)
    q = np.array([0.01, B_LIFE_FRACTION, 1 - math.exp(-1), 0.9])
    est, low, high = b_life_bounds(failures, suspensions, q=q)
    assert (est[1], low[1], high[1]) == pytest.approx((fit.b10, fit.b10_low, fit.b10_high))
    assert (est[2], low[2], high[2]) == pytest.approx(
        (fit.scale, fit.scale_low, fit.scale_high), rel=1e-8
    )
    assert np.all(np.diff(est) > 0) and np.all(np.diff(low) > 0) and np.all(np.diff(high) > 0)
    assert np.all((low < est) & (est < high))


@settings(max_examples=20, deadline=None)
@given(factor=st.floats(min_value=1e-4, max_value=1e4), seed=st.integers(0, 50))
def test_fit_is_equivariant_under_a_change_of_time_unit(factor, seed):
    # Lawless (2003), ch. 5: the Weibull MLE is equivariant under t -> c t.
    failures, suspensions = censored_sample(seed, 15)
    base = fit_weibull(failures, suspensions)
    scaled = fit_weibull(failures * factor, suspensions * factor)
    assert scaled.shape == pytest.approx(base.shape, rel=1e-7)
    assert scaled.shape_low == pytest.approx(base.shape_low, rel=1e-7)
    for name in ("scale", "scale_low", "scale_high", "b10", "b10_low", "b10_high"):
        assert getattr(scaled, name) == pytest.approx(getattr(base, name) * factor, rel=1e-7)


def test_two_failures_give_a_fit_with_wide_bounds():
    fit = fit_weibull([10.0, 20.0], [30.0, 30.0])
    assert fit.failures == 2 and fit.suspensions == 2
    assert 0 < fit.b10_low < fit.b10 < fit.b10_high


def test_extreme_inputs_give_documented_limits_not_errors():
    # Times spanning 600 decades: no overflow error; unclosed bounds are 0 and inf.
    fit = fit_weibull([1e-300, 1e300])
    assert 0 < fit.shape < 0.01
    assert fit.scale_low == 0.0 and fit.scale_high == math.inf
    # Equal failures with a longer suspension still have a finite shape (hand check: the
    # shape equation tends to ln(10/5) > 0 as the shape grows, so it has a root).
    tied = fit_weibull([5.0, 5.0], [10.0])
    assert 0 < tied.shape_low < tied.shape < tied.shape_high < math.inf


# --- helpers -------------------------------------------------------------------------------


def test_cdf_and_b_life_against_scipy():
    t = np.array([0.0, 5.0, 50.0, 500.0])
    assert weibull_cdf(t, 1.7, 80.0) == pytest.approx(stats.weibull_min.cdf(t, 1.7, scale=80.0))
    q = np.array([0.01, 0.1, 0.5])
    assert b_life(1.7, 80.0, q) == pytest.approx(stats.weibull_min.ppf(q, 1.7, scale=80.0))
    # Vector equals scalar; B_q is where the CDF equals q.
    assert b_life(1.7, 80.0) == pytest.approx(b_life(1.7, 80.0, q)[1])
    assert weibull_cdf(b_life(1.7, 80.0, q), 1.7, 80.0) == pytest.approx(q)
    # Scale is the 63.2 % life: F(eta) = 1 - 1/e for any shape.
    assert weibull_cdf(80.0, [0.5, 1, 4], 80.0) == pytest.approx([1 - math.exp(-1)] * 3)
    assert math.isnan(weibull_cdf(1.0, -1.0, 1.0)) and math.isnan(b_life(1.0, 0.0))


# --- plotting positions ----------------------------------------------------------------------


def test_plotting_positions_complete_sample_is_bernard():
    # Bernard's approximation F_i = (i - 0.3) / (n + 0.4) for a complete sample.
    times, f = plotting_positions([30.0, 10.0, 20.0])
    assert times.tolist() == [10.0, 20.0, 30.0]
    assert f == pytest.approx([0.7 / 3.4, 1.7 / 3.4, 2.7 / 3.4])


def test_plotting_positions_hand_computed_with_a_suspension():
    # Hand-computed from Johnson's recurrence: n = 3, order 10 F (R=3), 20 S, 30 F (R=1):
    # A1 = 0 + 4/4 = 1; A2 = 1 + (4 - 1)/(1 + 1) = 2.5; F = (A - 0.3) / 3.4.
    times, f = plotting_positions([10.0, 30.0], [20.0])
    assert times.tolist() == [10.0, 30.0]
    assert f == pytest.approx([0.7 / 3.4, 2.2 / 3.4])
    # At a tie the failure comes first: 5 F (R=3), 5 S, 10 F (R=1) -> A = 1, 2.5.
    _, f_tie = plotting_positions([5.0, 10.0], [5.0])
    assert f_tie == pytest.approx([0.7 / 3.4, 2.2 / 3.4])
    # Kaplan-Meier, hand-computed: S(10) = 2/3, S(30) = 2/3 * 0 -> F = 1/3, 1.
    times_km, f_km = plotting_positions([10.0, 30.0], [20.0], method="kaplan-meier")
    assert times_km.tolist() == [10.0, 30.0] and f_km == pytest.approx([1 / 3, 1.0])


@pytest.mark.parametrize("seed", [51, 52, 53])
def test_plotting_positions_match_reliability(seed):
    positions = pytest.importorskip("reliability.Probability_plotting")
    failures, suspensions = censored_sample(seed, 25)  # continuous draws: no ties
    x_ref, y_ref = positions.plotting_positions(
        failures=list(failures), right_censored=list(suspensions), sort=True
    )
    times, f = plotting_positions(failures, suspensions)
    assert times == pytest.approx(np.asarray(x_ref, dtype=float))
    assert f == pytest.approx(np.asarray(y_ref, dtype=float), rel=1e-12)


# --- bad input -------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("failures", "suspensions", "confidence", "match"),
    [
        ([5.0], (), 0.9, r"failures: .*at least 2 failure times, got 1"),
        ([], (), 0.9, r"failures: .*at least 2"),
        ([5.0, 0.0], (), 0.9, r"failures must be positive finite times; position 1"),
        ([5.0, -3.0], (), 0.9, r"failures must be positive"),
        ([5.0, math.nan], (), 0.9, r"failures must be positive finite"),
        ([5.0, math.inf], (), 0.9, r"failures must be positive finite"),
        ([5.0, 6.0], [-1.0], 0.9, r"suspensions must be positive finite times; position 0"),
        ([5.0, 6.0], ["x"], 0.9, r"suspensions must be a sequence of numbers"),
        ([[5.0, 6.0]], (), 0.9, r"failures must be one-dimensional"),
        ([5.0, 6.0], (), 0.0, r"confidence must be a level strictly between 0 and 1"),
        ([5.0, 6.0], (), 1.0, r"confidence must be"),
        ([5.0, 6.0], (), "high", r"confidence must be"),
        ([7.0, 7.0], [3.0], 0.9, r"failures: all failure times are equal"),
    ],
)
def test_bad_input_raises(failures, suspensions, confidence, match):
    with pytest.raises(ValueError, match=match):
        fit_weibull(failures, suspensions, confidence=confidence)


def test_bad_helper_arguments_raise():
    with pytest.raises(ValueError, match=r"q must be a fraction failed strictly between"):
        b_life(2.0, 10.0, q=1.0)
    with pytest.raises(ValueError, match=r"q must hold fractions failed"):
        b_life_bounds([1.0, 2.0], q=[0.1, 0.0])
    with pytest.raises(ValueError, match=r"method must be one of \('johnson', 'kaplan-meier'\)"):
        plotting_positions([1.0, 2.0], method="median")
