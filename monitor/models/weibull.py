"""Two-parameter Weibull life fits with right censoring.

Pure numpy/scipy: the maximum-likelihood fit of failure and suspension (right-censored)
times, two-sided likelihood-ratio bounds on the shape, the scale and the B10 life, and
plotting positions for a probability plot that respect suspensions.

Times may be in any positive unit (operating hours, consumed life fraction, million
revolutions); every result that is a time comes back in the same unit.

A fit from a handful of lives is an estimate with wide bounds. The maker's service limits
and a qualified technician decide what is done to a machine.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
from scipy import optimize, special, stats

B_LIFE_FRACTION = 0.10
"""Unreliability q of the B-life reported by :func:`fit_weibull` (B10: 10 % failed) [-]."""

DEFAULT_CONFIDENCE = 0.90
"""Default two-sided confidence level of the bounds [-]."""

MIN_FAILURES = 2
"""Fewest failure times a two-parameter Weibull fit accepts."""

INTERVAL_METHOD = "likelihood ratio"
"""How the bounds are computed: profile likelihood ratio with a chi-square(1) quantile."""

BERNARD_OFFSET = 0.3
"""Offset a of Bernard's median-rank approximation ``(i - a) / (n + 1 - 2a)`` [-]."""

PLOTTING_METHODS = ("johnson", "kaplan-meier")
"""Plotting-position methods of :func:`plotting_positions`."""

_LOG_LIMIT = 700.0
"""Largest magnitude of a natural log of a parameter in the searches (e**700 ~ 1e304)."""

_BIG = 1e100
"""Finite stand-in for overflowing log-likelihood differences inside root searches."""


@dataclass(frozen=True)
class WeibullFit:
    """Result of :func:`fit_weibull`; times in the unit of the input.

    Attributes
    ----------
    shape, shape_low, shape_high : float
        Weibull shape beta and its two-sided bounds [-].
    scale, scale_low, scale_high : float
        Weibull scale eta (63.2 % life) and its bounds [time unit].
    b10, b10_low, b10_high : float
        Life by which 10 % have failed and its bounds [time unit].
    failures, suspensions : int
        Numbers of failure and suspension (right-censored) times used.
    confidence : float
        Two-sided confidence level of the bounds [-].
    method : str
        How the bounds were computed (:data:`INTERVAL_METHOD`).
    log_likelihood : float
        Maximised log-likelihood, densities in 1/time unit [-].
    """

    shape: float
    scale: float
    shape_low: float
    shape_high: float
    scale_low: float
    scale_high: float
    b10: float
    b10_low: float
    b10_high: float
    failures: int
    suspensions: int
    confidence: float
    method: str
    log_likelihood: float


@dataclass(frozen=True)
class _Sample:
    """Log times shifted by the log of the longest time, so that every ``u <= 0``."""

    u_all: np.ndarray
    u_fail: np.ndarray
    log_ref: float
    sum_log_fail: float

    @property
    def r(self) -> int:
        return self.u_fail.size


def weibull_cdf(time, shape, scale):
    """Two-parameter Weibull unreliability (cumulative distribution function).

    Parameters
    ----------
    time : array_like
        Times [time unit]; negative times give 0.
    shape : array_like
        Shape beta [-], > 0.
    scale : array_like
        Scale eta [time unit], > 0.

    Returns
    -------
    numpy.ndarray or float
        Fraction failed by ``time`` [-]; ``nan`` where shape or scale is not positive.

    Notes
    -----
    .. math:: F(t) = 1 - \\exp\\left[-(t/\\eta)^\\beta\\right]

    References
    ----------
    Lawless, J. F., Statistical Models and Methods for Lifetime Data, 2nd ed., Wiley 2003,
    ch. 1 (the Weibull distribution).
    """
    t = np.asarray(time, dtype=float)
    beta = np.asarray(shape, dtype=float)
    eta = np.asarray(scale, dtype=float)
    with np.errstate(invalid="ignore", divide="ignore"):
        ok = (beta > 0) & (eta > 0)
        z = np.where(ok, np.clip(t, 0.0, None) / np.where(ok, eta, 1.0), np.nan)
        out = -np.expm1(-(z ** np.where(ok, beta, 1.0)))
    return out[()] if out.ndim == 0 else out


def b_life(shape, scale, q=B_LIFE_FRACTION):
    """Weibull life by which a fraction ``q`` has failed (B-life, e.g. B10 for q = 0.10).

    Parameters
    ----------
    shape : array_like
        Shape beta [-], > 0.
    scale : array_like
        Scale eta [time unit], > 0.
    q : array_like, optional
        Fraction failed, 0 < q < 1 [-]. Default :data:`B_LIFE_FRACTION`.

    Returns
    -------
    numpy.ndarray or float
        B-life [time unit]; ``nan`` where shape or scale is not positive.

    Notes
    -----
    .. math:: B_q = \\eta\\,\\left[-\\ln(1 - q)\\right]^{1/\\beta}

    References
    ----------
    Lawless, J. F., Statistical Models and Methods for Lifetime Data, 2nd ed., Wiley 2003,
    ch. 1 (quantiles of the Weibull distribution).
    """
    q_arr = np.asarray(q, dtype=float)
    if not np.all((q_arr > 0) & (q_arr < 1)):
        raise ValueError(f"q must be a fraction failed strictly between 0 and 1, got {q!r}")
    beta = np.asarray(shape, dtype=float)
    eta = np.asarray(scale, dtype=float)
    with np.errstate(invalid="ignore", divide="ignore"):
        ok = (beta > 0) & (eta > 0)
        out = np.where(ok, eta * (-np.log1p(-q_arr)) ** (1.0 / np.where(ok, beta, 1.0)), np.nan)
    return out[()] if out.ndim == 0 else out


def _times(values, name: str, minimum: int) -> np.ndarray:
    """Validate a 1-D sequence of positive finite times."""
    try:
        arr = np.asarray(values, dtype=float)
    except (TypeError, ValueError):
        raise ValueError(f"{name} must be a sequence of numbers (times > 0)") from None
    if arr.ndim > 1:
        raise ValueError(f"{name} must be one-dimensional, got shape {arr.shape}")
    arr = np.atleast_1d(arr)
    bad = np.flatnonzero(~np.isfinite(arr) | (arr <= 0))
    if bad.size:
        raise ValueError(
            f"{name} must be positive finite times; position {bad[0]} holds {arr[bad[0]]!r}"
        )
    if arr.size < minimum:
        raise ValueError(
            f"{name}: a two-parameter Weibull fit needs at least {minimum} failure times, "
            f"got {arr.size}"
        )
    return arr


def _confidence(confidence) -> float:
    try:
        value = float(confidence)
    except (TypeError, ValueError):
        value = math.nan
    if not 0.0 < value < 1.0:
        raise ValueError(f"confidence must be a level strictly between 0 and 1, got {confidence!r}")
    return value


def _sample(failures, suspensions) -> _Sample:
    t_fail = _times(failures, "failures", MIN_FAILURES)
    t_susp = _times(suspensions, "suspensions", 0)
    log_all = np.log(np.concatenate([t_fail, t_susp]))
    log_ref = float(log_all.max())
    u_fail = np.log(t_fail) - log_ref
    if np.ptp(u_fail) == 0.0 and u_fail[0] == 0.0:
        raise ValueError(
            "failures: all failure times are equal and no suspension is longer, so the "
            "shape is unbounded; a Weibull fit needs spread in the failure times"
        )
    return _Sample(log_all - log_ref, u_fail, log_ref, float(np.log(t_fail).sum()))


def _log_lik(beta: float, log_b: float, k: float, s: _Sample) -> float:
    """Log-likelihood without the constant ``-sum(log t_fail)``, by the quantile B_k."""
    v_all = s.u_all - log_b
    with np.errstate(over="ignore"):
        tail = k * np.exp(beta * v_all).sum()
    return float(s.r * (math.log(beta) + math.log(k)) + beta * (s.u_fail - log_b).sum() - tail)


def _root_outward(f: Callable[[float], float], x0: float, direction: float, step: float):
    """Root of ``f`` outward from ``x0``, where ``f(x0)`` and the far side differ in sign.

    The step doubles until it spans :data:`_LOG_LIMIT` twice (the whole double range of a
    log parameter); ``None`` when no sign change is found by then.
    """
    f0 = f(x0)
    lo = x0
    while step <= 4.0 * _LOG_LIMIT:
        hi = x0 + direction * step
        f_hi = f(hi)
        if np.sign(f_hi) != np.sign(f0):
            return optimize.brentq(f, min(lo, hi), max(lo, hi), xtol=1e-12, rtol=1e-12)
        lo, step = hi, 2.0 * step
    return None


def _exp(log_value: float) -> float:
    """``exp`` of a log parameter held inside the double range."""
    return math.exp(min(max(log_value, -_LOG_LIMIT), _LOG_LIMIT))


def _time(log_shifted: float, s: _Sample) -> float:
    """A time in the input unit from a shifted log; overflow gives ``inf``, underflow 0."""
    with np.errstate(over="ignore", under="ignore"):
        return float(np.exp(log_shifted + s.log_ref))


def _clipped(value: float) -> float:
    return float(np.nan_to_num(value, nan=_BIG, posinf=_BIG, neginf=-_BIG).clip(-_BIG, _BIG))


def _shape_score(log_beta: float, s: _Sample) -> float:
    """Profile-likelihood shape equation; increasing in beta, zero at the MLE."""
    beta = _exp(log_beta)
    w = special.softmax(beta * s.u_all)
    return _clipped(float(w @ s.u_all) - 1.0 / beta - float(s.u_fail.mean()))


def _solve_shape(s: _Sample) -> float:
    """Maximum-likelihood shape: root of the shape equation, searched in log beta."""
    direction = 1.0 if _shape_score(0.0, s) < 0 else -1.0
    root = _root_outward(lambda x: _shape_score(x, s), 0.0, direction, 0.5)
    if root is None:
        raise ValueError("failures: the shape equation has no root; the data do not fit")
    return _exp(root)


def _log_scale_given_shape(beta: float, s: _Sample) -> float:
    """Closed-form maximum-likelihood log scale (shifted) for a fixed shape."""
    return (float(special.logsumexp(beta * s.u_all)) - math.log(s.r)) / beta


def _shape_given_quantile(log_b: float, k: float, s: _Sample, beta0: float) -> float:
    """Shape maximising the likelihood at a fixed quantile; the score is decreasing."""
    v_all, sum_v_fail = s.u_all - log_b, float((s.u_fail - log_b).sum())

    def score(log_beta: float) -> float:
        beta = _exp(log_beta)
        with np.errstate(over="ignore", invalid="ignore"):
            tail = k * float(v_all @ np.exp(beta * v_all))
        return _clipped(s.r / beta + sum_v_fail - tail)

    x0 = math.log(beta0)
    direction = 1.0 if score(x0) > 0 else -1.0
    root = _root_outward(score, x0, direction, 0.25)
    return _exp(root if root is not None else x0 + direction * 4.0 * _LOG_LIMIT)


def _profile_bound(
    profile: Callable[[float], float], theta_hat: float, l_hat: float, crit: float, side: float
) -> float:
    """Parameter value on one side where ``2 (l_hat - profile) = crit`` (log space)."""

    def excess(theta: float) -> float:
        return _clipped(2.0 * (l_hat - profile(theta)) - crit)

    root = _root_outward(excess, theta_hat, side, 0.05)
    return side * math.inf if root is None else root


def _quantile_bounds(s: _Sample, beta_hat: float, k: float, crit: float) -> tuple:
    """Estimate and likelihood-ratio bounds of ``log B_k`` (shifted log units)."""
    log_b_hat = _log_scale_given_shape(beta_hat, s) + math.log(k) / beta_hat
    l_hat = _log_lik(beta_hat, log_b_hat, k, s)

    def profile(log_b: float) -> float:
        return _log_lik(_shape_given_quantile(log_b, k, s, beta_hat), log_b, k, s)

    low = _profile_bound(profile, log_b_hat, l_hat, crit, -1.0)
    high = _profile_bound(profile, log_b_hat, l_hat, crit, 1.0)
    return log_b_hat, low, high


def _shape_bounds(s: _Sample, beta_hat: float, l_hat: float, crit: float) -> tuple:
    def profile(log_beta: float) -> float:
        beta = _exp(log_beta)
        return _log_lik(beta, _log_scale_given_shape(beta, s), 1.0, s)

    log_beta_hat = math.log(beta_hat)
    low = _profile_bound(profile, log_beta_hat, l_hat, crit, -1.0)
    high = _profile_bound(profile, log_beta_hat, l_hat, crit, 1.0)
    return (0.0 if low == -math.inf else _exp(low)), (math.inf if high == math.inf else _exp(high))


def fit_weibull(failures, suspensions=(), confidence=DEFAULT_CONFIDENCE) -> WeibullFit:
    """Fit a two-parameter Weibull by maximum likelihood with right censoring.

    Parameters
    ----------
    failures : array_like
        Failure times, at least :data:`MIN_FAILURES`, each > 0 [time unit].
    suspensions : array_like, optional
        Suspension (right-censored) times: units still running or removed for another
        reason, each > 0 [time unit]. Default none.
    confidence : float, optional
        Two-sided confidence level of the bounds, 0 < confidence < 1 [-]. Default 0.90.

    Returns
    -------
    WeibullFit
        Shape, scale and B10 with likelihood-ratio bounds; times in the input unit. A bound
        the data cannot close is ``0.0`` (lower) or ``inf`` (upper).

    Raises
    ------
    ValueError
        Fewer than 2 failures, a time that is not positive and finite, a confidence outside
        (0, 1), or failures all equal with no longer suspension (unbounded shape).

    Notes
    -----
    With r failures :math:`t_i` and all n times :math:`t_j`, the log-likelihood is

    .. math:: \\ell(\\beta, \\eta) = r\\ln\\beta - r\\beta\\ln\\eta
              + (\\beta - 1)\\sum_{i\\le r}\\ln t_i - \\sum_{j\\le n}(t_j/\\eta)^\\beta .

    The MLE shape solves (Lawless 2003, ch. 5; solved by Brent's method in
    :math:`\\ln\\beta` on shifted log times)

    .. math:: \\frac{\\sum_j t_j^\\beta \\ln t_j}{\\sum_j t_j^\\beta} - \\frac{1}{\\beta}
              - \\frac{1}{r}\\sum_i \\ln t_i = 0,
              \\qquad \\hat\\eta^\\beta = \\frac{1}{r}\\sum_j t_j^\\beta .

    A bound on a parameter :math:`\\theta` solves
    :math:`2[\\ell(\\hat\\beta, \\hat\\eta) - \\ell_p(\\theta)] = \\chi^2_{1}(\\text{confidence})`
    with :math:`\\ell_p` the likelihood maximised over the other parameter. For B10 the
    likelihood is reparametrised by :math:`(\\beta, B_{10})` with
    :math:`\\eta = B_{10}\\,[-\\ln 0.9]^{-1/\\beta}`; at a fixed quantile the log-likelihood is
    concave in :math:`\\beta`, so its maximiser is the unique root of the score.

    References
    ----------
    Lawless, J. F., Statistical Models and Methods for Lifetime Data, 2nd ed., Wiley 2003,
    ch. 5 (maximum likelihood and likelihood-ratio intervals for the Weibull).
    Meeker, W. Q. and Escobar, L. A., Statistical Methods for Reliability Data, Wiley 1998,
    ch. 8 (likelihood-based confidence intervals, profile likelihood).
    """
    s = _sample(failures, suspensions)
    level = _confidence(confidence)
    crit = float(stats.chi2.ppf(level, 1))
    beta = _solve_shape(s)
    log_eta = _log_scale_given_shape(beta, s)
    l_hat = _log_lik(beta, log_eta, 1.0, s)
    shape_low, shape_high = _shape_bounds(s, beta, l_hat, crit)
    _, eta_low, eta_high = _quantile_bounds(s, beta, 1.0, crit)
    log_b10, b10_low, b10_high = _quantile_bounds(s, beta, -math.log1p(-B_LIFE_FRACTION), crit)
    return WeibullFit(
        shape=beta,
        scale=_time(log_eta, s),
        shape_low=shape_low,
        shape_high=shape_high,
        scale_low=_time(eta_low, s),
        scale_high=_time(eta_high, s),
        b10=_time(log_b10, s),
        b10_low=_time(b10_low, s),
        b10_high=_time(b10_high, s),
        failures=s.r,
        suspensions=s.u_all.size - s.r,
        confidence=level,
        method=INTERVAL_METHOD,
        log_likelihood=float(l_hat - s.sum_log_fail),
    )


def b_life_bounds(failures, suspensions=(), q=B_LIFE_FRACTION, confidence=DEFAULT_CONFIDENCE):
    """Maximum-likelihood B-lives and their likelihood-ratio bounds for several fractions.

    For the bound band of a probability plot: the same fit and bounds as
    :func:`fit_weibull`, for each fraction failed in ``q``.

    Parameters
    ----------
    failures, suspensions : array_like
        Failure and suspension times [time unit], as for :func:`fit_weibull`.
    q : array_like, optional
        Fractions failed, each strictly between 0 and 1 [-]. Default 0.10.
    confidence : float, optional
        Two-sided confidence level, 0 < confidence < 1 [-]. Default 0.90.

    Returns
    -------
    estimate, low, high : numpy.ndarray
        B-life estimates and two-sided bounds, shaped like ``q`` [time unit].

    Notes
    -----
    Each bound solves :math:`2[\\hat\\ell - \\ell_p(B_q)] = \\chi^2_1(\\text{confidence})`, the
    likelihood reparametrised by :math:`(\\beta, B_q)` as in :func:`fit_weibull`. The
    root search runs once per fraction (a scalar profile likelihood has no batched form).

    References
    ----------
    Meeker, W. Q. and Escobar, L. A., Statistical Methods for Reliability Data, Wiley 1998,
    ch. 8 (likelihood-based intervals for functions of parameters such as quantiles).
    """
    s = _sample(failures, suspensions)
    crit = float(stats.chi2.ppf(_confidence(confidence), 1))
    q_arr = np.asarray(q, dtype=float)
    if not np.all((q_arr > 0) & (q_arr < 1)):
        raise ValueError(f"q must hold fractions failed strictly between 0 and 1, got {q!r}")
    beta = _solve_shape(s)
    rows = [_quantile_bounds(s, beta, -math.log1p(-qi), crit) for qi in q_arr.ravel()]
    logs = np.array(rows, dtype=float).reshape(q_arr.shape + (3,)) + s.log_ref
    with np.errstate(over="ignore", under="ignore"):
        out = np.exp(logs)
    return out[..., 0], out[..., 1], out[..., 2]


def plotting_positions(failures, suspensions=(), method="johnson"):
    """Failure times and their empirical unreliability for a probability plot.

    Parameters
    ----------
    failures : array_like
        Failure times, at least one, each > 0 [time unit].
    suspensions : array_like, optional
        Suspension (right-censored) times, each > 0 [time unit]. Default none.
    method : {"johnson", "kaplan-meier"}, optional
        ``"johnson"`` (default): median ranks from Johnson's adjusted ranks with Bernard's
        approximation, one point per failure. ``"kaplan-meier"``: the product-limit
        estimate (scipy.stats.ecdf), one point per distinct failure time; it reaches 1
        when the longest time is a failure, a point a Weibull plot cannot show.

    Returns
    -------
    time : numpy.ndarray
        Failure times, ascending [time unit].
    unreliability : numpy.ndarray
        Estimated fraction failed at each time [-].

    Notes
    -----
    All n times are sorted, a failure before a suspension at a tie. For the j-th failure
    with reverse rank :math:`R_j` (number of units at or beyond it),

    .. math:: A_j = A_{j-1} + \\frac{n + 1 - A_{j-1}}{1 + R_j}, \\quad A_0 = 0,
              \\qquad F_j = \\frac{A_j - 0.3}{n + 0.4} .

    References
    ----------
    Johnson, L. G., The Statistical Treatment of Fatigue Experiments, Elsevier 1964
    (adjusted ranks for suspended items).
    Bernard, A. and Bos-Levenbach, E. C., The plotting of observations on probability
    paper, Statistica Neerlandica 7, 1953 (median-rank approximation).
    Kaplan, E. L. and Meier, P., Nonparametric estimation from incomplete observations,
    J. Am. Stat. Assoc. 53, 1958.
    """
    t_fail = _times(failures, "failures", 1)
    t_susp = _times(suspensions, "suspensions", 0)
    if method == "kaplan-meier":
        ecdf = stats.ecdf(stats.CensoredData(uncensored=t_fail, right=t_susp)).cdf
        keep = np.isin(ecdf.quantiles, t_fail)
        return ecdf.quantiles[keep], ecdf.probabilities[keep]
    if method != "johnson":
        raise ValueError(f"method must be one of {PLOTTING_METHODS}, got {method!r}")
    times = np.concatenate([t_fail, t_susp])
    is_fail = np.concatenate([np.ones(t_fail.size, bool), np.zeros(t_susp.size, bool)])
    order = np.lexsort((~is_fail, times))
    n = times.size
    reverse = (n - np.arange(n))[is_fail[order]]
    adjusted = np.empty(reverse.size)
    previous = 0.0
    for j, r_j in enumerate(reverse):  # a recurrence: each rank builds on the previous
        previous += (n + 1 - previous) / (1 + r_j)
        adjusted[j] = previous
    a = BERNARD_OFFSET
    return times[order][is_fail[order]], (adjusted - a) / (n + 1 - 2 * a)
