"""Hours at relief and cut-off pressure, and heat dumped over cross-port reliefs.

A cross-port relief that opens under a stall sends full pump flow across the loop and
turns all of that power into heat; a pressure cut-off destrokes the pump instead. The
histograms show how long a drive spent there. Vectorised over a batch (N, B) of 1-D
histograms like :mod:`monitor.models.spectrum`. Results are estimates: they assume full
displacement at the relief and do not replace the maker's settings and checks.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from monitor.models.hydraulics import pump_flow_lpm, throttle_power_kw
from monitor.models.spectrum import band_pressure_bar

RELIEF_FRACTION = 0.95
"""A band counts as "at" a setting when its pressure is at or above this fraction [-]."""


@dataclass(frozen=True)
class ReliefSummary:
    """Per-upload relief results, arrays of shape (N,).

    Attributes
    ----------
    relief_hours : numpy.ndarray
        Hours at or above 95 % of the relief setting [h].
    cutoff_hours : numpy.ndarray
        Hours at or above 95 % of the cut-off setting [h]; 0 without a cut-off.
    relief_heat_kwh : numpy.ndarray
        Heat dumped over the cross-port relief [kWh]; 0 with a cut-off.
    """

    relief_hours: np.ndarray
    cutoff_hours: np.ndarray
    relief_heat_kwh: np.ndarray


def _batch(hours: np.ndarray) -> np.ndarray:
    h = np.asarray(hours, dtype=float)
    h = h[np.newaxis] if h.ndim == 1 else h
    if h.ndim != 2:
        raise ValueError(f"hours must have shape (N, B) or (B,), got {np.shape(hours)}")
    if not np.all(np.isfinite(h)) or np.any(h < 0):
        raise ValueError("hours must be finite and >= 0 in every band (padding bands: 0)")
    return h


def _setting(name: str, value: float) -> float:
    if not (np.isfinite(value) and value > 0):
        raise ValueError(f"{name} must be a pressure setting > 0 bar, got {value!r}")
    return float(value)


def hours_at_or_above_h(
    pressure_low_bar: np.ndarray,
    pressure_high_bar: np.ndarray,
    hours: np.ndarray,
    *,
    setting_bar: float,
    fraction: float = RELIEF_FRACTION,
    band_pressure: str = "midpoint",
) -> np.ndarray:
    """Hours spent in bands at or above a fraction of a pressure setting.

    Parameters
    ----------
    pressure_low_bar, pressure_high_bar : array (N, B) or (B,)
        Band edges, high-side gauge pressure [bar]; nan allowed where hours are 0.
    hours : array (N, B) or (B,)
        Hours per band [h].
    setting_bar : float
        Relief or cut-off setting [bar].
    fraction : float, default 0.95
        Share of the setting from which a band counts [-], in (0, 1].
    band_pressure : {"midpoint", "upper"}, default "midpoint"
        Which pressure represents a band.

    Returns
    -------
    numpy.ndarray
        Hours [h] per upload, shape (N,).

    Notes
    -----
    ``t_at = sum_i t_i [p_i >= fraction * setting]``.

    References
    ----------
    Design brief, "Life model v1" (relief); common practice, no source, for the 95 %.
    """
    h = _batch(hours)
    setting = _setting("setting_bar", setting_bar)
    if not (0 < fraction <= 1):
        raise ValueError(f"fraction must be in (0, 1], got {fraction!r}")
    p = np.broadcast_to(
        band_pressure_bar(pressure_low_bar, pressure_high_bar, band_pressure), h.shape
    )
    with np.errstate(invalid="ignore"):
        at = (h > 0) & (p >= fraction * setting)
    return np.where(at, h, 0.0).sum(axis=1)


def relief_heat_kwh(
    pressure_low_bar: np.ndarray,
    pressure_high_bar: np.ndarray,
    hours: np.ndarray,
    *,
    speed_rpm: float | np.ndarray,
    displacement_cm3: float,
    relief_bar: float,
    low_side_bar: float = 0.0,
    fraction: float = RELIEF_FRACTION,
    band_pressure: str = "midpoint",
) -> np.ndarray:
    """Heat dumped over a cross-port relief (drive without pressure cut-off).

    Parameters
    ----------
    pressure_low_bar, pressure_high_bar : array (N, B) or (B,)
        Band edges [bar].
    hours : array (N, B) or (B,)
        Hours per band [h].
    speed_rpm : float, array (N,) or array (N, B)
        Pump speed while at relief [rpm], per upload or per band.
    displacement_cm3 : float
        Maximum pump displacement Vg [cm3/rev]; full displacement is assumed at relief.
    relief_bar : float
        Relief setting [bar].
    low_side_bar : float, default 0
        Low-side (charge) pressure the relief discharges into [bar].
    fraction, band_pressure
        As in :func:`hours_at_or_above_h`.

    Returns
    -------
    numpy.ndarray
        Heat [kWh] per upload, shape (N,).

    Notes
    -----
    ``E = sum_i t_i Q_stall dp_i / 600`` over bands with ``p_i >= 0.95 p_relief``;
    ``Q_stall = Vg n / 1000``, ``dp_i = max(0, p_i - p_L)``.

    References
    ----------
    Fluid-power handbooks, power lost across a relief P = Q dp / 600: H. Exner et al., Hydraulics:
    Basic Principles and Components, Bosch Rexroth training series, vol. 1 (pump and motor formulas;
    chapter from memory); design brief.
    """
    h = _batch(hours)
    relief = _setting("relief_bar", relief_bar)
    if not (np.isfinite(displacement_cm3) and displacement_cm3 > 0):
        raise ValueError(f"displacement_cm3 must be > 0 cm3/rev, got {displacement_cm3!r}")
    n = np.asarray(speed_rpm, dtype=float)
    n = n[:, np.newaxis] if n.ndim == 1 and n.shape[0] == h.shape[0] else n
    if np.any(n < 0) or np.any(np.isnan(np.broadcast_to(n, h.shape)[h > 0])):
        raise ValueError("speed_rpm must be a speed >= 0 rpm for every band with hours")
    p = np.broadcast_to(
        band_pressure_bar(pressure_low_bar, pressure_high_bar, band_pressure), h.shape
    )
    with np.errstate(invalid="ignore"):
        at = (h > 0) & (p >= fraction * relief)
        power = throttle_power_kw(pump_flow_lpm(displacement_cm3, n), np.fmax(p - low_side_bar, 0))
    return np.where(at, h * power, 0.0).sum(axis=1)


def relief_summary(
    pressure_low_bar: np.ndarray,
    pressure_high_bar: np.ndarray,
    hours: np.ndarray,
    *,
    speed_rpm: float | np.ndarray,
    displacement_cm3: float,
    relief_bar: float,
    cutoff_bar: float | None = None,
    low_side_bar: float = 0.0,
    fraction: float = RELIEF_FRACTION,
    band_pressure: str = "midpoint",
) -> ReliefSummary:
    """Hours at relief and cut-off and relief heat of a batch of histograms.

    Parameters
    ----------
    pressure_low_bar, pressure_high_bar, hours, speed_rpm, displacement_cm3, relief_bar,
    low_side_bar, fraction, band_pressure
        As in :func:`relief_heat_kwh`.
    cutoff_bar : float, optional
        Pressure cut-off setting [bar]; None when the pump has only cross-port reliefs.

    Returns
    -------
    ReliefSummary
        ``relief_hours`` [h], ``cutoff_hours`` [h] and ``relief_heat_kwh`` [kWh], each
        shape (N,). With a cut-off the pump destrokes, so relief heat is taken as 0;
        without one, cut-off hours are 0.

    Notes
    -----
    See :func:`hours_at_or_above_h` and :func:`relief_heat_kwh`.

    References
    ----------
    Design brief, "Life model v1" (relief); H. Exner et al., Hydraulics: Basic Principles and
    Components, Bosch Rexroth training series, vol. 1 (pump and motor formulas; chapter from
    memory).
    """
    kw = dict(fraction=fraction, band_pressure=band_pressure)
    relief_h = hours_at_or_above_h(
        pressure_low_bar, pressure_high_bar, hours, setting_bar=relief_bar, **kw
    )
    if cutoff_bar is None:
        heat = relief_heat_kwh(
            pressure_low_bar,
            pressure_high_bar,
            hours,
            speed_rpm=speed_rpm,
            displacement_cm3=displacement_cm3,
            relief_bar=relief_bar,
            low_side_bar=low_side_bar,
            **kw,
        )
        cutoff_h = np.zeros_like(relief_h)
    else:
        cutoff_h = hours_at_or_above_h(
            pressure_low_bar, pressure_high_bar, hours, setting_bar=cutoff_bar, **kw
        )
        heat = np.zeros_like(relief_h)
    return ReliefSummary(relief_hours=relief_h, cutoff_hours=cutoff_h, relief_heat_kwh=heat)
