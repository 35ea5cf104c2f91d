"""Model against field: Weibull fits of the fleet's own component lives.

Given one row per component life (ended by a rebuild or replacement, or still running),
fit a two-parameter Weibull per component model (and optionally per site) in two modes:

``bearing``
    Basis: the consumed life fraction (Palmgren–Miner sum at the 90 % reliability
    reference) at the end of the life, or now for a running life. Failures: lives ended
    for reason ``failure``. For a model whose rating matches the field, the B10 of this
    fraction is 1.0; the observed B10 is the suggested life factor for the rating.
``wear_limit``
    Basis: operating hours. Failures: lives ended for reason ``wear_limit``.

In either mode every other life -- running, or ended for another reason -- is a
suspension (right-censored) at its value. Pure pandas/numpy, no database.

A suggested factor is an estimate from the fleet's history; the maker's ratings and
service limits and a qualified engineer decide whether to accept it.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd

from monitor.domain.vocabulary import MISSING_REASON, SERVICE_REASONS
from monitor.models.weibull import b_life_bounds, fit_weibull, plotting_positions

REASONS = SERVICE_REASONS
"""Why a life ended: bearing or rotating-group failure found, case-drain wear limit
reached, taken out while still serviceable, anything else."""

MODES = {"bearing": ("consumed_fraction", "failure"), "wear_limit": ("operating_h", "wear_limit")}
"""Fitted modes: mode -> (basis column, reason that counts as a failure)."""

FACTOR_MODE = "bearing"
"""The mode whose observed B10 (in consumed-fraction units) is the suggested life factor."""

MIN_FAILURES_FIT = 2
"""Fewest failures for which a two-parameter Weibull is fitted."""

MIN_FAILURES_FACTOR = 3
"""Fewest failures for which a life factor is suggested (common practice, no source)."""

DEFAULT_CONFIDENCE = 0.90
"""Default two-sided confidence level of the bounds [-]."""

ALL_SITES = None
"""Value of the ``site`` column when the fleet is not split by site."""

LIVES_COLUMNS = ("component_model", "site", "reason", "ended", "consumed_fraction", "operating_h")
"""Columns the lives table must have (extra columns are ignored)."""

CALIBRATION_COLUMNS = (
    "component_model",
    "site",
    "mode",
    "basis",
    "failures",
    "suspensions",
    "shape",
    "scale",
    "shape_low",
    "shape_high",
    "scale_low",
    "scale_high",
    "b10",
    "b10_low",
    "b10_high",
    "suggested_life_factor",
    "suggested_low",
    "suggested_high",
    "note",
)
"""Columns of :func:`calibration_table`, in order."""

_FIT_FIELDS = CALIBRATION_COLUMNS[6:15]


def _plural(count: int, word: str) -> str:
    return f"{count} {word}" if count == 1 else f"{count} {word}s"


def check_lives(lives: pd.DataFrame) -> pd.DataFrame:
    """Validate a lives table and return a clean copy.

    Parameters
    ----------
    lives : pandas.DataFrame
        One row per component life with the columns :data:`LIVES_COLUMNS`: ``ended``
        (bool), ``reason`` (one of :data:`REASONS` for an ended life; ignored for a
        running one; missing counts as :data:`MISSING_REASON`), ``consumed_fraction``
        [-] and ``operating_h`` [h] (numbers; missing values allowed).

    Returns
    -------
    pandas.DataFrame
        The columns of :data:`LIVES_COLUMNS`, ``ended`` as bool, numbers as float.

    Raises
    ------
    ValueError
        A missing column, an ``ended`` value that is not true/false, a number column that
        is not numeric, or an unknown reason on an ended life.
    """
    if not isinstance(lives, pd.DataFrame):
        raise ValueError(f"lives must be a pandas DataFrame, got {type(lives).__name__}")
    missing = [c for c in LIVES_COLUMNS if c not in lives.columns]
    if missing:
        raise ValueError(f"lives is missing column(s) {missing}; expected {list(LIVES_COLUMNS)}")
    out = lives.loc[:, list(LIVES_COLUMNS)].copy()
    ended = out["ended"]
    if not ended.isin([True, False]).all():
        raise ValueError("lives column `ended` must hold true or false for every life")
    out["ended"] = ended.astype(bool)
    for col in ("consumed_fraction", "operating_h"):
        try:
            out[col] = pd.to_numeric(out[col], errors="raise").astype(float)
        except (TypeError, ValueError):
            raise ValueError(f"lives column `{col}` must hold numbers") from None
    reason = out["reason"].astype(object).where(out["reason"].notna(), MISSING_REASON)
    unknown = sorted({str(r) for r in reason[out["ended"]] if r not in REASONS})
    if unknown:
        raise ValueError(f"lives column `reason` holds {unknown}; valid reasons: {REASONS}")
    out["reason"] = reason
    return out


def mode_sample(lives: pd.DataFrame, mode: str) -> tuple[np.ndarray, np.ndarray, int]:
    """Failure and suspension values of one mode, for a fit or a probability plot.

    Parameters
    ----------
    lives : pandas.DataFrame
        A table as accepted by :func:`check_lives` (already checked).
    mode : {"bearing", "wear_limit"}
        Which failures to count; see :data:`MODES`.

    Returns
    -------
    failures : numpy.ndarray
        Basis values of the lives ended for the mode's reason [basis unit].
    suspensions : numpy.ndarray
        Basis values of every other life: running, or ended for another reason.
    left_out : int
        Lives whose basis value is missing, non-finite or not positive; not used.
    """
    if mode not in MODES:
        raise ValueError(f"mode must be one of {tuple(MODES)}, got {mode!r}")
    basis, reason = MODES[mode]
    values = lives[basis].to_numpy(dtype=float)
    with np.errstate(invalid="ignore"):
        usable = np.isfinite(values) & (values > 0)
    is_fail = lives["ended"].to_numpy(dtype=bool) & (lives["reason"] == reason).to_numpy()
    return values[usable & is_fail], values[usable & ~is_fail], int((~usable).sum())


def _mode_row(lives: pd.DataFrame, mode: str, confidence: float) -> dict:
    """One table row: counts, fit and suggestion for one group and mode."""
    failures, suspensions, left_out = mode_sample(lives, mode)
    basis = MODES[mode][0]
    row = dict.fromkeys(_FIT_FIELDS, math.nan)
    row.update(mode=mode, basis=basis, failures=failures.size, suspensions=suspensions.size)
    notes = []
    if left_out:
        notes.append(f"{_plural(left_out, 'life')} without a positive {basis} left out")
    fitted = False
    if failures.size < MIN_FAILURES_FIT:
        notes.append(
            f"no fit: {_plural(failures.size, 'failure')}, a fit needs at least {MIN_FAILURES_FIT}"
        )
    else:
        try:
            fit = fit_weibull(failures, suspensions, confidence)
        except ValueError as exc:
            notes.append(f"no fit: {exc}")
        else:
            row.update({k: float(getattr(fit, k)) for k in _FIT_FIELDS})
            fitted = True
    row.update(suggested_life_factor=None, suggested_low=None, suggested_high=None)
    if mode != FACTOR_MODE:
        notes.append(f"life factor from the {FACTOR_MODE} mode only")
    elif failures.size < MIN_FAILURES_FACTOR:
        notes.append(
            f"no life factor: {_plural(failures.size, 'failure')}, a suggestion needs at "
            f"least {MIN_FAILURES_FACTOR}"
        )
    elif fitted:
        row.update(
            suggested_life_factor=row["b10"],
            suggested_low=row["b10_low"],
            suggested_high=row["b10_high"],
        )
    row["note"] = "; ".join(notes)
    return row


def calibration_table(
    lives: pd.DataFrame, by_site: bool = False, confidence: float = DEFAULT_CONFIDENCE
) -> pd.DataFrame:
    """Model against field: a Weibull fit per component model (and site) and mode.

    Parameters
    ----------
    lives : pandas.DataFrame
        One row per component life; see :func:`check_lives`.
    by_site : bool, optional
        Split each component model by ``site``. Default False: all sites together,
        ``site`` = :data:`ALL_SITES`.
    confidence : float, optional
        Two-sided confidence level of the bounds, 0 < confidence < 1 [-]. Default 0.90.

    Returns
    -------
    pandas.DataFrame
        Columns :data:`CALIBRATION_COLUMNS`, one row per group and mode (``bearing``
        first), sorted by component model and site. ``shape`` [-], ``scale`` and ``b10``
        with bounds [basis unit: consumed fraction or h]; NaN where there is no fit.
        ``suggested_life_factor`` with bounds [-]: the bearing-mode B10 when at least
        :data:`MIN_FAILURES_FACTOR` failures, else None. ``note`` says why a value is
        missing and how many lives were left out.

    Notes
    -----
    The consumed fraction is the Palmgren–Miner sum :math:`D = \\sum n_i / L_{10,i}` at
    the 90 % reliability reference, so a rating that matches the field gives an observed
    B10 of D equal to 1; multiplying the rated life by the observed B10 calibrates it.
    The fits and likelihood-ratio bounds are those of
    :func:`monitor.models.weibull.fit_weibull`.

    References
    ----------
    Lawless, J. F., Statistical Models and Methods for Lifetime Data, 2nd ed., Wiley 2003,
    ch. 5 (Weibull maximum likelihood with censoring).
    ISO 281:2007, clause 5 (basic rating life L10 at 90 % reliability).
    """
    try:
        level = float(confidence)
    except (TypeError, ValueError):
        level = math.nan
    if not 0.0 < level < 1.0:
        raise ValueError(f"confidence must be a level strictly between 0 and 1, got {confidence!r}")
    clean = check_lives(lives)
    keys = ["component_model", "site"] if by_site else ["component_model"]
    rows = []
    for key, group in clean.groupby(keys, sort=True, dropna=False):
        model = key[0]
        site = key[1] if by_site else ALL_SITES
        for mode in MODES:
            rows.append({"component_model": model, "site": site, **_mode_row(group, mode, level)})
    return pd.DataFrame(rows, columns=list(CALIBRATION_COLUMNS))


def table_records(table: pd.DataFrame) -> list[dict]:
    """Rows of :func:`calibration_table` as plain dicts, NaN as None (JSON-ready)."""

    def plain(value):
        if isinstance(value, (float, np.floating)):
            return None if math.isnan(value) else float(value)
        if isinstance(value, np.integer):
            return int(value)
        return None if value is pd.NA else value

    return [
        {col: plain(value) for col, value in zip(CALIBRATION_COLUMNS, row, strict=True)}
        for row in table.loc[:, list(CALIBRATION_COLUMNS)].itertuples(index=False)
    ]


PLOT_FRACTIONS = tuple(float(q) for q in np.round(np.geomspace(0.01, 0.9, 24), 6))
"""Fractions failed at which the fitted line and its bounds are drawn [-]."""


def probability_frames(
    lives: pd.DataFrame, mode: str, confidence: float = DEFAULT_CONFIDENCE
) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Points and fitted line of a Weibull probability plot of one group and mode.

    Parameters
    ----------
    lives : pandas.DataFrame
        The lives of one component model (and site); see :func:`check_lives`.
    mode : {"bearing", "wear_limit"}
        Which failures to plot; see :data:`MODES`.
    confidence : float, optional
        Two-sided confidence level of the bounds, 0 < confidence < 1 [-].

    Returns
    -------
    points : pandas.DataFrame
        ``value`` [basis unit] and ``unreliability`` [-] of each failure, by Johnson's
        adjusted ranks with Bernard's approximation (suspensions respected); empty
        without failures.
    line : pandas.DataFrame
        ``unreliability`` [-] at :data:`PLOT_FRACTIONS`, the maximum-likelihood B-life
        ``value`` and its likelihood-ratio bounds ``low`` and ``high`` [basis unit];
        empty with fewer than :data:`MIN_FAILURES_FIT` failures.

    References
    ----------
    Johnson, L. G., The Statistical Treatment of Fatigue Experiments, Elsevier 1964.
    Meeker, W. Q. and Escobar, L. A., Statistical Methods for Reliability Data, Wiley
    1998, ch. 6 (probability plotting) and ch. 8 (likelihood-based intervals).
    """
    failures, suspensions, _ = mode_sample(check_lives(lives), mode)
    points = pd.DataFrame({"value": [], "unreliability": []}, dtype=float)
    line = pd.DataFrame({"unreliability": [], "value": [], "low": [], "high": []}, dtype=float)
    if failures.size:
        t, f = plotting_positions(failures, suspensions)
        points = pd.DataFrame({"value": t, "unreliability": f})
    if failures.size >= MIN_FAILURES_FIT:
        q = np.array(PLOT_FRACTIONS)
        try:
            est, low, high = b_life_bounds(failures, suspensions, q, confidence)
        except ValueError:
            return points, line
        line = pd.DataFrame({"unreliability": q, "value": est, "low": low, "high": high})
    return points, line
