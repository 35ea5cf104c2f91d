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
from monitor.store import blocks, db
from monitor.store.checks import batch_shas


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
    """Stored histograms of some components as (Histogram, component_id) with upload ids,
    in ledger order (component, period end, upload, store order).

    One :class:`Histogram` per histogram: for detail views and checks, not for bulk work.
    """
    stored = blocks.of_components(conn, component_ids)
    b = stored.batch
    order = np.lexsort((stored.seq, stored.upload_id, b.period_end_ns, stored.component_id))
    hs = b.histograms(order)
    comps = stored.component_id[order].tolist()
    return list(zip(hs, comps, strict=True)), stored.upload_id[order].tolist()


def stored_histogram_rows(conn: Connection) -> list[dict]:
    """Every stored histogram as one row of the table that held them before revision
    0007 (one row per histogram), without its id, in store order; its content hash made
    one histogram at a time by :func:`histogram_sha`."""
    ids = [int(c) for c in conn.execute(select(db.component.c.id)).scalars()]
    stored = blocks.of_components(conn, ids)
    b = stored.batch
    rows = []
    for i, h in enumerate(b.histograms()):
        speed = None
        if h.speed_low_rpm is not None:
            speed = db.pack(np.r_[h.speed_low_rpm, h.speed_high_rpm])
        rows.append(
            {
                "upload_id": int(stored.upload_id[i]),
                "component_id": int(stored.component_id[i]),
                "quantity": h.quantity,
                "period_start": h.period_start,
                "period_end": h.period_end,
                "n_pressure": len(h.pressure_low_bar),
                "n_speed": 0 if speed is None else len(h.speed_low_rpm),
                "pressure_bands": db.pack(np.r_[h.pressure_low_bar, h.pressure_high_bar]),
                "speed_bands": speed,
                "hours": db.pack(h.hours),
                "total_hours": float(np.sum(h.hours)),
                "mean_speed_rpm": h.mean_speed_rpm,
                "oil_temp_c": h.oil_temp_c,
                "content_sha256": histogram_sha(h),
            }
        )
    return rows


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
