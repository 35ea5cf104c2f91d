"""Null distribution of Kendall's statistic and the exact rank of the Theil-Sen interval.

The distribution-free confidence interval for the slope of a straight line (Sen 1968;
Hollander, Wolfe and Chicken 2014) takes two order statistics of the pairwise slopes.
Which two follows from the null distribution of Kendall's statistic: for the true slope
``b`` the residuals ``y - b x`` are independent of ``x``, so the number of pairwise
slopes below ``b`` is distributed as the number of discordant pairs ("inversions") of a
random ordering. This module counts that distribution exactly (with ties in ``x``) for
up to :data:`EXACT_MAX_N` points and uses the normal approximation with continuity
correction above.
"""

from __future__ import annotations

import functools
import math
from itertools import accumulate

import numpy as np

EXACT_MAX_N = 50
"""Most points for which the null distribution is counted exactly [-]; above it the
normal approximation with continuity correction is used (at n = 50 the two give the same
rank or ranks one apart, tests/test_kendall.py)."""

LEVEL_TOLERANCE = 1e-9
"""Relative tolerance of the comparison of a tail probability with ``(1 - level) / 2``
[-], so that a tail exactly at the limit counts as within it despite rounding of the
level (``1 - 0.95`` is not exactly 0.05 in binary)."""


def _times_q_integer(poly: list[int], j: int) -> list[int]:
    """``poly`` times ``[j]_q = 1 + q + ... + q^(j-1)`` (window sums of width j)."""
    pre = [0, *accumulate(poly)]
    m = len(poly)
    return [pre[min(k + 1, m)] - pre[max(0, k - j + 1)] for k in range(m + j - 1)]


def _over_q_integer(poly: list[int], j: int) -> list[int]:
    """``poly`` divided by ``[j]_q`` (exact): times ``(1 - q)``, then over ``(1 - q^j)``."""
    diff = [poly[0], *(poly[k] - poly[k - 1] for k in range(1, len(poly)))]
    out = diff[: len(poly) - j + 1]
    for k in range(j, len(out)):
        out[k] += out[k - j]
    return out


@functools.lru_cache(maxsize=1024)
def inversion_counts(n: int, ties: tuple[int, ...] = ()) -> tuple[int, ...]:
    """Number of orderings of n points by their number of discordant pairs.

    Parameters
    ----------
    n : int
        Number of points [-], 1 <= n <= :data:`EXACT_MAX_N`.
    ties : tuple of int, default ()
        Sizes (>= 2) of the groups of equal ``x``; pairs within a group are not counted.

    Returns
    -------
    tuple of int
        ``counts[k]``: number of equally likely arrangements with ``k`` discordant pairs,
        ``k = 0 .. N'`` with ``N' = n(n-1)/2 - sum t(t-1)/2``; they sum to
        ``n! / prod t!``.

    Raises
    ------
    ValueError
        If n is out of range or the tie groups do not fit in n.

    Notes
    -----
    The generating function is the q-multinomial coefficient
    ``[n]_q! / prod_t [t]_q!`` with ``[j]_q! = prod_{i<=j} (1 + q + ... + q^(i-1))``;
    without ties it is the distribution of Kendall's statistic ``S = N - 2 k``.
    Integer arithmetic throughout, so the counts are exact.

    References
    ----------
    Kendall, M. G., Rank Correlation Methods, 4th ed., Griffin 1970, ch. 4 (recurrence of
    the null frequencies, from memory); Hollander, M., Wolfe, D. A. and Chicken, E.,
    Nonparametric Statistical Methods, 3rd ed., Wiley 2014, section 8.1 (section from
    memory).
    """
    if not (isinstance(n, int) and 1 <= n <= EXACT_MAX_N):
        raise ValueError(f"n must be a whole number from 1 to {EXACT_MAX_N}, got {n!r}")
    if any(t < 2 for t in ties) or sum(ties) > n:
        raise ValueError(f"ties must be group sizes >= 2 adding up to at most n, got {ties!r}")
    poly = list(_q_factorial(n))
    for t in ties:
        for j in range(2, t + 1):
            poly = _over_q_integer(poly, j)
    return tuple(poly)


@functools.lru_cache(maxsize=EXACT_MAX_N)
def _q_factorial(n: int) -> tuple[int, ...]:
    """Coefficients of ``[n]_q! = [1]_q [2]_q ... [n]_q``, each from the one before (the
    status asks for many n; built up once, not from 1 for every n)."""
    if n <= 1:
        return (1,)
    return tuple(_times_q_integer(list(_q_factorial(n - 1)), n))


def inversion_cdf(n: int, ties: tuple[int, ...] = ()) -> np.ndarray:
    """Exact ``P(k <= m)`` [-] for ``m = 0 .. N'`` from :func:`inversion_counts`."""
    counts = inversion_counts(n, ties)
    total = sum(counts)
    return np.array([c / total for c in accumulate(counts)])


def normal_inversion_cdf(n: int, ties: tuple[int, ...] = ()) -> np.ndarray:
    """Normal approximation of :func:`inversion_cdf` with continuity correction [-].

    Notes
    -----
    ``P(k <= m) = Phi((m + 1/2 - N'/2) / (sigma / 2))``, ``sigma^2 = [n(n-1)(2n+5) -
    sum t(t-1)(2t+5)] / 18`` the null variance of Kendall's S with ties in one variable
    (Kendall 1970, ch. 4, from memory).
    """
    from scipy.stats import norm  # loaded when first needed (0.5 s or more)

    pairs = n * (n - 1) // 2 - sum(t * (t - 1) // 2 for t in ties)
    var = (n * (n - 1) * (2 * n + 5) - sum(t * (t - 1) * (2 * t + 5) for t in ties)) / 18.0
    return norm.cdf((np.arange(pairs + 1) + 0.5 - pairs / 2.0) / (math.sqrt(var) / 2.0))


@functools.lru_cache(maxsize=4096)
def interval_rank(n: int, ties: tuple[int, ...], level: float) -> tuple[int, float]:
    """Rank L of the slope interval ``[S_(L), S_(N'+1-L)]`` that holds the level.

    Parameters
    ----------
    n : int
        Number of points [-].
    ties : tuple of int
        Sorted sizes (>= 2) of the groups of equal ``x`` (empty without ties).
    level : float
        Confidence level [-], in (0, 1).

    Returns
    -------
    tuple
        ``(L, coverage)``: the largest rank L >= 1 whose interval covers the true slope
        with probability ``coverage >= level`` [-]; ``(0, nan)`` when even the widest
        interval (the smallest to the largest pairwise slope) stays below the level.

    Notes
    -----
    With ``k`` the number of discordant pairs (pairwise slopes below the true slope),
    ``P(b < S_(L)) = P(k <= L - 1)`` and by symmetry the same above ``S_(N'+1-L)``, so
    ``coverage = 1 - 2 P(k <= L - 1)``. Exact counts for ``n <=`` :data:`EXACT_MAX_N`;
    above, ``P(k <= m) = Phi((m + 1/2 - N'/2) / (sigma / 2))`` with
    ``sigma^2 = [n(n-1)(2n+5) - sum t(t-1)(2t+5)] / 18`` (continuity correction).

    References
    ----------
    Sen, P. K. (1968), Estimates of the regression coefficient based on Kendall's tau,
    J. Am. Stat. Assoc. 63, 1379-1389; Hollander, M., Wolfe, D. A. and Chicken, E.,
    Nonparametric Statistical Methods, 3rd ed., Wiley 2014, ch. 9, the confidence
    interval for the slope based on the Theil statistic (section number from memory).
    """
    if not (0 < level < 1):
        raise ValueError(f"level must be a confidence level in (0, 1), got {level!r}")
    tail = (1.0 - level) / 2.0 * (1.0 + LEVEL_TOLERANCE)
    pairs = n * (n - 1) // 2 - sum(t * (t - 1) // 2 for t in ties)
    if pairs <= 0:
        return 0, math.nan
    cdf = inversion_cdf(n, ties) if n <= EXACT_MAX_N else normal_inversion_cdf(n, ties)
    rank = int(np.searchsorted(cdf, tail, side="right"))
    if rank == 0:
        return 0, math.nan
    return rank, float(1.0 - 2.0 * cdf[rank - 1])


def interval_ranks(x: np.ndarray, level: float) -> np.ndarray:
    """:func:`interval_rank` of every row of ``x`` (k, n): the rank L per row (0: none).

    Rows without ties in ``x`` share one look-up; a row with ties looks up its own
    pattern of group sizes (cached).
    """
    k, n = x.shape
    out = np.zeros(k, np.int64)
    if k == 0 or n < 2:
        return out
    s = np.sort(x, axis=1)
    tied = (s[:, 1:] == s[:, :-1]).any(axis=1)
    out[~tied] = interval_rank(n, (), level)[0]
    for i in np.flatnonzero(tied).tolist():
        sizes = np.unique(s[i], return_counts=True)[1]
        out[i] = interval_rank(n, tuple(sorted(int(t) for t in sizes if t > 1)), level)[0]
    return out
