"""Slow one-histogram-at-a-time reference paths, kept only as oracles for the batched
implementations in the package (tests/test_perf_equivalence.py)."""

from __future__ import annotations

import hashlib

import numpy as np
from sqlalchemy import Connection, select

from monitor.domain.batch import HistogramBatch
from monitor.domain.records import QUANTITY_PRESSURE_SPEED, Histogram
from monitor.domain.specs import ComponentModelSpec
from monitor.ledger.metrics import Metrics, OilCondition, has_bearing_data, metrics_arrays
from monitor.store import db
from monitor.store.checks import batch_shas
from monitor.store.status_reads import histogram_from_row


def _stack(hs: list[Histogram], attr: str) -> np.ndarray:
    return np.stack([np.asarray(getattr(h, attr), dtype=float) for h in hs])


def metrics_for(
    hs: list[Histogram], m: ComponentModelSpec, oil: OilCondition | None = None
) -> Metrics:
    """Life-model results for histograms of one component model, batched by shape.

    ``oil`` (per histogram, nan where unknown) switches on the ISO 281 oil-condition
    factor when the model has bearing data; otherwise a_oil = 1.
    """
    n = len(hs)
    out = {k: np.zeros(n) for k in Metrics.__dataclass_fields__}
    groups: dict[tuple, list[int]] = {}
    for i, h in enumerate(hs):
        groups.setdefault((h.quantity, np.shape(h.hours)), []).append(i)
    for (quantity, _), idx in groups.items():
        part_oil = None
        if oil is not None and has_bearing_data(m):
            part_oil = OilCondition(oil.viscosity_mm2s[idx], oil.contamination_ec[idx])
        res = _metrics_same_shape([hs[i] for i in idx], quantity, m, part_oil)
        for k, v in res.items():
            out[k][idx] = v
    return Metrics(**out)


def _metrics_same_shape(
    hs: list[Histogram], quantity: str, m: ComponentModelSpec, oil: OilCondition | None
) -> dict:
    mean = np.array([np.nan if h.mean_speed_rpm is None else h.mean_speed_rpm for h in hs])
    ps = quantity == QUANTITY_PRESSURE_SPEED
    return metrics_arrays(
        quantity,
        m,
        _stack(hs, "pressure_low_bar"),
        _stack(hs, "pressure_high_bar"),
        _stack(hs, "speed_low_rpm") if ps else None,
        _stack(hs, "speed_high_rpm") if ps else None,
        _stack(hs, "hours"),
        mean,
        oil,
    )


def stored_histograms(conn: Connection, component_ids: list[int]) -> tuple[list, list]:
    """Stored histograms of some components as (Histogram, component_id) with upload ids.

    One :class:`Histogram` per row: for detail views and checks, not for bulk work.
    """
    t, u = db.histogram, db.upload
    q = (
        select(t, u.c.hour_meter_start, u.c.hour_meter_end, u.c.period_end.label("u_end"))
        .join(u, u.c.id == t.c.upload_id)
        .where(t.c.component_id.in_(component_ids))
        .order_by(t.c.component_id, u.c.period_end, t.c.upload_id, t.c.id)
    )
    out, keys = [], []
    for r in conn.execute(q).mappings():
        out.append((histogram_from_row(r), r["component_id"]))
        keys.append(r["upload_id"])
    return out, keys


def histogram_sha(h: Histogram) -> str:
    """Content hash of one histogram: period, quantity, bands and hours."""
    m = hashlib.sha256()
    m.update(f"{h.quantity}|{h.period_start.isoformat()}|{h.period_end.isoformat()}|".encode())
    m.update(f"{h.hour_meter_start:.6f}|{h.hour_meter_end:.6f}|".encode())
    for arr in (h.pressure_low_bar, h.pressure_high_bar, h.speed_low_rpm, h.speed_high_rpm):
        if arr is not None:
            m.update(np.round(np.asarray(arr, dtype=float), 9).tobytes())
    m.update(np.round(np.asarray(h.hours, dtype=float), 9).tobytes())
    return m.hexdigest()


def histogram_shas(hs: list[Histogram]) -> list[str]:
    """:func:`histogram_sha` of many histograms (see :func:`batch_shas`)."""
    return batch_shas(HistogramBatch.from_histograms(hs))
