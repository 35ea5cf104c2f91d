"""Life-model results of a batch of histograms for the ledger (pure; the store's ledger
writer calls :func:`batch_metrics` as its ``compute`` function)."""

from __future__ import annotations

import numpy as np

from monitor.domain.records import Problem
from monitor.domain.specs import ComponentModelSpec, OilSpec
from monitor.ledger.batch import Batch, ComponentTable
from monitor.ledger.metrics import (
    Metrics,
    OilCondition,
    has_bearing_data,
    metrics_arrays,
    oil_condition,
    operating_temperature,
)
from monitor.models import bearings
from monitor.models import oil as oil_mod

LEDGER_EXTRA = ("oil_temp_c", "oil_factor_source")
"""Ledger columns besides the :class:`Metrics`: the operating oil temperature the
oil-condition factor used [degC] and where it came from (None without bearing data)."""


def batch_metrics(
    batch: Batch,
    table: ComponentTable,
    *,
    band_pressure: str = "midpoint",
) -> dict:
    """Life-model results per batch row, one model call per shape group and model.

    The contamination level is the registry's choice (an ISO 4406 sample only suggests
    one, see :mod:`monitor.fleet.detail`), so no sample enters the ledger.
    ``band_pressure`` ("midpoint" or "upper") is the stored setting of the pressure a band
    stands for. The store's ledger writer calls this as its ``compute`` function.
    """
    n = len(batch)
    out: dict = {k: np.zeros(n) for k in Metrics.__dataclass_fields__}
    model_ids = np.array([table.model_of[c] for c in batch.component_id.tolist()], dtype=np.int64)
    nu, ec, temp, source = _batch_oil(batch, table)
    for g in batch.groups:
        mids = model_ids[g.rows]
        for mid in np.unique(mids):
            sel = np.flatnonzero(mids == mid) if mids.min() != mids.max() else slice(None)
            rows = g.rows[sel]
            m = table.rated_model(int(mid))
            oil = OilCondition(nu[rows], ec[rows]) if has_bearing_data(m) else None
            res = metrics_arrays(
                g.quantity,
                m,
                g.p_lo[sel],
                g.p_hi[sel],
                None if g.s_lo is None else g.s_lo[sel],
                None if g.s_hi is None else g.s_hi[sel],
                g.hours[sel],
                g.mean_speed[sel],
                oil,
                band_pressure=band_pressure,
            )
            for k, v in res.items():
                out[k][rows] = v
    out["oil_temp_c"] = np.array([None if t != t else t for t in temp.tolist()], dtype=object)
    out["oil_factor_source"] = source
    return out


OIL_VISCOSITY_RANGE_MM2S = (2.0, 1000.0)
"""Viscosities at which a period mean oil temperature is sensible for an oil [mm2/s]: from
about 2 mm2/s, below which the simple ASTM D341 line is no longer valid, to 1000 mm2/s,
the usual cold-start limit of axial-piston units above which a loop does not work under
load (common practice, no source)."""


def oil_temp_problems(
    temp_c: np.ndarray, component_id: np.ndarray, lines: list, table: ComponentTable, file: str
) -> list[Problem]:
    """Problems of upload oil temperatures [degC] outside their oil's sensible range
    (:data:`OIL_VISCOSITY_RANGE_MM2S`); one per histogram, ``lines`` its source lines."""
    out: list[Problem] = []
    lo, hi = OIL_VISCOSITY_RANGE_MM2S
    for i in np.flatnonzero(np.isfinite(temp_c)).tolist():
        spec = table.oils[int(component_id[i])]
        line = oil_mod.oil_line_from_spec(**_oil_kwargs(spec))
        nu = float(oil_mod.walther_viscosity_mm2s(temp_c[i], *line))
        if lo <= nu <= hi:
            continue
        t_lo, t_hi = (float(oil_mod.temperature_at_viscosity_c(v, *line)) for v in (hi, lo))
        out.append(
            Problem(file, lines[i], "oil_temp", f"{temp_c[i]:.1f} degC",
                    f"oil {spec.name} would be {nu:.3g} mm2/s at this temperature: a period "
                    f"mean operating temperature of this oil is expected between {t_lo:.0f} "
                    f"and {t_hi:.0f} degC ({lo:g} to {hi:g} mm2/s); check the value and its unit")
        )  # fmt: skip
    return out


def component_oil(table: ComponentTable, comp: int) -> tuple[float | None, str]:
    """The registry's operating temperature of a component [degC] (unit or component
    override, else None) and its ISO 281 contamination level (site, else oil, else the
    default)."""
    row = table.rows[comp]
    unit_t = _plain(row.get("c_operating_temp_c"))
    if unit_t is None:
        unit_t = _plain(row.get("u_operating_temp_c"))
    level = (
        row.get("site_contamination_level")
        or table.oils[comp].contamination_level
        or bearings.DEFAULT_CONTAMINATION_LEVEL
    )
    return unit_t, level


def contamination_ec(level: str, m: ComponentModelSpec) -> float:
    """eC [-] of an ISO 281 level (descriptive name) for the model's bearing."""
    key = bearings.CONTAMINATION_LEVEL_NAMES[level]
    return bearings.contamination_factor(key, m.bearing_pitch_diameter_mm)


def _batch_oil(batch: Batch, table: ComponentTable) -> tuple:
    """Viscosity [mm2/s], eC [-], oil temperature [degC] and its source per row; nan (and
    source None) where the model has no bearing data."""
    n = len(batch)
    nu, ec, temp = np.full(n, np.nan), np.full(n, np.nan), np.full(n, np.nan)
    source = np.full(n, None, dtype=object)
    order = np.argsort(batch.component_id, kind="stable")
    comps = batch.component_id[order]
    for comp in np.unique(comps).tolist():
        idx = order[np.searchsorted(comps, comp) : np.searchsorted(comps, comp, side="right")]
        m = table.models[table.model_of[comp]]
        if not has_bearing_data(m):
            continue
        unit_t, level = component_oil(table, comp)
        temp[idx], source[idx] = operating_temperature(
            batch.oil_temp_c[idx], unit_t, m.operating_temp_c
        )
        line = oil_mod.oil_line_from_spec(**_oil_kwargs(table.oils[comp]))
        cond = oil_condition(temp[idx], m, line, contamination_ec(level, m))
        if cond is not None:
            nu[idx], ec[idx] = cond.viscosity_mm2s, cond.contamination_ec
    return nu, ec, temp, source


def _plain(v: object) -> float | None:
    return None if v is None or v != v else float(v)


def _oil_kwargs(spec: OilSpec) -> dict:
    return dict(
        iso_vg=spec.iso_vg,
        viscosity_index=spec.viscosity_index,
        nu40_mm2s=spec.nu40_mm2s,
        nu100_mm2s=spec.nu100_mm2s,
    )
