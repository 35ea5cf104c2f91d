"""Consumed bearing life of logged load spectra (Palmgren-Miner over pressure bands).

Implements "Life model v1" of the design brief: each band's life is scaled from the
maker's rated point by ``L_i = L_R (dp_R / dp_i)^p (n_R / n_i)`` and an upload's damage
is ``D = sum t_i / (a L_i)``. All functions are vectorised over a batch of uploads:
one call handles thousands of histograms, with no Python loop per histogram.

The results are estimates for planning; the pump maker's service limits and qualified
technicians decide when a unit is rebuilt.
"""

from __future__ import annotations

import numpy as np

BAND_PRESSURE_CHOICES = ("midpoint", "upper")
"""Which pressure stands for a histogram band: its midpoint (default) or upper edge."""

DEFAULT_LIFE_EXPONENT = 10.0 / 3.0
"""Life exponent p for roller bearings [-]; ISO 281:2007, Eq. (1)."""


def _check_choice(band_pressure: str) -> None:
    if band_pressure not in BAND_PRESSURE_CHOICES:
        raise ValueError(
            f"band_pressure must be one of {BAND_PRESSURE_CHOICES}, got {band_pressure!r}"
        )


def _check_rating(
    rated_life_h: float, rated_dp_bar: float, rated_speed_rpm: float, life_exponent: float
) -> None:
    for name, value in (
        ("rated_life_h", rated_life_h),
        ("rated_dp_bar", rated_dp_bar),
        ("rated_speed_rpm", rated_speed_rpm),
        ("life_exponent", life_exponent),
    ):
        if not (np.isfinite(value) and value > 0):
            raise ValueError(f"{name} must be a finite number > 0, got {value!r}")


def band_pressure_bar(
    pressure_low_bar: np.ndarray, pressure_high_bar: np.ndarray, band_pressure: str = "midpoint"
) -> np.ndarray:
    """Pressure that stands for each band: midpoint or upper edge.

    Parameters
    ----------
    pressure_low_bar, pressure_high_bar : array
        Band edges, high-side gauge pressure [bar].
    band_pressure : {"midpoint", "upper"}, default "midpoint"
        Which pressure represents the band.

    Returns
    -------
    numpy.ndarray
        Band pressure [bar], broadcast shape of the edges.

    Notes
    -----
    ``p_i = (p_low + p_high) / 2`` or ``p_i = p_high``. The choice changes damage a
    lot (about 40 % in a typical spectrum), so it is a setting.

    References
    ----------
    Design brief, "Life model v1"; the life law follows from ISO 281:2007, Eq. for the basic rating
    life, with bearing load proportional to pressure.
    """
    _check_choice(band_pressure)
    low = np.asarray(pressure_low_bar, dtype=float)
    high = np.asarray(pressure_high_bar, dtype=float)
    return 0.5 * (low + high) if band_pressure == "midpoint" else high + 0.0 * low


def band_dp_bar(
    pressure_low_bar: np.ndarray,
    pressure_high_bar: np.ndarray,
    *,
    low_side_bar: float | np.ndarray = 0.0,
    band_pressure: str = "midpoint",
) -> np.ndarray:
    """Differential pressure of each band over the loop's low (charge) side.

    Parameters
    ----------
    pressure_low_bar, pressure_high_bar : array
        Band edges, high-side gauge pressure [bar].
    low_side_bar : float or array, default 0
        Low-side (charge) pressure p_L [bar]; an array must broadcast with the edges.
    band_pressure : {"midpoint", "upper"}, default "midpoint"
        Which pressure represents the band.

    Returns
    -------
    numpy.ndarray
        ``dp_i`` [bar], never negative; nan edges give nan.

    Notes
    -----
    ``dp_i = max(0, p_i - p_L)``.

    References
    ----------
    Design brief, "Life model v1".
    """
    p = band_pressure_bar(pressure_low_bar, pressure_high_bar, band_pressure)
    return np.fmax(p - np.asarray(low_side_bar, dtype=float), 0.0) + 0.0 * p


def band_life_h(
    dp_bar: float | np.ndarray,
    speed_rpm: float | np.ndarray,
    *,
    rated_life_h: float,
    rated_dp_bar: float,
    rated_speed_rpm: float,
    life_exponent: float = DEFAULT_LIFE_EXPONENT,
) -> np.ndarray:
    """Bearing L10 life of a drive running steadily at one pressure and speed.

    Parameters
    ----------
    dp_bar : float or array
        Differential pressure over the low side [bar]; 0 gives ``inf``.
    speed_rpm : float or array
        Shaft speed [rpm]; 0 gives ``inf``.
    rated_life_h : float
        Rated L10 life L_R at the rated point [h].
    rated_dp_bar : float
        Differential pressure of the rated point dp_R [bar].
    rated_speed_rpm : float
        Speed of the rated point n_R [rpm].
    life_exponent : float, default 10/3
        Life exponent p [-] (10/3 roller, 3 ball bearings).

    Returns
    -------
    numpy.ndarray
        Life L_i [h]; ``nan`` for negative pressure or speed.

    Notes
    -----
    ``L_i = L_R (dp_R / dp_i)^p (n_R / n_i)``: bearing load proportional to pressure at
    full displacement, and life in hours inversely proportional to speed.

    References
    ----------
    ISO 281:2007, basic rating life L10 = (C/P)^p, with load proportional to pressure.
    """
    _check_rating(rated_life_h, rated_dp_bar, rated_speed_rpm, life_exponent)
    dp = np.asarray(dp_bar, dtype=float)
    n = np.asarray(speed_rpm, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        life = rated_life_h * (rated_dp_bar / dp) ** life_exponent * (rated_speed_rpm / n)
    return np.where((dp < 0) | (n < 0), np.nan, life)


def _hours_batch(hours: np.ndarray, ndim: int) -> tuple[np.ndarray, bool]:
    """Hours as a batch (leading axis N) and whether a single histogram was given."""
    h = np.asarray(hours, dtype=float)
    if h.ndim == ndim - 1:
        return h[np.newaxis], True
    if h.ndim != ndim:
        raise ValueError(
            f"hours must have shape (N, {', '.join('BPS'[: ndim - 1])}) for a batch or one "
            f"histogram without the leading axis, got shape {h.shape}"
        )
    if not np.all(np.isfinite(h)) or np.any(h < 0):
        raise ValueError("hours must be finite and >= 0 in every band (padding bands: 0)")
    return h, False


def _per_upload(value: object, name: str, n: int, ndim: int) -> np.ndarray:
    """A scalar or (N,) argument reshaped to broadcast against a (N, ...) batch."""
    v = np.asarray(value, dtype=float)
    if v.ndim == 0:
        return v
    if v.shape != (n,):
        raise ValueError(f"{name} must be a scalar or have shape ({n},), got {v.shape}")
    return v.reshape((n,) + (1,) * (ndim - 1))


def _life_factor(value: object, hours_shape: tuple, given_shape: tuple) -> np.ndarray:
    """Life factor as a scalar, per upload (N,) or per band (the shape of ``hours``)."""
    a = np.asarray(value, dtype=float)
    if a.ndim == 0:
        out = a
    elif a.shape == given_shape:
        out = a.reshape(hours_shape)
    elif a.shape == hours_shape[:1]:
        out = a.reshape(hours_shape[:1] + (1,) * (len(hours_shape) - 1))
    else:
        raise ValueError(
            f"life_factor must be a scalar, shape {hours_shape[:1]} (per upload) or "
            f"{given_shape} (per band), got {a.shape}"
        )
    if np.any(a <= 0):
        raise ValueError("life_factor must be > 0 (a1 * a_oil)")
    return out


def _check_edges(name: str, low: np.ndarray, high: np.ndarray, active: np.ndarray) -> None:
    """Edges of bands with hours must be finite, non-negative and ascending."""
    low_b, high_b = np.broadcast_to(low, active.shape), np.broadcast_to(high, active.shape)
    with np.errstate(invalid="ignore"):
        bad = active & ~(
            np.isfinite(low_b) & np.isfinite(high_b) & (high_b >= low_b) & (low_b >= 0)
        )
    if np.any(bad):
        raise ValueError(
            f"{name} edges of bands with hours must be finite, >= 0 and low <= high "
            f"({int(bad.sum())} band(s) are not)"
        )


def _miner_sum(
    hours, dp, speed, life_factor, rated_life_h, rated_dp_bar, rated_speed_rpm, life_exponent
) -> np.ndarray:
    """``sum t (dp/dp_R)^p (n/n_R) / (a L_R)`` over all but the first axis."""
    with np.errstate(invalid="ignore", over="ignore"):
        rel = (dp / rated_dp_bar) ** life_exponent * (speed / rated_speed_rpm)
        active = (hours > 0) & (dp > 0) & (speed > 0)
        terms = np.where(active, hours * rel / (life_factor * rated_life_h), 0.0)
    return terms.reshape(terms.shape[0], -1).sum(axis=1)


def band_speed_1d_rpm(
    mean_speed_rpm: float | np.ndarray | None, n_uploads: int, rated_speed_rpm: float
) -> np.ndarray:
    """Speed of every band of 1-D histograms: the upload's mean speed, else rated speed.

    Parameters
    ----------
    mean_speed_rpm : float, array (N,) or None
        Mean shaft speed of each upload [rpm]; None or nan means not given.
    n_uploads : int
        Number of uploads N.
    rated_speed_rpm : float
        Rated speed n_R [rpm], used where no mean speed is given.

    Returns
    -------
    numpy.ndarray
        Speed [rpm], shape (N, 1) to broadcast over bands.

    Notes
    -----
    ``n_i = mean speed if given else n_R``.

    References
    ----------
    Design brief, "Life model v1".
    """
    if mean_speed_rpm is None:
        return np.full((n_uploads, 1), float(rated_speed_rpm))
    speed = np.broadcast_to(
        _per_upload(mean_speed_rpm, "mean_speed_rpm", n_uploads, 1), (n_uploads,)
    )
    if np.any(speed < 0) or np.any(np.isinf(speed)):
        raise ValueError("mean_speed_rpm must be >= 0 and finite, or nan for 'not given'")
    return np.where(np.isnan(speed), float(rated_speed_rpm), speed)[:, np.newaxis]


def damage_1d(
    pressure_low_bar: np.ndarray,
    pressure_high_bar: np.ndarray,
    hours: np.ndarray,
    *,
    rated_life_h: float,
    rated_dp_bar: float,
    rated_speed_rpm: float,
    life_exponent: float = DEFAULT_LIFE_EXPONENT,
    low_side_bar: float = 0.0,
    mean_speed_rpm: float | np.ndarray | None = None,
    life_factor: float | np.ndarray = 1.0,
    band_pressure: str = "midpoint",
) -> np.ndarray:
    """Palmgren-Miner damage of a batch of time-at-pressure histograms.

    Parameters
    ----------
    pressure_low_bar, pressure_high_bar : array (N, B) or (B,)
        Band edges, high-side gauge pressure [bar]; (B,) is shared by all uploads.
        Edges of bands with zero hours (padding) may be nan.
    hours : array (N, B), or (B,) for one histogram
        Hours in each band [h]; >= 0.
    rated_life_h, rated_dp_bar, rated_speed_rpm : float
        Rated point: L10 life [h], differential pressure [bar], speed [rpm].
    life_exponent : float, default 10/3
        Life exponent p [-].
    low_side_bar : float, default 0
        Low-side (charge) pressure [bar].
    mean_speed_rpm : float, array (N,) or None
        Mean speed of each upload [rpm]; None or nan: rated speed.
    life_factor : float, array (N,) or array like ``hours``
        Life factor ``a = a1 * a_oil`` [-], see :func:`monitor.models.bearings.oil_life_factor`.
    band_pressure : {"midpoint", "upper"}, default "midpoint"
        Which pressure represents a band.

    Returns
    -------
    numpy.ndarray
        Damage D [-] per upload, shape (N,) (shape () for a single histogram); 1.0 means
        the rated L10 life is used up. ``nan`` where a band with hours has a nan factor.

    Notes
    -----
    ``D = sum_i t_i / (a L_i)``, ``L_i = L_R (dp_R / dp_i)^p (n_R / n_i)``,
    ``dp_i = max(0, p_i - p_L)``. A band with zero hours, zero dp or zero speed adds 0.

    References
    ----------
    Palmgren (1924), Miner (1945); ISO 281:2007, Eq. (1); design brief, "Life model v1".
    """
    _check_rating(rated_life_h, rated_dp_bar, rated_speed_rpm, life_exponent)
    h, single = _hours_batch(hours, 2)
    low, high = np.asarray(pressure_low_bar, float), np.asarray(pressure_high_bar, float)
    _check_edges("pressure", low, high, h > 0)
    dp = np.broadcast_to(
        band_dp_bar(low, high, low_side_bar=low_side_bar, band_pressure=band_pressure), h.shape
    )
    speed = band_speed_1d_rpm(mean_speed_rpm, h.shape[0], rated_speed_rpm)
    a = _life_factor(life_factor, h.shape, np.shape(hours))
    d = _miner_sum(h, dp, speed, a, rated_life_h, rated_dp_bar, rated_speed_rpm, life_exponent)
    return d[0] if single else d


def damage_2d(
    pressure_low_bar: np.ndarray,
    pressure_high_bar: np.ndarray,
    speed_low_rpm: np.ndarray,
    speed_high_rpm: np.ndarray,
    hours: np.ndarray,
    *,
    rated_life_h: float,
    rated_dp_bar: float,
    rated_speed_rpm: float,
    life_exponent: float = DEFAULT_LIFE_EXPONENT,
    low_side_bar: float = 0.0,
    life_factor: float | np.ndarray = 1.0,
    band_pressure: str = "midpoint",
) -> np.ndarray:
    """Palmgren-Miner damage of a batch of pressure-by-speed time matrices.

    Parameters
    ----------
    pressure_low_bar, pressure_high_bar : array (N, P) or (P,)
        Pressure band edges [bar].
    speed_low_rpm, speed_high_rpm : array (N, S) or (S,)
        Speed band edges [rpm]; the band speed is always the midpoint.
    hours : array (N, P, S), or (P, S) for one matrix
        Hours in each cell [h].
    rated_life_h, rated_dp_bar, rated_speed_rpm, life_exponent, low_side_bar
        As in :func:`damage_1d`.
    life_factor : float, array (N,) or array like ``hours``
        Life factor ``a = a1 * a_oil`` [-].
    band_pressure : {"midpoint", "upper"}, default "midpoint"
        Which pressure represents a pressure band.

    Returns
    -------
    numpy.ndarray
        Damage D [-] per upload, shape (N,) (shape () for a single matrix).

    Notes
    -----
    ``D = sum_ij t_ij / (a L_ij)``, ``L_ij = L_R (dp_R / dp_i)^p (n_R / n_j)`` with
    ``n_j`` the speed band midpoint.

    References
    ----------
    Palmgren (1924), Miner (1945); ISO 281:2007, Eq. (1); design brief, "Life model v1".
    """
    _check_rating(rated_life_h, rated_dp_bar, rated_speed_rpm, life_exponent)
    h, single = _hours_batch(hours, 3)
    p_low, p_high = np.asarray(pressure_low_bar, float), np.asarray(pressure_high_bar, float)
    s_low, s_high = np.asarray(speed_low_rpm, float), np.asarray(speed_high_rpm, float)
    p_active, s_active = h.sum(axis=2) > 0, h.sum(axis=1) > 0
    _check_edges("pressure", np.broadcast_to(p_low, p_active.shape), p_high, p_active)
    _check_edges("speed", np.broadcast_to(s_low, s_active.shape), s_high, s_active)
    dp = band_dp_bar(p_low, p_high, low_side_bar=low_side_bar, band_pressure=band_pressure)
    dp = np.broadcast_to(dp, p_active.shape)[:, :, np.newaxis]
    speed = np.broadcast_to(0.5 * (s_low + s_high), s_active.shape)[:, np.newaxis, :]
    a = _life_factor(life_factor, h.shape, np.shape(hours))
    d = _miner_sum(h, dp, speed, a, rated_life_h, rated_dp_bar, rated_speed_rpm, life_exponent)
    return d[0] if single else d


def equivalent_pressure_bar(
    pressure_low_bar: np.ndarray,
    pressure_high_bar: np.ndarray,
    hours: np.ndarray,
    *,
    life_exponent: float = DEFAULT_LIFE_EXPONENT,
    low_side_bar: float = 0.0,
    band_pressure: str = "midpoint",
    speed_low_rpm: np.ndarray | None = None,
    speed_high_rpm: np.ndarray | None = None,
) -> np.ndarray:
    """Constant pressure that would do the same damage in the same hours (for display).

    Parameters
    ----------
    pressure_low_bar, pressure_high_bar : array (N, B) or (B,)
        Pressure band edges [bar].
    hours : array (N, B) or (B,); (N, P, S) or (P, S) with speed edges
        Hours per band or cell [h].
    life_exponent : float, default 10/3
        Life exponent p [-].
    low_side_bar : float, default 0
        Low-side pressure p_L [bar].
    band_pressure : {"midpoint", "upper"}, default "midpoint"
        Which pressure represents a band.
    speed_low_rpm, speed_high_rpm : array (N, S) or (S,), optional
        Speed band edges [rpm] of pressure-by-speed matrices; hours are then weighted
        by speed (midpoints).

    Returns
    -------
    numpy.ndarray
        Equivalent high-side gauge pressure ``p_L + dp_eq`` [bar] per upload; ``nan``
        for an upload with no hours.

    Notes
    -----
    ``dp_eq = (sum t_i n_i dp_i^p / sum t_i n_i)^(1/p)``: the equivalent-load formula
    with pressure for load. Running ``sum t_i`` hours at ``dp_eq`` and the mean speed
    gives the same Miner damage when the life factor is the same in every band.

    References
    ----------
    ISO 281:2007, clause on variable load (mean equivalent load); T. A. Harris and M. N. Kotzalas,
    Rolling Bearing Analysis, 5th ed., CRC 2007 (Palmgren-Miner for bearings; chapter from memory).
    """
    two_d = speed_low_rpm is not None or speed_high_rpm is not None
    h, single = _hours_batch(hours, 3 if two_d else 2)
    low, high = np.asarray(pressure_low_bar, float), np.asarray(pressure_high_bar, float)
    dp = band_dp_bar(low, high, low_side_bar=low_side_bar, band_pressure=band_pressure)
    if two_d:
        if speed_low_rpm is None or speed_high_rpm is None:
            raise ValueError("give both speed_low_rpm and speed_high_rpm, or neither")
        n = 0.5 * (np.asarray(speed_low_rpm, float) + np.asarray(speed_high_rpm, float))
        n = np.broadcast_to(n, (h.shape[0], h.shape[2]))[:, np.newaxis, :]
        dp = np.broadcast_to(dp, h.shape[:2])[:, :, np.newaxis]
    else:
        n = np.ones(1)
        dp = np.broadcast_to(dp, h.shape)
    with np.errstate(invalid="ignore", divide="ignore"):
        weight = np.where(h > 0, h * n, 0.0)
        num = np.where(h > 0, weight * dp**life_exponent, 0.0).reshape(h.shape[0], -1).sum(1)
        dp_eq = (num / weight.reshape(h.shape[0], -1).sum(1)) ** (1.0 / life_exponent)
    out = dp_eq + low_side_bar
    return out[0] if single else out


def band_conditions_1d(
    pressure_low_bar: np.ndarray,
    pressure_high_bar: np.ndarray,
    n_uploads: int,
    *,
    rated_speed_rpm: float,
    low_side_bar: float = 0.0,
    mean_speed_rpm: float | np.ndarray | None = None,
    band_pressure: str = "midpoint",
) -> tuple[np.ndarray, np.ndarray]:
    """Differential pressure and speed of every band of a batch of 1-D histograms.

    Parameters
    ----------
    pressure_low_bar, pressure_high_bar : array (N, B) or (B,)
        Band edges [bar].
    n_uploads : int
        Number of uploads N.
    rated_speed_rpm, low_side_bar, mean_speed_rpm, band_pressure
        As in :func:`damage_1d`.

    Returns
    -------
    tuple of numpy.ndarray
        ``dp`` [bar] and ``speed`` [rpm], both shape (N, B), the inputs that
        :func:`oil_life_factor` needs to build a per-band life factor.

    Notes
    -----
    ``dp_i = max(0, p_i - p_L)``; ``n_i`` = mean speed if given, else ``n_R``.

    References
    ----------
    Design brief, "Life model v1".
    """
    dp = band_dp_bar(
        pressure_low_bar, pressure_high_bar, low_side_bar=low_side_bar, band_pressure=band_pressure
    )
    dp = np.broadcast_to(dp, (n_uploads, dp.shape[-1]))
    speed = band_speed_1d_rpm(mean_speed_rpm, n_uploads, rated_speed_rpm)
    return dp.copy(), np.broadcast_to(speed, dp.shape).copy()


def band_conditions_2d(
    pressure_low_bar: np.ndarray,
    pressure_high_bar: np.ndarray,
    speed_low_rpm: np.ndarray,
    speed_high_rpm: np.ndarray,
    n_uploads: int,
    *,
    low_side_bar: float = 0.0,
    band_pressure: str = "midpoint",
) -> tuple[np.ndarray, np.ndarray]:
    """Differential pressure and speed of every cell of pressure-by-speed matrices.

    Parameters
    ----------
    pressure_low_bar, pressure_high_bar : array (N, P) or (P,)
        Pressure band edges [bar].
    speed_low_rpm, speed_high_rpm : array (N, S) or (S,)
        Speed band edges [rpm].
    n_uploads : int
        Number of uploads N.
    low_side_bar, band_pressure
        As in :func:`damage_2d`.

    Returns
    -------
    tuple of numpy.ndarray
        ``dp`` [bar] and ``speed`` [rpm], both shape (N, P, S).

    Notes
    -----
    ``dp_i = max(0, p_i - p_L)``; ``n_j`` = speed band midpoint.

    References
    ----------
    Design brief, "Life model v1".
    """
    dp = band_dp_bar(
        pressure_low_bar, pressure_high_bar, low_side_bar=low_side_bar, band_pressure=band_pressure
    )
    dp = np.broadcast_to(dp, (n_uploads, dp.shape[-1]))[:, :, np.newaxis]
    n = 0.5 * (np.asarray(speed_low_rpm, float) + np.asarray(speed_high_rpm, float))
    n = np.broadcast_to(n, (n_uploads, n.shape[-1]))[:, np.newaxis, :]
    shape = (n_uploads, dp.shape[1], n.shape[2])
    return np.broadcast_to(dp, shape).copy(), np.broadcast_to(n, shape).copy()
