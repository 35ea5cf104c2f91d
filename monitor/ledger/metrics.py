"""Life-model results per histogram for the ledger: damage, hours, relief and heat.

Pure functions of stacked band arrays and a component model (plus the oil condition
per histogram for the ISO 281 oil factor): no database access. :mod:`monitor.store.ledger_rows`
feeds them batches of stored or uploaded histograms.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

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


@dataclass(frozen=True)
class OilCondition:
    """Oil state a batch of histograms ran in: viscosity [mm2/s] and eC [-] per histogram."""

    viscosity_mm2s: np.ndarray
    contamination_ec: np.ndarray


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
) -> np.ndarray | float:
    """a_oil per band; 1 where the oil state is unknown, the aISO floor where kappa < 0.1."""
    if oil is None:
        return 1.0
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
    a = np.where(np.isnan(a), floor, a)  # outside the method: take aISO at its floor (0.1)
    return np.where(np.broadcast_to(known, a.shape), a, 1.0)


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
) -> dict:
    """Life-model results of k histograms of one model, quantity and shape.

    ``p_lo``/``p_hi`` (k, P) [bar], ``s_lo``/``s_hi`` (k, S) [rpm] for pressure-by-speed
    matrices, ``hours`` (k, P) or (k, P, S) [h], ``mean`` (k,) mean speed [rpm], nan
    where not given. Returns arrays (k,) keyed by the :class:`Metrics` field names.
    """
    kw = _model_kwargs(m)
    k = p_lo.shape[0]
    if quantity == QUANTITY_PRESSURE_SPEED:
        dp, speed3 = spectrum.band_conditions_2d(
            p_lo, p_hi, s_lo, s_hi, k, low_side_bar=m.low_side_bar
        )
        a_oil = _oil_factor(dp, speed3, m, oil)
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
        )
        a_oil = _oil_factor(dp, speed, m, oil)
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
    )
    return {
        "hours": band_hours.sum(axis=1),
        "damage": np.nan_to_num(damage, nan=0.0),
        "relief_hours": rel.relief_hours,
        "cutoff_hours": rel.cutoff_hours,
        "relief_heat_kwh": rel.relief_heat_kwh,
    }


def oil_condition(
    samples: pd.DataFrame,
    period_end: list,
    m: ComponentModelSpec,
    oil_line: tuple[float, float] | None,
) -> OilCondition | None:
    """Oil state per histogram: the latest ISO 4406 sample at or before its period end.

    ``samples`` has columns taken_at (UTC) and iso4406 for one component. Viscosity is
    read off the oil's ASTM D341 line at the model's case-drain test temperature
    (standing in for the operating temperature; 50 degC when not given).
    """
    if not has_bearing_data(m) or oil_line is None or samples.empty:
        return None
    ends = pd.to_datetime(pd.Series(period_end), utc=True).to_numpy()
    taken = pd.to_datetime(samples["taken_at"], utc=True).to_numpy()
    order = np.argsort(taken, kind="stable")
    pos = np.searchsorted(taken[order], ends, side="right") - 1
    codes = samples["iso4406"].to_numpy()[order]
    ec_by_code = {
        c: bearings.contamination_factor_from_iso4406(c, m.bearing_pitch_diameter_mm)
        for c in set(codes)
    }
    ec = np.array([ec_by_code[codes[i]] if i >= 0 else np.nan for i in pos])
    temp = m.case_drain_test_temp_c if m.case_drain_test_temp_c is not None else 50.0
    nu = float(oil_mod.walther_viscosity_mm2s(temp, *oil_line))
    return OilCondition(np.full(len(ends), nu), ec)
