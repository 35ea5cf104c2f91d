"""Oil properties: ISO 3448 grades, ASTM D341 viscosity line, viscosity index, ISO 4406.

Pure numpy/scipy functions. Kinematic viscosity is in [mm2/s] (cSt), temperature in
[degC] unless a name says otherwise, particle counts per millilitre [1/mL].
"""

from __future__ import annotations

import math

import numpy as np

# fmt: off
ISO_VG_GRADES = (2, 3, 5, 7, 10, 15, 22, 32, 46, 68, 100, 150, 220, 320, 460, 680, 1000, 1500,
                 2200, 3200)
# fmt: on
"""ISO viscosity grades: midpoint kinematic viscosity at 40 degC [mm2/s].

Source: ISO 3448:1992, Industrial liquid lubricants - ISO viscosity classification,
Table 1. Each grade allows +-10 % around its midpoint.
"""

ISO_VG_TOLERANCE = 0.10
"""Relative half-width of an ISO viscosity grade [-]. ISO 3448:1992, Table 1."""

WALTHER_OFFSET_MM2S = 0.7
"""Constant added to the viscosity in the ASTM D341 (Walther) relation [mm2/s]."""

ISO4406_UPPER_LIMITS = (
    0.01, 0.02, 0.04, 0.08, 0.16, 0.32, 0.64, 1.3, 2.5, 5.0, 10.0, 20.0, 40.0, 80.0,
    160.0, 320.0, 640.0, 1300.0, 2500.0, 5000.0, 10000.0, 20000.0, 40000.0, 80000.0,
    160000.0, 320000.0, 640000.0, 1300000.0, 2500000.0,
)  # fmt: skip
"""Upper limit (up to and including) of ISO 4406 scale numbers 0-28 [particles/mL].

Source: ISO 4406:2021 (and 1999), Table 1, allocation of scale numbers. Scale number R
covers counts above the limit of R - 1 up to and including the limit of R. The limits
are rounded in the standard, so they are tabulated rather than computed as 0.01 * 2^R.
"""

ISO4406_ABOVE_28 = 29
"""Scale number used internally for a count above 2 500 000 /mL, written ``">28"``."""

_D2270_NU100 = np.concatenate(
    [np.arange(20, 201) / 10.0, np.arange(101, 151) / 5.0, np.arange(61, 141) / 2.0]
)
"""Kinematic viscosities at 100 degC of the ASTM D2270 Table 1 rows [mm2/s]:
2.0-20.0 in steps of 0.1, 20.2-30.0 in steps of 0.2, 30.5-70.0 in steps of 0.5."""

# ASTM D2270-10 Table 1, basic values L and H [mm2/s] for the rows of _D2270_NU100,
# as transcribed in the open-source `chemicals` package (MIT licence); cross-checked
# in tests against the three worked examples of ASTM D2270.
# fmt: off
_D2270_L = (
    7.994, 8.64, 9.309, 10.0, 10.71, 11.45, 12.21, 13.0, 13.8, 14.63, 15.49, 16.36, 17.26,
    18.18, 19.12, 20.09, 21.08, 22.09, 23.13, 24.19, 25.32, 26.5, 27.75, 29.07, 30.48, 31.96,
    33.52, 35.13, 36.79, 38.5, 40.23, 41.99, 43.76, 45.53, 47.31, 49.09, 50.87, 52.64, 54.42,
    56.2, 57.97, 59.74, 61.52, 63.32, 65.18, 67.12, 69.16, 71.29, 73.48, 75.72, 78.0, 80.25,
    82.39, 84.53, 86.66, 88.85, 91.04, 93.2, 95.43, 97.72, 100.0, 102.3, 104.6, 106.9, 109.2,
    111.5, 113.9, 116.2, 118.5, 120.9, 123.3, 125.7, 128.0, 130.4, 132.8, 135.3, 137.7, 140.1,
    142.7, 145.2, 147.7, 150.3, 152.9, 155.4, 158.0, 160.6, 163.2, 165.8, 168.5, 171.2, 173.9,
    176.6, 179.4, 182.1, 184.9, 187.6, 190.4, 193.3, 196.2, 199.0, 201.9, 204.8, 207.8, 210.7,
    213.6, 216.6, 219.6, 222.6, 225.7, 228.8, 231.9, 235.0, 238.1, 241.2, 244.3, 247.4, 250.6,
    253.8, 257.0, 260.1, 263.3, 266.6, 269.8, 273.0, 276.3, 279.6, 283.0, 286.4, 289.7, 293.0,
    296.5, 300.0, 303.4, 306.9, 310.3, 313.9, 317.5, 321.1, 324.6, 328.3, 331.9, 335.5, 339.2,
    342.9, 346.6, 350.3, 354.1, 358.0, 361.7, 365.6, 369.4, 373.3, 377.1, 381.0, 384.9, 388.9,
    392.7, 396.7, 400.7, 404.6, 408.6, 412.6, 416.7, 420.7, 424.9, 429.0, 433.2, 437.3, 441.5,
    445.7, 449.9, 454.2, 458.4, 462.7, 467.0, 471.3, 475.7, 479.7, 483.9, 488.6, 493.2, 501.5,
    510.8, 519.9, 528.8, 538.4, 547.5, 556.7, 566.4, 575.6, 585.2, 595.0, 604.3, 614.2, 624.1,
    633.6, 643.4, 653.8, 663.3, 673.7, 683.9, 694.5, 704.2, 714.9, 725.7, 736.5, 747.2, 758.2,
    769.3, 779.7, 790.4, 801.6, 812.8, 824.1, 835.5, 847.0, 857.5, 869.0, 880.6, 892.3, 904.1,
    915.8, 927.6, 938.6, 951.2, 963.4, 975.4, 987.1, 998.9, 1011.0, 1023.0, 1055.0, 1086.0,
    1119.0, 1151.0, 1184.0, 1217.0, 1251.0, 1286.0, 1321.0, 1356.0, 1391.0, 1427.0, 1464.0,
    1501.0, 1538.0, 1575.0, 1613.0, 1651.0, 1691.0, 1730.0, 1770.0, 1810.0, 1851.0, 1892.0,
    1935.0, 1978.0, 2021.0, 2064.0, 2108.0, 2152.0, 2197.0, 2243.0, 2288.0, 2333.0, 2380.0,
    2426.0, 2473.0, 2521.0, 2570.0, 2618.0, 2667.0, 2717.0, 2767.0, 2817.0, 2867.0, 2918.0,
    2969.0, 3020.0, 3073.0, 3126.0, 3180.0, 3233.0, 3286.0, 3340.0, 3396.0, 3452.0, 3507.0,
    3563.0, 3619.0, 3676.0, 3734.0, 3792.0, 3850.0, 3908.0, 3966.0, 4026.0, 4087.0, 4147.0,
    4207.0, 4268.0, 4329.0, 4392.0, 4455.0, 4517.0, 4580.0, 4645.0, 4709.0, 4773.0, 4839.0,
    4905.0,
)
_D2270_H = (
    6.394, 6.894, 7.41, 7.944, 8.496, 9.063, 9.647, 10.25, 10.87, 11.5, 12.15, 12.82, 13.51,
    14.21, 14.93, 15.66, 16.42, 17.19, 17.97, 18.77, 19.56, 20.37, 21.21, 22.05, 22.92, 23.81,
    24.71, 25.63, 26.57, 27.53, 28.49, 29.46, 30.43, 31.4, 32.37, 33.34, 34.32, 35.29, 36.26,
    37.23, 38.19, 39.17, 40.15, 41.13, 42.14, 43.18, 44.24, 45.33, 46.44, 47.51, 48.57, 49.61,
    50.69, 51.78, 52.88, 53.98, 55.09, 56.2, 57.31, 58.45, 59.6, 60.74, 61.89, 63.05, 64.18,
    65.32, 66.48, 67.64, 68.79, 69.94, 71.1, 72.27, 73.42, 74.57, 75.73, 76.91, 78.08, 79.27,
    80.46, 81.67, 82.87, 84.08, 85.3, 86.51, 87.72, 88.95, 90.19, 91.4, 92.65, 93.92, 95.19,
    96.45, 97.71, 98.97, 100.2, 101.5, 102.8, 104.1, 105.4, 106.7, 108.0, 109.4, 110.7, 112.0,
    113.3, 114.7, 116.0, 117.4, 118.7, 120.1, 121.5, 122.9, 124.2, 125.6, 127.0, 128.4, 129.8,
    131.2, 132.6, 134.0, 135.4, 136.8, 138.2, 139.6, 141.0, 142.4, 143.9, 145.3, 146.8, 148.2,
    149.7, 151.2, 152.6, 154.1, 155.6, 157.0, 158.6, 160.1, 161.6, 163.1, 164.6, 166.1, 167.7,
    169.2, 170.7, 172.3, 173.8, 175.4, 177.0, 178.6, 180.2, 181.7, 183.3, 184.9, 186.5, 188.1,
    189.7, 191.3, 192.9, 194.6, 196.2, 197.8, 199.4, 201.0, 202.6, 204.3, 205.9, 207.6, 209.3,
    211.0, 212.7, 214.4, 216.1, 217.7, 219.4, 221.1, 222.8, 224.5, 226.2, 227.7, 229.5, 233.0,
    236.4, 240.1, 243.5, 247.1, 250.7, 254.2, 257.8, 261.5, 264.9, 268.6, 272.3, 275.8, 279.6,
    283.3, 286.8, 290.5, 294.4, 297.9, 301.8, 305.6, 309.4, 313.0, 317.0, 320.9, 324.9, 328.8,
    332.7, 336.7, 340.5, 344.4, 348.4, 352.3, 356.4, 360.5, 364.6, 368.3, 372.3, 376.4, 380.6,
    384.6, 388.8, 393.0, 396.6, 401.1, 405.3, 409.5, 413.5, 417.6, 421.7, 432.4, 443.2, 454.0,
    464.9, 475.9, 487.0, 498.1, 509.6, 521.1, 532.5, 544.0, 555.6, 567.1, 579.3, 591.3, 603.1,
    615.0, 627.1, 639.2, 651.8, 664.2, 676.6, 689.1, 701.9, 714.9, 728.2, 741.3, 754.4, 767.6,
    780.9, 794.5, 808.2, 821.9, 835.5, 849.2, 863.0, 876.9, 890.9, 905.3, 919.6, 933.6, 948.2,
    962.9, 977.5, 992.1, 1007.0, 1021.0, 1036.0, 1051.0, 1066.0, 1082.0, 1097.0, 1112.0,
    1127.0, 1143.0, 1159.0, 1175.0, 1190.0, 1206.0, 1222.0, 1238.0, 1254.0, 1270.0, 1286.0,
    1303.0, 1319.0, 1336.0, 1352.0, 1369.0, 1386.0, 1402.0, 1419.0, 1436.0, 1454.0, 1471.0,
    1488.0, 1506.0, 1523.0, 1541.0, 1558.0,
)
# fmt: on


def iso_vg_limits_mm2s(iso_vg: float) -> tuple[float, float]:
    """Lower and upper kinematic viscosity at 40 degC of an ISO viscosity grade.

    Parameters
    ----------
    iso_vg : float
        ISO viscosity grade, one of :data:`ISO_VG_GRADES` [mm2/s at 40 degC].

    Returns
    -------
    tuple of float
        (minimum, maximum) kinematic viscosity at 40 degC [mm2/s].

    Notes
    -----
    ``limits = VG * (1 -+ 0.10)``.

    References
    ----------
    ISO 3448:1992, Table 1.
    """
    if iso_vg not in ISO_VG_GRADES:
        raise ValueError(
            f"iso_vg must be one of the ISO 3448 grades {ISO_VG_GRADES}, got {iso_vg!r}"
        )
    return (iso_vg * (1.0 - ISO_VG_TOLERANCE), iso_vg * (1.0 + ISO_VG_TOLERANCE))


def iso_vg_of(nu40_mm2s: float) -> int | None:
    """ISO viscosity grade whose band contains a 40 degC viscosity, or None.

    Parameters
    ----------
    nu40_mm2s : float
        Kinematic viscosity at 40 degC [mm2/s].

    Returns
    -------
    int or None
        The grade [mm2/s], or None if the viscosity falls between grade bands.

    Notes
    -----
    A grade matches if ``0.9 VG <= nu40 <= 1.1 VG``.

    References
    ----------
    ISO 3448:1992, Table 1.
    """
    for grade in ISO_VG_GRADES:
        low, high = iso_vg_limits_mm2s(grade)
        if low <= nu40_mm2s <= high:
            return grade
    return None


def walther_coefficients(
    temp1_c: float, nu1_mm2s: float, temp2_c: float, nu2_mm2s: float
) -> tuple[float, float]:
    """Coefficients A and B of the ASTM D341 viscosity-temperature line through two points.

    Parameters
    ----------
    temp1_c, temp2_c : float
        Temperatures of the two points [degC]; must differ.
    nu1_mm2s, nu2_mm2s : float
        Kinematic viscosities at those temperatures [mm2/s]; must be > 0.

    Returns
    -------
    tuple of float
        (A, B) [-] of ``log10(log10(nu + 0.7)) = A - B log10(T)``, T in kelvin.

    Notes
    -----
    With ``w = log10(log10(nu + 0.7))`` and ``t = log10(T + 273.15)``:
    ``B = (w1 - w2) / (t2 - t1)``, ``A = w1 + B t1``. The simple 0.7 offset is the
    form of D341 for viscosities of about 2 mm2/s and above; below that the standard adds
    correction terms that are not applied here.

    References
    ----------
    ASTM D341-20, Standard practice for viscosity-temperature equations and charts for
    liquid petroleum or hydrocarbon products, Eqs. (1)-(2).
    """
    if temp1_c == temp2_c:
        raise ValueError(f"temp1_c and temp2_c must differ, both are {temp1_c!r} degC")
    for name, nu in (("nu1_mm2s", nu1_mm2s), ("nu2_mm2s", nu2_mm2s)):
        if not (nu > 0):
            raise ValueError(f"{name} must be a viscosity > 0 mm2/s, got {nu!r}")
    for name, t in (("temp1_c", temp1_c), ("temp2_c", temp2_c)):
        if not (t > -273.15):
            raise ValueError(f"{name} must be above absolute zero (-273.15 degC), got {t!r}")
    w1 = math.log10(math.log10(nu1_mm2s + WALTHER_OFFSET_MM2S))
    w2 = math.log10(math.log10(nu2_mm2s + WALTHER_OFFSET_MM2S))
    t1 = math.log10(temp1_c + 273.15)
    t2 = math.log10(temp2_c + 273.15)
    b = (w1 - w2) / (t2 - t1)
    return (w1 + b * t1, b)


def walther_viscosity_mm2s(temp_c: float | np.ndarray, a: float, b: float) -> np.ndarray:
    """Kinematic viscosity from an ASTM D341 line at given temperatures.

    Parameters
    ----------
    temp_c : float or array
        Oil temperature [degC]; nan stays nan.
    a, b : float
        Line coefficients from :func:`walther_coefficients` [-].

    Returns
    -------
    numpy.ndarray
        Kinematic viscosity [mm2/s]; ``nan`` at or below absolute zero.

    Notes
    -----
    ``nu = 10^(10^(A - B log10(T + 273.15))) - 0.7``.

    References
    ----------
    ASTM D341-20, Eqs. (1)-(2).
    """
    t_k = np.asarray(temp_c, dtype=float) + 273.15
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        nu = 10.0 ** (10.0 ** (a - b * np.log10(t_k))) - WALTHER_OFFSET_MM2S
    return np.where(t_k > 0, nu, np.nan)


def temperature_at_viscosity_c(
    viscosity_mm2s: float | np.ndarray, a: float, b: float
) -> np.ndarray:
    """Temperature at which an ASTM D341 line reaches a kinematic viscosity.

    Parameters
    ----------
    viscosity_mm2s : float or array
        Kinematic viscosity [mm2/s], > 0.
    a, b : float
        Line coefficients from :func:`walther_coefficients` [-].

    Returns
    -------
    numpy.ndarray
        Temperature [degC]; ``nan`` for a viscosity at or below 0.3 mm2/s (outside the
        line's form).

    Notes
    -----
    ``T = 10^((A - log10(log10(nu + 0.7))) / B) - 273.15``, the inverse of
    :func:`walther_viscosity_mm2s`.

    References
    ----------
    ASTM D341-20, Eqs. (1)-(2).
    """
    nu = np.asarray(viscosity_mm2s, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        w = np.log10(np.log10(nu + WALTHER_OFFSET_MM2S))
        return 10.0 ** ((a - w) / b) - 273.15


def viscosity_index(nu40_mm2s: float | np.ndarray, nu100_mm2s: float | np.ndarray) -> np.ndarray:
    """Viscosity index from kinematic viscosities at 40 and 100 degC.

    Parameters
    ----------
    nu40_mm2s : float or array
        Kinematic viscosity at 40 degC, U [mm2/s].
    nu100_mm2s : float or array
        Kinematic viscosity at 100 degC, Y [mm2/s]; the method needs Y >= 2.

    Returns
    -------
    numpy.ndarray
        Viscosity index [-], unrounded; ``nan`` for Y < 2 or non-positive U.

    Notes
    -----
    L and H by linear interpolation in Table 1 for 2 <= Y <= 70, otherwise
    ``L = 0.8353 Y^2 + 14.67 Y - 216``, ``H = 0.1684 Y^2 + 11.85 Y - 97``.
    For U >= H (VI <= 100): ``VI = 100 (L - U) / (L - H)``; for U < H (VI > 100):
    ``N = (log10 H - log10 U) / log10 Y``, ``VI = (10^N - 1) / 0.00715 + 100``.

    References
    ----------
    ASTM D2270-10, Standard practice for calculating viscosity index from kinematic
    viscosity at 40 and 100 degC, Table 1 and Eqs. (1)-(5); identical method in
    ISO 2909:2002.
    """
    u = np.asarray(nu40_mm2s, dtype=float)
    y = np.asarray(nu100_mm2s, dtype=float)
    table_l = np.interp(y, _D2270_NU100, _D2270_L)
    table_h = np.interp(y, _D2270_NU100, _D2270_H)
    big = y > 70.0
    low_l = np.where(big, (0.8353 * y + 14.67) * y - 216.0, table_l)
    high_h = np.where(big, (0.1684 * y + 11.85) * y - 97.0, table_h)
    with np.errstate(divide="ignore", invalid="ignore"):
        vi_low = 100.0 * (low_l - u) / (low_l - high_h)
        n = (np.log10(high_h) - np.log10(u)) / np.log10(y)
        vi_high = (10.0**n - 1.0) / 0.00715 + 100.0
    vi = np.where(u >= high_h, vi_low, vi_high)
    return np.where((y >= 2.0) & (u > 0), vi, np.nan)


def nu100_for_viscosity_index(nu40_mm2s: float, viscosity_index_target: float) -> float:
    """Kinematic viscosity at 100 degC that gives an oil a stated viscosity index.

    Parameters
    ----------
    nu40_mm2s : float
        Kinematic viscosity at 40 degC [mm2/s], e.g. the ISO VG midpoint.
    viscosity_index_target : float
        Wanted viscosity index [-].

    Returns
    -------
    float
        Kinematic viscosity at 100 degC [mm2/s].

    Raises
    ------
    ValueError
        If no viscosity between 2 mm2/s and ``nu40_mm2s`` gives that index.

    Notes
    -----
    Solves ``VI(nu40, Y) = target`` for Y with Brent's method; VI rises with Y.

    References
    ----------
    ASTM D2270-10 (the index); Brent (1973) via ``scipy.optimize.brentq``.
    """
    if not (nu40_mm2s > 2.0):
        raise ValueError(f"nu40_mm2s must be a viscosity above 2 mm2/s, got {nu40_mm2s!r}")

    def gap(y: float) -> float:
        return float(viscosity_index(nu40_mm2s, y)) - viscosity_index_target

    lo, hi = 2.0, nu40_mm2s * (1.0 - 1e-9)
    if not (gap(lo) <= 0.0 <= gap(hi)):
        raise ValueError(
            f"viscosity_index_target {viscosity_index_target!r} cannot be reached by an oil "
            f"of {nu40_mm2s} mm2/s at 40 degC with 2 mm2/s or more at 100 degC"
        )
    from scipy.optimize import brentq  # loaded when first needed (0.3 s or more)

    return float(brentq(gap, lo, hi, xtol=1e-10, rtol=1e-12))


def line_nu100_mm2s(
    iso_vg: float | None = None,
    viscosity_index: float | None = None,
    nu40_mm2s: float | None = None,
    nu100_mm2s: float | None = None,
) -> float | None:
    """The 100 degC viscosity [mm2/s] that :func:`oil_line_from_spec` puts an oil's line
    through: the given one, else the one its viscosity index gives at its 40 degC
    viscosity (:func:`nu100_for_viscosity_index`).

    Parameters are those of :func:`oil_line_from_spec`. Returns None when neither is
    known or the index cannot be reached; the line then fails as it would without this.

    Notes
    -----
    Found once when a registry is imported and stored with the oil, so that a status
    does not solve for it (and load ``scipy.optimize``) in every process. Passing the
    stored value back as ``nu100_mm2s`` gives :func:`oil_line_from_spec` the same float,
    so the same line.
    """
    if nu100_mm2s is not None:
        return float(nu100_mm2s)
    nu40 = nu40_mm2s if nu40_mm2s is not None else iso_vg
    if nu40 is None or viscosity_index is None:
        return None
    try:
        return nu100_for_viscosity_index(float(nu40), viscosity_index)
    except ValueError:
        return None


def oil_line_from_spec(
    iso_vg: float | None = None,
    viscosity_index: float | None = None,
    nu40_mm2s: float | None = None,
    nu100_mm2s: float | None = None,
) -> tuple[float, float]:
    """ASTM D341 line coefficients of an oil given by grade and index or by two viscosities.

    Parameters
    ----------
    iso_vg : float, optional
        ISO viscosity grade; its midpoint stands for the 40 degC viscosity [mm2/s].
    viscosity_index : float, optional
        Viscosity index [-]; used to find the 100 degC viscosity if that is not given.
    nu40_mm2s : float, optional
        Measured 40 degC viscosity [mm2/s]; takes precedence over ``iso_vg`` but must
        lie within that grade when both are given.
    nu100_mm2s : float, optional
        Measured 100 degC viscosity [mm2/s]; takes precedence over ``viscosity_index``.

    Returns
    -------
    tuple of float
        (A, B) for :func:`walther_viscosity_mm2s`.

    Notes
    -----
    ``nu40 = nu40_mm2s or VG``; ``nu100 = nu100_mm2s or Y(VI)``; line through
    (40 degC, nu40) and (100 degC, nu100).

    References
    ----------
    ISO 3448:1992; ASTM D2270-10; ASTM D341-20.
    """
    if iso_vg is not None:
        limits = iso_vg_limits_mm2s(iso_vg)
        if nu40_mm2s is not None and not (limits[0] <= nu40_mm2s <= limits[1]):
            raise ValueError(
                f"nu40_mm2s {nu40_mm2s} lies outside ISO VG {iso_vg} "
                f"({limits[0]:g}-{limits[1]:g} mm2/s); correct one of them"
            )
    nu40 = nu40_mm2s if nu40_mm2s is not None else iso_vg
    if nu40 is None:
        raise ValueError("give iso_vg or nu40_mm2s for the oil's 40 degC viscosity")
    if nu100_mm2s is not None:
        nu100 = nu100_mm2s
    elif viscosity_index is not None:
        nu100 = nu100_for_viscosity_index(float(nu40), viscosity_index)
    else:
        raise ValueError("give viscosity_index or nu100_mm2s for the oil's 100 degC viscosity")
    return walther_coefficients(40.0, float(nu40), 100.0, float(nu100))


def iso4406_scale_number(count_per_ml: float | np.ndarray) -> np.ndarray:
    """ISO 4406 scale number for particle counts per millilitre.

    Parameters
    ----------
    count_per_ml : float or array
        Cumulative particle count at one size [particles/mL]; must be >= 0.

    Returns
    -------
    numpy.ndarray of int
        Scale number 0-28, or :data:`ISO4406_ABOVE_28` (29) above 2 500 000 /mL. A
        count exactly on a limit stays in the lower number; a count of 0 gives 0.

    Notes
    -----
    ``R = min{r : count <= upper(r)}`` over :data:`ISO4406_UPPER_LIMITS`.

    References
    ----------
    ISO 4406:2021, Table 1.
    """
    counts = np.asarray(count_per_ml, dtype=float)
    if np.any(np.isnan(counts)) or np.any(counts < 0):
        raise ValueError(f"count_per_ml must be particle counts >= 0 per mL, got {count_per_ml!r}")
    return np.searchsorted(np.asarray(ISO4406_UPPER_LIMITS), counts, side="left")


def format_iso4406(r4: int | None, r6: int, r14: int) -> str:
    """Write an ISO 4406 code from its three scale numbers.

    Parameters
    ----------
    r4 : int or None
        Scale number at >= 4 um(c); None for a microscope count ("-").
    r6, r14 : int
        Scale numbers at >= 6 um(c) and >= 14 um(c); 29 is written ``">28"``.

    Returns
    -------
    str
        Code such as ``"18/16/13"`` or ``"-/15/12"``.

    Notes
    -----
    Scale numbers are joined with ``/``.

    References
    ----------
    ISO 4406:2021, clause 4 (code format).
    """
    parts = []
    for name, r in (("r4", r4), ("r6", r6), ("r14", r14)):
        if r is None and name == "r4":
            parts.append("-")
            continue
        if not isinstance(r, int | np.integer) or not (0 <= r <= ISO4406_ABOVE_28):
            raise ValueError(f"{name} must be a scale number 0-29 (29 = '>28'), got {r!r}")
        parts.append(">28" if r == ISO4406_ABOVE_28 else str(int(r)))
    return "/".join(parts)


def parse_iso4406(code: str) -> tuple[int | None, int, int]:
    """Read an ISO 4406 code into its scale numbers.

    Parameters
    ----------
    code : str
        ``"R4/R6/R14"`` such as ``"18/16/13"``; ``"-"`` for R4 from microscope counts
        (``"-/15/12"``); ``">28"`` for a scale number above 28.

    Returns
    -------
    tuple
        (R4 or None, R6, R14); a ``">28"`` number is returned as 29.

    Raises
    ------
    ValueError
        If the code is not three slash-separated scale numbers 0-28 (or ``>28``).

    Notes
    -----
    Whitespace around the numbers is ignored.

    References
    ----------
    ISO 4406:2021, clause 4.
    """
    expected = "expected three scale numbers 0-28 like '18/16/13', '-/15/12' or '>28/20/14'"
    parts = [p.strip() for p in str(code).split("/")]
    if len(parts) != 3:
        raise ValueError(f"ISO 4406 code {code!r}: {expected}")
    numbers: list[int | None] = []
    for i, part in enumerate(parts):
        if part == "-" and i == 0:
            numbers.append(None)
        elif part == ">28":
            numbers.append(ISO4406_ABOVE_28)
        elif part.isdigit() and int(part) <= 28:
            numbers.append(int(part))
        else:
            raise ValueError(f"ISO 4406 code {code!r}: part {part!r} is not valid; {expected}")
    r4, r6, r14 = numbers
    assert r6 is not None and r14 is not None
    return (r4, r6, r14)


def iso4406_code_from_counts(
    count_4um_per_ml: float | None, count_6um_per_ml: float, count_14um_per_ml: float
) -> str:
    """ISO 4406 code from cumulative particle counts per millilitre.

    Parameters
    ----------
    count_4um_per_ml : float or None
        Particles >= 4 um(c) per mL; None or nan for microscope counts (gives ``"-"``).
    count_6um_per_ml : float
        Particles >= 6 um(c) per mL.
    count_14um_per_ml : float
        Particles >= 14 um(c) per mL.

    Returns
    -------
    str
        The code, e.g. ``"19/17/12"``.

    Notes
    -----
    Each count is placed with :func:`iso4406_scale_number`. Counts are cumulative, so
    they must not rise with particle size.

    References
    ----------
    ISO 4406:2021, Table 1 and clause 4.
    """
    c4 = None if count_4um_per_ml is None or math.isnan(count_4um_per_ml) else count_4um_per_ml
    sizes = [c for c in (c4, count_6um_per_ml, count_14um_per_ml) if c is not None]
    if any(a < b for a, b in zip(sizes, sizes[1:], strict=False)):
        raise ValueError(
            "particle counts must be cumulative (>= 4 um >= 6 um >= 14 um per mL), got "
            f"{count_4um_per_ml!r}/{count_6um_per_ml!r}/{count_14um_per_ml!r}"
        )
    r4 = None if c4 is None else int(iso4406_scale_number(c4))
    return format_iso4406(
        r4,
        int(iso4406_scale_number(count_6um_per_ml)),
        int(iso4406_scale_number(count_14um_per_ml)),
    )
