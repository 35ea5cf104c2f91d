"""Life-model results per histogram for the ledger: damage, hours, relief and heat.

Pure functions of stacked band arrays and a component model (plus the oil condition
per histogram for the ISO 281 oil factor): no database access. :mod:`monitor.store.ledger_rows`
feeds them batches of stored or uploaded histograms.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from monitor.domain.records import QUANTITY_PRESSURE_SPEED
from monitor.domain.specs import ComponentModelSpec
from monitor.models import bearings, relief, spectrum
from monitor.models import oil as oil_mod


@dataclass(frozen=True)
class Metrics:
    """Per-histogram results of the life models (arrays of equal length)."""

    hours: np.ndarray
    damage: np.ndarray
    relief_hours: np.ndarray
    cutoff_hours: np.ndarray
    relief_heat_kwh: np.ndarray
    kappa_floor_hours: np.ndarray


@dataclass(frozen=True)
class OilCondition:
    """Oil state a batch of histograms ran in: viscosity [mm2/s] and eC [-] per histogram
    (nan where unknown: the oil-condition factor is then not applied, a_oil = 1)."""

    viscosity_mm2s: np.ndarray
    contamination_ec: np.ndarray


OIL_SOURCES = ("upload", "unit", "model", "none")
"""Where the operating oil temperature of a ledger row came from: the upload's period
mean, the registry's unit (or component) override, the component model's
``operating_temp_c``, or nowhere (the oil-condition factor is then not applied)."""


def _model_kwargs(m: ComponentModelSpec) -> dict:
    return dict(
        rated_life_h=m.rated_l10_h,
        rated_dp_bar=m.rated_dp_bar,
        rated_speed_rpm=m.rated_speed_rpm,
        life_exponent=m.life_exponent,
        low_side_bar=m.low_side_bar,
    )


def has_bearing_data(m: ComponentModelSpec) -> bool:
    """True when the model carries what the ISO 281 oil-condition factor needs."""
    return m.has_bearing_data


def _oil_factor(
    dp: np.ndarray, speed: np.ndarray, m: ComponentModelSpec, oil: OilCondition | None
) -> tuple[np.ndarray | float, np.ndarray | bool]:
    """a_oil per band and where it took the floor: 1 where the oil state is unknown, the
    aISO table's floor (0.1, relative to the reference) where kappa < 0.1."""
    if oil is None:
        return 1.0, False
    extra = (1,) * (dp.ndim - 1)
    nu = oil.viscosity_mm2s.reshape(-1, *extra)
    ec = oil.contamination_ec.reshape(-1, *extra)
    known = np.isfinite(nu) & np.isfinite(ec)
    a = bearings.oil_life_factor(
        dp,
        speed,
        bearing_type=m.bearing_type,
        pitch_diameter_mm=m.bearing_pitch_diameter_mm,
        fatigue_limit_kn=m.bearing_fatigue_limit_kn,
        load_at_rated_kn=m.bearing_load_at_rated_kn,
        rated_dp_bar=m.rated_dp_bar,
        viscosity_mm2s=np.where(known, nu, 1.0),
        contamination_ec=np.where(known, ec, 1.0),
    )
    floor = bearings.oil_life_factor(
        np.asarray([m.rated_dp_bar]),
        np.asarray([m.rated_speed_rpm]),
        bearing_type=m.bearing_type,
        pitch_diameter_mm=m.bearing_pitch_diameter_mm,
        fatigue_limit_kn=m.bearing_fatigue_limit_kn,
        load_at_rated_kn=m.bearing_load_at_rated_kn,
        rated_dp_bar=m.rated_dp_bar,
        viscosity_mm2s=1e9,
        contamination_ec=0.0,
    )[0]
    known = np.broadcast_to(known, a.shape)
    floored = np.isnan(a) & known & (dp > 0) & (speed > 0)  # no damage at dp or n = 0
    a = np.where(np.isnan(a), floor, a)  # outside the method: take aISO at its floor (0.1)
    return np.where(known, a, 1.0), floored


def metrics_arrays(
    quantity: str,
    m: ComponentModelSpec,
    p_lo: np.ndarray,
    p_hi: np.ndarray,
    s_lo: np.ndarray | None,
    s_hi: np.ndarray | None,
    hours: np.ndarray,
    mean: np.ndarray,
    oil: OilCondition | None,
    band_pressure: str = "midpoint",
) -> dict:
    """Life-model results of k histograms of one model, quantity and shape.

    ``p_lo``/``p_hi`` (k, P) [bar], ``s_lo``/``s_hi`` (k, S) [rpm] for pressure-by-speed
    matrices, ``hours`` (k, P) or (k, P, S) [h], ``mean`` (k,) mean speed [rpm], nan
    where not given; ``band_pressure`` the pressure a band stands for ("midpoint" or
    "upper" edge). Returns arrays (k,) keyed by the :class:`Metrics` field names.
    """
    kw = {**_model_kwargs(m), "band_pressure": band_pressure}
    k = p_lo.shape[0]
    if quantity == QUANTITY_PRESSURE_SPEED:
        dp, speed3 = spectrum.band_conditions_2d(
            p_lo, p_hi, s_lo, s_hi, k, low_side_bar=m.low_side_bar, band_pressure=band_pressure
        )
        a_oil, floored = _oil_factor(dp, speed3, m, oil)
        damage = spectrum.damage_2d(p_lo, p_hi, s_lo, s_hi, hours, life_factor=a_oil, **kw)
        band_hours = hours.sum(axis=2)
        speed = np.where(
            band_hours > 0,
            (hours * (0.5 * (s_lo + s_hi))[:, None, :]).sum(axis=2)
            / np.where(band_hours > 0, band_hours, 1.0),
            m.rated_speed_rpm,
        )
    else:
        dp, speed = spectrum.band_conditions_1d(
            p_lo,
            p_hi,
            k,
            rated_speed_rpm=m.rated_speed_rpm,
            low_side_bar=m.low_side_bar,
            mean_speed_rpm=mean,
            band_pressure=band_pressure,
        )
        a_oil, floored = _oil_factor(dp, speed, m, oil)
        damage = spectrum.damage_1d(p_lo, p_hi, hours, mean_speed_rpm=mean, life_factor=a_oil, **kw)
        band_hours = hours
    rel = relief.relief_summary(
        p_lo,
        p_hi,
        band_hours,
        speed_rpm=speed,
        displacement_cm3=m.displacement_cm3,
        relief_bar=m.relief_bar,
        cutoff_bar=m.cutoff_bar,
        low_side_bar=m.low_side_bar,
        band_pressure=band_pressure,
    )
    floor_h = np.where(np.broadcast_to(floored, hours.shape), hours, 0.0)
    return {
        "hours": band_hours.sum(axis=1),
        "damage": np.nan_to_num(damage, nan=0.0),
        "relief_hours": rel.relief_hours,
        "cutoff_hours": rel.cutoff_hours,
        "relief_heat_kwh": rel.relief_heat_kwh,
        "kappa_floor_hours": floor_h.reshape(k, -1).sum(axis=1),
    }


def operating_temperature(
    upload_temp_c: np.ndarray,
    unit_temp_c: float | None,
    model_temp_c: float | None,
) -> tuple[np.ndarray, np.ndarray]:
    """The operating oil temperature per histogram [degC] and its source.

    The upload's period mean where given, else the registry's unit (or component)
    override, else the component model's ``operating_temp_c``, else none (nan, source
    "none": the oil-condition factor is not applied). Never the case-drain test
    temperature: a test is run at a set temperature, not at the loop's working one.
    """
    t = np.asarray(upload_temp_c, dtype=float)
    given = np.isfinite(t)
    fallback, source = np.nan, "none"
    if model_temp_c is not None:
        fallback, source = float(model_temp_c), "model"
    if unit_temp_c is not None:
        fallback, source = float(unit_temp_c), "unit"
    temp = np.where(given, t, fallback)
    return temp, np.where(given, "upload", source).astype(object)


def oil_condition(
    temp_c: np.ndarray,
    m: ComponentModelSpec,
    oil_line: tuple[float, float] | None,
    contamination_ec: float,
) -> OilCondition | None:
    """Oil state per histogram: viscosity at its operating temperature on the oil's
    ASTM D341 line [mm2/s] and the chosen level's eC [-]; nan where no temperature."""
    if not has_bearing_data(m) or oil_line is None:
        return None
    t = np.asarray(temp_c, dtype=float)
    nu = np.full(t.shape, np.nan)
    known = np.isfinite(t)
    if known.any():
        nu[known] = oil_mod.walther_viscosity_mm2s(t[known], *oil_line)
    return OilCondition(nu, np.where(known, contamination_ec, np.nan))
