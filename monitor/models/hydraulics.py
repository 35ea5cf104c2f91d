"""Handbook formulas for hydrostatic pumps and motors (flow, torque, power, relief loss).

Units throughout: displacement Vg [cm3/rev], speed n [rpm], pressure difference dp
[bar], flow Q [L/min], torque T [N m], power P [kW]. Efficiencies are fractions in
(0, 1]. Pure numpy; all functions accept scalars or arrays.
"""

from __future__ import annotations

import math

import numpy as np

HP_PER_GPM_PSI = 1.0 / 1714.0
"""Hydraulic horsepower per (US gal/min x psi) [hp]; fluid-power handbooks."""


def _efficiency(name: str, value: float | np.ndarray) -> np.ndarray:
    v = np.asarray(value, dtype=float)
    if np.any(~((v > 0) & (v <= 1))):
        raise ValueError(f"{name} must be a fraction in (0, 1], got {value!r}")
    return v


def pump_flow_lpm(
    displacement_cm3: float | np.ndarray,
    speed_rpm: float | np.ndarray,
    volumetric_efficiency: float | np.ndarray = 1.0,
) -> np.ndarray:
    """Delivered flow of a pump.

    Parameters
    ----------
    displacement_cm3 : float or array
        Displacement Vg [cm3/rev].
    speed_rpm : float or array
        Shaft speed n [rpm].
    volumetric_efficiency : float or array, default 1
        eta_v [-]; 1 gives the theoretical (geometric) flow.

    Returns
    -------
    numpy.ndarray
        Flow Q [L/min].

    Notes
    -----
    ``Q = Vg n eta_v / 1000``.

    References
    ----------
    Fluid-power handbooks, pump formulas: H. Exner et al., Hydraulics: Basic Principles and
    Components, Bosch Rexroth training series, vol. 1 (pump and motor formulas; chapter from
    memory).
    """
    eta = _efficiency("volumetric_efficiency", volumetric_efficiency)
    return np.asarray(displacement_cm3, float) * np.asarray(speed_rpm, float) * eta / 1000.0


def pump_torque_nm(
    displacement_cm3: float | np.ndarray,
    dp_bar: float | np.ndarray,
    mechanical_efficiency: float | np.ndarray = 1.0,
) -> np.ndarray:
    """Input torque a pump needs.

    Parameters
    ----------
    displacement_cm3 : float or array
        Displacement Vg [cm3/rev].
    dp_bar : float or array
        Pressure difference across the pump [bar].
    mechanical_efficiency : float or array, default 1
        Mechanical-hydraulic efficiency eta_mh [-].

    Returns
    -------
    numpy.ndarray
        Torque T [N m].

    Notes
    -----
    ``T = Vg dp / (20 pi eta_mh)``.

    References
    ----------
    Fluid-power handbooks, pump formulas: H. Exner et al., Hydraulics: Basic Principles and
    Components, Bosch Rexroth training series, vol. 1 (pump and motor formulas; chapter from
    memory).
    """
    eta = _efficiency("mechanical_efficiency", mechanical_efficiency)
    return np.asarray(displacement_cm3, float) * np.asarray(dp_bar, float) / (20.0 * math.pi * eta)


def pump_input_power_kw(
    flow_lpm: float | np.ndarray, dp_bar: float | np.ndarray, total_efficiency: float = 1.0
) -> np.ndarray:
    """Shaft power a pump draws for a delivered flow and pressure difference.

    Parameters
    ----------
    flow_lpm : float or array
        Delivered flow Q [L/min].
    dp_bar : float or array
        Pressure difference [bar].
    total_efficiency : float or array, default 1
        eta_t = eta_v eta_mh [-].

    Returns
    -------
    numpy.ndarray
        Input power P [kW].

    Notes
    -----
    ``P = Q dp / (600 eta_t)``.

    References
    ----------
    Fluid-power handbooks, pump formulas: H. Exner et al., Hydraulics: Basic Principles and
    Components, Bosch Rexroth training series, vol. 1 (pump and motor formulas; chapter from
    memory).
    """
    eta = _efficiency("total_efficiency", total_efficiency)
    return np.asarray(flow_lpm, float) * np.asarray(dp_bar, float) / (600.0 * eta)


def throttle_power_kw(flow_lpm: float | np.ndarray, dp_bar: float | np.ndarray) -> np.ndarray:
    """Power turned into heat by flow across a relief valve or throttle.

    Parameters
    ----------
    flow_lpm : float or array
        Flow through the valve Q [L/min].
    dp_bar : float or array
        Pressure drop across the valve [bar]; in a closed loop the cross-port relief
        discharges to the low (charge) side, so ``dp = p_high - p_charge``.

    Returns
    -------
    numpy.ndarray
        Heat power P [kW].

    Notes
    -----
    ``P = Q dp / 600``.

    References
    ----------
    Fluid-power handbooks: H. Exner et al., Hydraulics: Basic Principles and Components, Bosch
    Rexroth training series, vol. 1 (pump and motor formulas; chapter from memory).
    """
    return np.asarray(flow_lpm, float) * np.asarray(dp_bar, float) / 600.0


def throttle_power_hp(flow_gpm: float | np.ndarray, dp_psi: float | np.ndarray) -> np.ndarray:
    """Power lost across a valve in US units.

    Parameters
    ----------
    flow_gpm : float or array
        Flow [US gal/min].
    dp_psi : float or array
        Pressure drop [psi].

    Returns
    -------
    numpy.ndarray
        Power [hp].

    Notes
    -----
    ``P = Q dp / 1714``.

    References
    ----------
    Fluid-power handbooks: H. Exner et al., Hydraulics: Basic Principles and Components, Bosch
    Rexroth training series, vol. 1 (pump and motor formulas; chapter from memory).
    """
    return np.asarray(flow_gpm, float) * np.asarray(dp_psi, float) * HP_PER_GPM_PSI


def motor_speed_rpm(
    flow_lpm: float | np.ndarray,
    displacement_cm3: float | np.ndarray,
    volumetric_efficiency: float | np.ndarray = 1.0,
) -> np.ndarray:
    """Output speed of a hydraulic motor fed with a flow.

    Parameters
    ----------
    flow_lpm : float or array
        Flow into the motor Q [L/min].
    displacement_cm3 : float or array
        Motor displacement Vg [cm3/rev]; 0 gives ``inf``.
    volumetric_efficiency : float or array, default 1
        eta_v [-] (leakage bypasses the motor).

    Returns
    -------
    numpy.ndarray
        Speed n [rpm].

    Notes
    -----
    ``n = 1000 Q eta_v / Vg``.

    References
    ----------
    Fluid-power handbooks, motor formulas: H. Exner et al., Hydraulics: Basic Principles and
    Components, Bosch Rexroth training series, vol. 1 (pump and motor formulas; chapter from
    memory).
    """
    eta = _efficiency("volumetric_efficiency", volumetric_efficiency)
    with np.errstate(divide="ignore"):
        return 1000.0 * np.asarray(flow_lpm, float) * eta / np.asarray(displacement_cm3, float)


def motor_torque_nm(
    displacement_cm3: float | np.ndarray,
    dp_bar: float | np.ndarray,
    mechanical_efficiency: float | np.ndarray = 1.0,
) -> np.ndarray:
    """Output torque of a hydraulic motor.

    Parameters
    ----------
    displacement_cm3 : float or array
        Motor displacement Vg [cm3/rev].
    dp_bar : float or array
        Pressure difference across the motor [bar].
    mechanical_efficiency : float or array, default 1
        eta_mh [-] (friction takes torque away).

    Returns
    -------
    numpy.ndarray
        Torque T [N m].

    Notes
    -----
    ``T = Vg dp eta_mh / (20 pi)``.

    References
    ----------
    Fluid-power handbooks, motor formulas: H. Exner et al., Hydraulics: Basic Principles and
    Components, Bosch Rexroth training series, vol. 1 (pump and motor formulas; chapter from
    memory).
    """
    eta = _efficiency("mechanical_efficiency", mechanical_efficiency)
    return np.asarray(displacement_cm3, float) * np.asarray(dp_bar, float) * eta / (20.0 * math.pi)


def motor_output_power_kw(
    flow_lpm: float | np.ndarray, dp_bar: float | np.ndarray, total_efficiency: float = 1.0
) -> np.ndarray:
    """Shaft power a hydraulic motor delivers.

    Parameters
    ----------
    flow_lpm : float or array
        Flow into the motor Q [L/min].
    dp_bar : float or array
        Pressure difference [bar].
    total_efficiency : float or array, default 1
        eta_t [-].

    Returns
    -------
    numpy.ndarray
        Output power P [kW].

    Notes
    -----
    ``P = Q dp eta_t / 600``.

    References
    ----------
    Fluid-power handbooks, motor formulas: H. Exner et al., Hydraulics: Basic Principles and
    Components, Bosch Rexroth training series, vol. 1 (pump and motor formulas; chapter from
    memory).
    """
    eta = _efficiency("total_efficiency", total_efficiency)
    return np.asarray(flow_lpm, float) * np.asarray(dp_bar, float) * eta / 600.0
