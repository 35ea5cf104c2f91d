"""Rolling-bearing rating life after ISO 281:2007.

Pure numpy functions: basic rating life L10 and L10h, the reliability factor a1, the
rated viscosity nu1, the viscosity ratio kappa, the life modification factor aISO and
the contamination factor eC (with a documented, configurable mapping from an ISO 4406
code to a cleanliness level).

All numbers here are estimates for planning. The bearing maker's data, the pump
maker's service limits and a qualified technician decide.
"""

from __future__ import annotations

import math

import numpy as np

from monitor.models.oil import parse_iso4406

BEARING_TYPES = ("ball", "roller")
"""Bearing types known to the model: radial ball and radial roller bearings."""

LIFE_EXPONENTS = {"ball": 3.0, "roller": 10.0 / 3.0}
"""Life exponent p of ``L10 = (C/P)^p`` per bearing type [-]. ISO 281:2007, Eq. (1)."""

RELIABILITY_RANGE_PCT = (90.0, 99.95)
"""Reliabilities [%] for which ISO 281:2007 gives the reliability factor a1."""

RELIABILITY_FACTOR_TABLE = (
    (90.0, 1.0),
    (95.0, 0.64),
    (96.0, 0.55),
    (97.0, 0.47),
    (98.0, 0.37),
    (99.0, 0.25),
    (99.2, 0.22),
    (99.4, 0.19),
    (99.6, 0.16),
    (99.8, 0.12),
    (99.9, 0.093),
    (99.92, 0.087),
    (99.94, 0.080),
    (99.95, 0.077),
)
"""(reliability S [%], a1 [-]) as printed in ISO 281:2007, table of the life
modification factor for reliability (two significant figures). :func:`reliability_factor`
returns these printed values at these reliabilities and the closed form between them."""

A_ISO_CAP = 50.0
"""Upper limit of the life modification factor aISO [-]. ISO 281:2007, clause 6.3."""

KAPPA_MAX = 4.0
"""Viscosity ratio above which kappa is taken as 4 [-]. ISO 281:2007, clause 6.3."""

KAPPA_MIN = 0.1
"""Viscosity ratio below which the aISO method does not apply [-]. ISO 281:2007."""

_AISO_CONSTANTS = {
    # kappa range: (ball K, roller K, exponent e); ISO 281:2007, Eqs. (6)-(9).
    "low": (2.2649, 1.3993, 0.054381),  # 0.1 <= kappa < 0.4
    "mid": (1.9987, 1.2348, 0.19087),  # 0.4 <= kappa < 1
    "high": (1.9987, 1.2348, 0.071739),  # 1 <= kappa <= 4
}

CLEANLINESS_LEVELS = (
    "extreme",
    "high",
    "normal",
    "slight",
    "typical",
    "severe",
    "very severe",
)
"""Cleanliness levels of the ISO 281:2007 contamination guide, cleanest first."""

CONTAMINATION_LEVEL_NAMES = {
    "extreme cleanliness": "extreme",
    "high cleanliness": "high",
    "normal cleanliness": "normal",
    "slight contamination": "slight",
    "typical contamination": "typical",
    "severe contamination": "severe",
    "very severe contamination": "very severe",
}
"""The ISO 281:2007 guide's descriptive names of the cleanliness levels (as a user chooses
them in the registry), cleanest first -> the short keys of :data:`CLEANLINESS_LEVELS`."""

DEFAULT_CONTAMINATION_LEVEL = "normal cleanliness"
"""Level used where the registry chooses none: the reference condition of
:func:`oil_life_factor`, so eC then neither raises nor lowers a_oil (a choice of this
project, common practice, no source)."""

CONTAMINATION_FACTOR_GUIDE = {
    # level: ((low, high) for dm < 100 mm, (low, high) for dm >= 100 mm)
    "extreme": ((1.0, 1.0), (1.0, 1.0)),
    "high": ((0.6, 0.8), (0.8, 0.9)),
    "normal": ((0.5, 0.6), (0.6, 0.8)),
    "slight": ((0.3, 0.5), (0.4, 0.6)),
    "typical": ((0.1, 0.3), (0.2, 0.4)),
    "severe": ((0.0, 0.1), (0.0, 0.1)),
    "very severe": ((0.0, 0.0), (0.0, 0.0)),
}
"""Contamination factor eC ranges [-] per cleanliness level and pitch-diameter class.

Source: ISO 281:2007, table of guide values for the contamination factor eC
(pitch diameter below 100 mm / 100 mm and above).
"""

REFERENCE_KAPPA = 1.0
"""Viscosity ratio of the reference oil condition for :func:`oil_life_factor` [-]."""

REFERENCE_CLEANLINESS = "normal"
"""ISO 281 cleanliness level of the reference oil condition for :func:`oil_life_factor`."""

ISO4406_CLEANLINESS_MAP = (
    (10, "high"),
    (12, "normal"),
    (14, "slight"),
    (16, "typical"),
    (18, "severe"),
    (99, "very severe"),
)
"""ASSUMPTION: ISO 4406 scale number at >= 14 um(c) -> ISO 281 cleanliness level.

Each pair is (largest >= 14 um scale number, level); the first pair whose number is
not exceeded applies. ISO 281 itself rates cleanliness by filtration and by diagrams
for selected codes, not by a single scale number; this mapping is a simplification
(common practice, no source; the pairing of -/13/10 with high, -/15/12 with normal,
-/17/14 with slight and -/19/16 with typical cleanliness follows the ISO 281:2007
diagrams for circulating oil with on-line filters, from memory). Pass your own
mapping to :func:`cleanliness_level_from_iso4406` to override it. The "extreme" level
(laboratory cleanliness) is never assigned from a code.
"""


def _check_bearing_type(bearing_type: str) -> None:
    if bearing_type not in BEARING_TYPES:
        raise ValueError(f"bearing_type must be one of {BEARING_TYPES}, got {bearing_type!r}")


def basic_rating_life_mrev(
    dynamic_load_kn: float | np.ndarray,
    load_kn: float | np.ndarray,
    bearing_type: str,
) -> np.ndarray:
    """Basic rating life L10 in millions of revolutions.

    Parameters
    ----------
    dynamic_load_kn : float or array
        Basic dynamic load rating C [kN].
    load_kn : float or array
        Dynamic equivalent load P [kN]; 0 gives ``inf``.
    bearing_type : {"ball", "roller"}
        Selects the life exponent.

    Returns
    -------
    numpy.ndarray
        L10 [10^6 revolutions]; ``inf`` for zero load, ``nan`` for a negative load.

    Notes
    -----
    ``L10 = (C / P)^p`` with ``p = 3`` for ball and ``p = 10/3`` for roller bearings.

    References
    ----------
    ISO 281:2007, Rolling bearings - Dynamic load ratings and rating life, Eq. (1).
    """
    _check_bearing_type(bearing_type)
    c = np.asarray(dynamic_load_kn, dtype=float)
    p = np.asarray(load_kn, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        life = (c / p) ** LIFE_EXPONENTS[bearing_type]
    return np.where(p < 0, np.nan, life)


def basic_rating_life_h(
    dynamic_load_kn: float | np.ndarray,
    load_kn: float | np.ndarray,
    speed_rpm: float | np.ndarray,
    bearing_type: str,
) -> np.ndarray:
    """Basic rating life L10h in operating hours.

    Parameters
    ----------
    dynamic_load_kn : float or array
        Basic dynamic load rating C [kN].
    load_kn : float or array
        Dynamic equivalent load P [kN].
    speed_rpm : float or array
        Rotational speed n [rpm]; 0 gives ``inf``.
    bearing_type : {"ball", "roller"}
        Selects the life exponent.

    Returns
    -------
    numpy.ndarray
        L10h [h]; ``nan`` for negative load or speed.

    Notes
    -----
    ``L10h = 10^6 / (60 n) * L10``.

    References
    ----------
    ISO 281:2007, Eq. (1) and the conversion to hours in clause 6.
    """
    l10 = basic_rating_life_mrev(dynamic_load_kn, load_kn, bearing_type)
    n = np.asarray(speed_rpm, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        hours = 1e6 / (60.0 * n) * l10
    return np.where(n < 0, np.nan, hours)


def reliability_factor(reliability_pct: float | np.ndarray) -> np.ndarray:
    """Life adjustment factor a1 for a reliability between 90 % and 99.95 %.

    Parameters
    ----------
    reliability_pct : float or array
        Reliability S, the percentage of bearings expected to reach the life [%].

    Returns
    -------
    numpy.ndarray
        a1 [-]: at the reliabilities the standard tabulates (90, 95, 96, 97, 98, 99,
        99.2, 99.4, 99.6, 99.8, 99.9, 99.92, 99.94, 99.95 %) the table's printed value
        (:data:`RELIABILITY_FACTOR_TABLE`, e.g. 0.25 at 99 %), between them the closed
        form below; 1.0 at 90 %.

    Raises
    ------
    ValueError
        If any value is outside 90-99.95 % (the standard gives no factor there).

    Notes
    -----
    Between the table points ``a1 = 0.95 (ln(100/S) / ln(100/90))^(2/3) + 0.05``. The
    printed table is this expression rounded to two significant figures, so the two
    differ by at most half a unit of the last printed digit (0.25 printed, 0.2477 by the
    formula at 99 %); a planner who asks for a tabulated reliability gets the number
    they can look up in the standard.

    References
    ----------
    ISO 281:2007, clause 6.2 and table of the life modification factor for reliability
    a1 (clause and table numbers from memory).
    """
    s = np.asarray(reliability_pct, dtype=float)
    lo, hi = RELIABILITY_RANGE_PCT
    if np.any(~np.isfinite(s)) or np.any((s < lo) | (s > hi)):
        raise ValueError(
            f"reliability_pct must be between {lo} and {hi} % (ISO 281 gives no a1 "
            f"outside that range), got {reliability_pct!r}"
        )
    a1 = 0.95 * (np.log(100.0 / s) / math.log(100.0 / 90.0)) ** (2.0 / 3.0) + 0.05
    for pct, printed in RELIABILITY_FACTOR_TABLE:
        a1 = np.where(s == pct, printed, a1)
    return a1


def rated_viscosity_mm2s(
    speed_rpm: float | np.ndarray, pitch_diameter_mm: float | np.ndarray
) -> np.ndarray:
    """Rated (reference) viscosity nu1 needed for adequate lubrication.

    Parameters
    ----------
    speed_rpm : float or array
        Rotational speed n [rpm]; must be > 0 for a finite result.
    pitch_diameter_mm : float or array
        Bearing pitch diameter dm [mm].

    Returns
    -------
    numpy.ndarray
        nu1 [mm2/s]; ``inf`` at zero speed, ``nan`` for negative inputs.

    Notes
    -----
    ``nu1 = 45000 n^-0.83 dm^-0.5`` for ``n < 1000`` rpm and
    ``nu1 = 4500 n^-0.5 dm^-0.5`` for ``n >= 1000`` rpm.

    References
    ----------
    ISO 281:2007, clause 6.3.3 (rated viscosity), Eqs. (12) and (13).
    """
    n = np.asarray(speed_rpm, dtype=float)
    dm = np.asarray(pitch_diameter_mm, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        slow = 45000.0 * n**-0.83 * dm**-0.5
        fast = 4500.0 * n**-0.5 * dm**-0.5
    nu1 = np.where(n < 1000.0, slow, fast)
    return np.where((n < 0) | (dm <= 0), np.nan, nu1)


def viscosity_ratio(
    viscosity_mm2s: float | np.ndarray, rated_viscosity: float | np.ndarray
) -> np.ndarray:
    """Viscosity ratio kappa = nu / nu1 with the standard's clamps.

    Parameters
    ----------
    viscosity_mm2s : float or array
        Actual kinematic viscosity at operating temperature nu [mm2/s].
    rated_viscosity : float or array
        Rated viscosity nu1 [mm2/s], see :func:`rated_viscosity_mm2s`.

    Returns
    -------
    numpy.ndarray
        kappa [-]: values above 4 are returned as 4 (the standard's cap); values below
        0.1, where the aISO method does not apply, are returned as ``nan``.

    Notes
    -----
    ``kappa = nu / nu1``; ``kappa > 4 -> 4``; ``kappa < 0.1 -> nan``.

    References
    ----------
    ISO 281:2007, clause 6.3.3.
    """
    nu = np.asarray(viscosity_mm2s, dtype=float)
    nu1 = np.asarray(rated_viscosity, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        kappa = nu / nu1
    kappa = np.minimum(kappa, KAPPA_MAX)
    return np.where(kappa < KAPPA_MIN, np.nan, kappa)


def life_modification_factor(
    kappa: float | np.ndarray, x: float | np.ndarray, bearing_type: str
) -> np.ndarray:
    """Life modification factor aISO for radial ball and radial roller bearings.

    Parameters
    ----------
    kappa : float or array
        Viscosity ratio [-], 0.1-4 (see :func:`viscosity_ratio`).
    x : float or array
        ``eC * Cu / P`` [-]: contamination factor times fatigue load limit over
        equivalent load; ``inf`` (no load) gives the cap.
    bearing_type : {"ball", "roller"}
        Radial ball or radial roller bearing.

    Returns
    -------
    numpy.ndarray
        aISO [-], capped at 50; ``nan`` where kappa is outside 0.1-4 or nan, or x < 0.

    Notes
    -----
    Ball: ``aISO = 0.1 (1 - (2.5671 - K / kappa^e)^0.83 x^(1/3))^-9.3``;
    roller: ``aISO = 0.1 (1 - (1.5859 - K / kappa^e) x^0.4)^-9.185``, with K and e per
    kappa range (0.1-0.4, 0.4-1, 1-4). A bracket at or below zero means the life is
    unbounded and gives the cap of 50. The term in kappa is floored at 0: with the
    published (rounded) constants it dips to about -1e-4 at kappa = 0.1, which would
    otherwise give aISO slightly below 0.1 falling with x.

    References
    ----------
    ISO 281:2007, clause 6.3.2, Eqs. (6)-(9) (radial ball and radial roller bearings).
    """
    _check_bearing_type(bearing_type)
    k = np.asarray(kappa, dtype=float)
    xx = np.asarray(x, dtype=float)
    ranges = [k < 0.4, k < 1.0]
    low, mid, high = (_AISO_CONSTANTS[r] for r in ("low", "mid", "high"))
    k_ball = np.select(ranges, [low[0], mid[0]], high[0])
    k_roll = np.select(ranges, [low[1], mid[1]], high[1])
    e = np.select(ranges, [low[2], mid[2]], high[2])
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        if bearing_type == "ball":
            base = np.maximum(2.5671 - k_ball / k**e, 0.0)
            bracket = 1.0 - base**0.83 * xx ** (1.0 / 3.0)
            exponent = -9.3
        else:
            bracket = 1.0 - np.maximum(1.5859 - k_roll / k**e, 0.0) * xx**0.4
            exponent = -9.185
        a = np.where(bracket > 0, 0.1 * np.abs(bracket) ** exponent, A_ISO_CAP)
        a = np.where(np.isnan(bracket) & np.isinf(xx), A_ISO_CAP, a)
    a = np.minimum(a, A_ISO_CAP)
    bad = ~((k >= KAPPA_MIN) & (k <= KAPPA_MAX)) | (xx < 0) | np.isnan(xx)
    return np.where(bad, np.nan, a)


def contamination_factor(level: str, pitch_diameter_mm: float, *, position: float = 0.5) -> float:
    """Contamination factor eC from a cleanliness level of the ISO 281 guide.

    Parameters
    ----------
    level : str
        One of :data:`CLEANLINESS_LEVELS`.
    pitch_diameter_mm : float
        Bearing pitch diameter dm [mm]; selects the column (< 100 mm or >= 100 mm).
    position : float, default 0.5
        Where in the guide's range to take the value [-]: 0 the lower (more cautious)
        end, 1 the upper end, 0.5 the middle.

    Returns
    -------
    float
        eC [-].

    Notes
    -----
    ``eC = low + position * (high - low)`` over the guide's range for the level.

    References
    ----------
    ISO 281:2007, guide values for the contamination factor eC (see
    :data:`CONTAMINATION_FACTOR_GUIDE`).
    """
    if level not in CONTAMINATION_FACTOR_GUIDE:
        raise ValueError(f"level must be one of {CLEANLINESS_LEVELS}, got {level!r}")
    if not (0.0 <= position <= 1.0):
        raise ValueError(f"position must be between 0 and 1, got {position!r}")
    if not (pitch_diameter_mm > 0):
        raise ValueError(f"pitch_diameter_mm must be > 0 mm, got {pitch_diameter_mm!r}")
    low, high = CONTAMINATION_FACTOR_GUIDE[level][0 if pitch_diameter_mm < 100 else 1]
    return low + position * (high - low)


def cleanliness_level_from_iso4406(
    code: str, *, mapping: tuple[tuple[int, str], ...] = ISO4406_CLEANLINESS_MAP
) -> str:
    """Cleanliness level for an ISO 4406 code (a documented assumption).

    Parameters
    ----------
    code : str
        ISO 4406 code such as ``"18/16/13"`` or ``"-/15/12"``.
    mapping : tuple of (int, str), default :data:`ISO4406_CLEANLINESS_MAP`
        Pairs (largest >= 14 um scale number, level) in ascending order.

    Returns
    -------
    str
        One of :data:`CLEANLINESS_LEVELS`.

    Notes
    -----
    Only the >= 14 um(c) scale number (the last number) is used; see
    :data:`ISO4406_CLEANLINESS_MAP` for why this is an assumption.

    References
    ----------
    ISO 4406:2021 (code); ISO 281:2007 (levels); the mapping is common practice.
    """
    r14 = parse_iso4406(code)[2]
    for limit, level in mapping:
        if level not in CONTAMINATION_FACTOR_GUIDE:
            raise ValueError(f"mapping level must be one of {CLEANLINESS_LEVELS}, got {level!r}")
        if r14 <= limit:
            return level
    raise ValueError(
        f"mapping does not cover the >= 14 um scale number {r14} of code {code!r}; "
        "end it with a pair whose number is 29 or more"
    )


def contamination_factor_from_iso4406(
    code: str,
    pitch_diameter_mm: float,
    *,
    mapping: tuple[tuple[int, str], ...] = ISO4406_CLEANLINESS_MAP,
    position: float = 0.5,
) -> float:
    """Contamination factor eC for an ISO 4406 code (via an assumed level mapping).

    Parameters
    ----------
    code : str
        ISO 4406 code, e.g. ``"18/16/13"``.
    pitch_diameter_mm : float
        Bearing pitch diameter dm [mm].
    mapping : tuple of (int, str), optional
        Scale-number-to-level mapping, see :func:`cleanliness_level_from_iso4406`.
    position : float, default 0.5
        Position within the guide range, see :func:`contamination_factor`.

    Returns
    -------
    float
        eC [-].

    Notes
    -----
    ``eC = guide(level(R14), dm)``.

    References
    ----------
    ISO 281:2007 eC guide; ISO 4406:2021; mapping: :data:`ISO4406_CLEANLINESS_MAP`.
    """
    level = cleanliness_level_from_iso4406(code, mapping=mapping)
    return contamination_factor(level, pitch_diameter_mm, position=position)


def _per_upload_like(value: object, shape: tuple) -> np.ndarray:
    """Scalar, (N,) per upload, or an array that broadcasts with ``shape``."""
    v = np.asarray(value, dtype=float)
    if v.ndim == 1 and len(shape) > 1 and v.shape[0] == shape[0]:
        return v.reshape((shape[0],) + (1,) * (len(shape) - 1))
    return v


def oil_life_factor(
    dp_bar: np.ndarray,
    speed_rpm: np.ndarray,
    *,
    bearing_type: str,
    pitch_diameter_mm: float,
    fatigue_limit_kn: float,
    load_at_rated_kn: float,
    rated_dp_bar: float,
    viscosity_mm2s: float | np.ndarray,
    contamination_ec: float | np.ndarray,
    reference_kappa: float = REFERENCE_KAPPA,
    reference_ec: float | None = None,
) -> np.ndarray:
    """Oil-condition life factor a_oil per band, relative to the reference condition.

    Parameters
    ----------
    dp_bar, speed_rpm : array
        Band differential pressure [bar] and speed [rpm], e.g. from
        :func:`monitor.models.spectrum.band_conditions_1d`.
    bearing_type : {"ball", "roller"}
        Radial ball or radial roller bearing.
    pitch_diameter_mm : float
        Bearing pitch diameter dm [mm].
    fatigue_limit_kn : float
        Fatigue load limit Cu [kN].
    load_at_rated_kn : float
        Equivalent bearing load at the rated pressure P_R [kN].
    rated_dp_bar : float
        Rated differential pressure dp_R [bar].
    viscosity_mm2s : float or array
        Oil viscosity at operating temperature [mm2/s]: scalar, per upload (N,), or
        broadcasting with ``dp_bar``.
    contamination_ec : float or array
        Contamination factor eC of the oil as sampled [-], same shapes as above.
    reference_kappa : float, default 1.0
        Viscosity ratio of the reference condition [-].
    reference_ec : float, optional
        eC of the reference condition [-]; default the middle of the ISO 281 guide
        range for "normal" cleanliness at this pitch diameter (0.55 below 100 mm).

    Returns
    -------
    numpy.ndarray
        a_oil [-], broadcast shape; 1.0 at the rated point in the reference condition.
        ``nan`` where kappa is below 0.1 (outside the ISO 281 method), e.g. at zero
        speed; callers should treat such bands as unknown, not as undamaged.

    Notes
    -----
    ``a_oil = aISO(kappa_i, eC Cu / P_i) / aISO(kappa_ref, eC_ref Cu / P_R)`` with
    ``P_i = P_R dp_i / dp_R`` and ``kappa_i = nu / nu1(n_i, dm)``. The maker's rated life
    is assumed to hold in the reference condition (kappa 1, normal cleanliness).

    References
    ----------
    ISO 281:2007, clause 6.3 (aISO, kappa, eC); design brief, "Life model v1".
    """
    for name, value in (
        ("pitch_diameter_mm", pitch_diameter_mm),
        ("fatigue_limit_kn", fatigue_limit_kn),
        ("load_at_rated_kn", load_at_rated_kn),
        ("rated_dp_bar", rated_dp_bar),
        ("reference_kappa", reference_kappa),
    ):
        if not (np.isfinite(value) and value > 0):
            raise ValueError(f"{name} must be a finite number > 0, got {value!r}")
    dp = np.asarray(dp_bar, dtype=float)
    ref_ec = (
        contamination_factor(REFERENCE_CLEANLINESS, pitch_diameter_mm)
        if (reference_ec is None)
        else reference_ec
    )
    ref = life_modification_factor(
        reference_kappa, ref_ec * fatigue_limit_kn / load_at_rated_kn, bearing_type
    )
    nu = _per_upload_like(viscosity_mm2s, dp.shape)
    ec = _per_upload_like(contamination_ec, dp.shape)
    with np.errstate(divide="ignore", invalid="ignore"):
        kappa = viscosity_ratio(nu, rated_viscosity_mm2s(speed_rpm, pitch_diameter_mm))
        x = ec * fatigue_limit_kn / (load_at_rated_kn * dp / rated_dp_bar)
    return life_modification_factor(kappa, x, bearing_type) / ref
