"""Tests of monitor.models.kendall: the null distribution of Kendall's statistic (against
brute-force enumeration and scipy.stats.kendalltau's exact p-values) and the rank of the
distribution-free Theil-Sen slope interval (hand-computed cases)."""

import itertools
import math
from collections import Counter

import numpy as np
import pytest
from scipy import stats

from monitor.models import kendall


def _brute_counts(groups: tuple[int, ...]) -> tuple[int, ...]:
    """Discordant-pair counts of every distinct arrangement of tied groups (enumerated)."""
    labels = [g for g, t in enumerate(groups) for _ in range(t)]
    seen = Counter()
    for p in set(itertools.permutations(labels)):
        seen[sum(1 for i, j in itertools.combinations(range(len(p)), 2) if p[i] > p[j])] += 1
    return tuple(seen[k] for k in range(max(seen) + 1))


@pytest.mark.parametrize(
    "n, ties, groups",
    [
        (1, (), (1,)),
        (2, (), (1, 1)),
        (5, (), (1,) * 5),
        (7, (), (1,) * 7),
        (5, (2, 2), (2, 1, 2)),
        (6, (3, 2), (3, 2, 1)),
        (8, (2, 2, 3), (2, 1, 2, 3)),
        (4, (4,), (4,)),
    ],
)
def test_counts_equal_enumeration(n, ties, groups):
    # Oracle: every arrangement enumerated (groups of equal x in any order give the same
    # distribution, so the pattern of sizes is what matters)
    assert kendall.inversion_counts(n, ties) == _brute_counts(groups)


def test_counts_hand_values():
    # Kendall's null frequencies, hand-counted: n = 4 orderings by discordant pairs are
    # 1, 3, 5, 6, 5, 3, 1 (24 in all); n = 5: 1, 4, 9, 15, 20, 22, 20, 15, 9, 4, 1 (120)
    assert kendall.inversion_counts(4) == (1, 3, 5, 6, 5, 3, 1)
    assert kendall.inversion_counts(5) == (1, 4, 9, 15, 20, 22, 20, 15, 9, 4, 1)
    c50 = kendall.inversion_counts(50)
    assert sum(c50) == math.factorial(50) and len(c50) == 50 * 49 // 2 + 1
    assert c50 == c50[::-1]  # symmetric: S and -S equally likely


@pytest.mark.parametrize("n", [3, 4, 6, 9, 12])
def test_cdf_equals_scipy_exact_kendalltau(n):
    # Oracle: scipy.stats.kendalltau(method="exact", alternative="greater") gives
    # P(tau >= observed) = P(K <= observed discordant pairs) without ties
    rng = np.random.default_rng(n)
    cdf = kendall.inversion_cdf(n)
    for _ in range(12):
        perm = rng.permutation(n)
        k = sum(1 for i, j in itertools.combinations(range(n), 2) if perm[i] > perm[j])
        ref = stats.kendalltau(np.arange(n), perm, method="exact", alternative="greater")
        assert cdf[k] == pytest.approx(ref.pvalue, rel=1e-12)


@pytest.mark.parametrize(
    "n, level, rank, coverage",
    [
        # hand-computed from the counts above: coverage of [S_(L), S_(N+1-L)] is
        # 1 - 2 P(K <= L - 1); the widest interval (L = 1) covers 1 - 2/n!
        (3, 0.95, 0, math.nan),  # 1 - 2/6 = 0.667 < 0.95
        (3, 0.5, 1, 1 - 2 / 6),
        (4, 0.95, 0, math.nan),  # 1 - 2/24 = 0.917 < 0.95
        (4, 0.90, 1, 1 - 2 / 24),
        (5, 0.95, 1, 1 - 2 / 120),  # P(K <= 1) = 5/120 > 0.025
        (5, 0.90, 2, 1 - 10 / 120),  # P(K <= 1) = 5/120 <= 0.05 < P(K <= 2) = 14/120
        (6, 0.95, 2, 1 - 12 / 720),  # P(K <= 1) = 6/720, P(K <= 2) = 20/720 > 0.025
    ],
)
def test_interval_rank_hand_computed(n, level, rank, coverage):
    got_rank, got_cov = kendall.interval_rank(n, (), level)
    assert got_rank == rank
    if math.isnan(coverage):
        assert math.isnan(got_cov)
    else:
        assert got_cov == pytest.approx(coverage, rel=1e-12)


@pytest.mark.parametrize("level", [0.8, 0.9, 0.95, 0.99])
def test_interval_rank_holds_level_and_is_the_largest(level):
    for n in range(2, 51):
        rank, cov = kendall.interval_rank(n, (), level)
        cdf = kendall.inversion_cdf(n)
        if rank == 0:
            assert 1 - 2 * cdf[0] < level  # even the widest interval is short of it
            continue
        assert cov >= level
        assert 1 - 2 * cdf[rank] < level  # one rank narrower would not hold the level


def test_normal_approximation_close_to_exact_at_the_switch():
    # The normal approximation with continuity correction (Kendall 1970, ch. 4) takes
    # over above 50 points; at 30-50 points it gives the exact rank or one rank less.
    for n in (30, 40, 50):
        for level in (0.9, 0.95):
            tail = (1 - level) / 2 * (1 + kendall.LEVEL_TOLERANCE)
            exact = np.searchsorted(kendall.inversion_cdf(n), tail, side="right")
            approx = np.searchsorted(kendall.normal_inversion_cdf(n), tail, side="right")
            assert 0 <= exact - approx <= 1
    rank, cov = kendall.interval_rank(200, (), 0.95)
    assert rank > 0 and cov == pytest.approx(0.95, abs=2e-3)


def test_ties_in_x_need_more_points():
    # Fewer countable pairs, so a tied design reaches the level later (hand-computed):
    # 5 points in two tied pairs and one single give 8 pairs and 5!/(2! 2!) = 30 equally
    # likely arrangements, P(K = 0) = 1/30 > 0.025: no 95 % range; one tied pair: 60
    # arrangements, P(K = 0) = 1/60, coverage 1 - 2/60
    assert kendall.interval_rank(5, (2, 2), 0.95)[0] == 0
    assert kendall.interval_rank(5, (2,), 0.95) == (1, pytest.approx(1 - 2 / 60))
    assert kendall.interval_rank(5, (), 0.95)[0] == 1
    x = np.array([[0.0, 1, 2, 3, 4], [0.0, 0, 2, 2, 4], [4.0, 3, 2, 1, 0]])
    np.testing.assert_array_equal(kendall.interval_ranks(x, 0.95), [1, 0, 1])
    assert kendall.interval_ranks(np.zeros((0, 5)), 0.95).shape == (0,)


def test_errors():
    with pytest.raises(ValueError, match="n must be a whole number from 1 to 50"):
        kendall.inversion_counts(51)
    with pytest.raises(ValueError, match="ties must be group sizes"):
        kendall.inversion_counts(4, (5,))
    with pytest.raises(ValueError, match="level must be a confidence level"):
        kendall.interval_rank(5, (), 1.0)
