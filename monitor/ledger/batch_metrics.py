"""Life-model results of a batch of histograms for the ledger (pure; the store's ledger
writer calls :func:`batch_metrics` as its ``compute`` function)."""

from __future__ import annotations

import numpy as np
import pandas as pd

from monitor.domain.specs import OilSpec
from monitor.ledger.batch import Batch, ComponentTable
from monitor.ledger.metrics import (
    Metrics,
    OilCondition,
    has_bearing_data,
    metrics_arrays,
    oil_condition,
)
from monitor.models import oil as oil_mod


def batch_metrics(batch: Batch, table: ComponentTable, samples: dict[int, pd.DataFrame]) -> dict:
    """Life-model results per batch row, one model call per shape group and model.

    ``samples``: ISO 4406 samples per component id (for the oil-condition factor). The
    store's ledger writer calls this as its ``compute`` function.
    """
    n = len(batch)
    out = {k: np.zeros(n) for k in Metrics.__dataclass_fields__}
    model_ids = np.array([table.model_of[c] for c in batch.component_id.tolist()], dtype=np.int64)
    nu, ec = _batch_oil(batch, table, samples)
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
            )
            for k, v in res.items():
                out[k][rows] = v
    return out


def _batch_oil(
    batch: Batch, table: ComponentTable, samples: dict[int, pd.DataFrame]
) -> tuple[np.ndarray, np.ndarray]:
    """Oil viscosity [mm2/s] and eC [-] per row; nan where unknown or not needed."""
    nu, ec = np.full(len(batch), np.nan), np.full(len(batch), np.nan)
    if not samples:
        return nu, ec
    order = np.argsort(batch.component_id, kind="stable")
    comps = batch.component_id[order]
    for comp, g in samples.items():
        idx = order[np.searchsorted(comps, comp) : np.searchsorted(comps, comp, side="right")]
        model = table.models[table.model_of[comp]]
        line = oil_mod.oil_line_from_spec(**_oil_kwargs(table.oils[comp]))
        cond = oil_condition(g, [batch.period_end[i] for i in idx], model, line)
        if cond is not None:
            nu[idx], ec[idx] = cond.viscosity_mm2s, cond.contamination_ec
    return nu, ec


def _oil_kwargs(spec: OilSpec) -> dict:
    return dict(
        iso_vg=spec.iso_vg,
        viscosity_index=spec.viscosity_index,
        nu40_mm2s=spec.nu40_mm2s,
        nu100_mm2s=spec.nu100_mm2s,
    )
