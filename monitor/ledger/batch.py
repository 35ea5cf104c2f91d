"""Histograms as arrays for the ledger: one histogram per (upload, component), the band
data stacked per group of equal quantity and shape, so that the life models run once per
group and component model instead of once per histogram (pure containers and builders;
the store fills them from stored rows and writes the results)."""

from __future__ import annotations

from dataclasses import dataclass, field, replace

import numpy as np
import pandas as pd

from monitor.domain.batch import HistogramBatch, utc_datetimes
from monitor.domain.records import QUANTITY_PRESSURE_SPEED
from monitor.domain.specs import ComponentModelSpec, OilSpec


@dataclass
class Group:
    """Rows of a batch with equal quantity and band counts, their bands stacked.

    ``rows`` are positions in the batch; ``p_lo``/``p_hi`` (k, P) [bar], ``s_lo``/``s_hi``
    (k, S) [rpm] or None, ``hours`` (k, P) or (k, P, S) [h], ``mean_speed`` (k,) [rpm],
    nan where not given.
    """

    quantity: str
    rows: np.ndarray
    p_lo: np.ndarray
    p_hi: np.ndarray
    s_lo: np.ndarray | None
    s_hi: np.ndarray | None
    hours: np.ndarray
    mean_speed: np.ndarray


@dataclass
class Batch:
    """One histogram per (upload, component), as arrays of equal length N.

    ``period_end`` holds the upload's period end per row as UTC datetimes, and
    ``period_end_ns`` the same ends as int64 ns since the epoch (ingest and recompute
    both build batches from columns, :func:`batch_from_columns`).
    """

    component_id: np.ndarray
    upload_id: np.ndarray
    period_end: list
    hour_meter_start: np.ndarray
    hour_meter_end: np.ndarray
    groups: list[Group]
    period_end_ns: np.ndarray | None = None  # the same ends [ns since the epoch]
    oil_temp_c: np.ndarray | None = None  # the upload's period mean oil temperature [degC]

    def __post_init__(self) -> None:
        if self.oil_temp_c is None:
            self.oil_temp_c = np.full(self.component_id.size, np.nan)

    def __len__(self) -> int:
        return int(self.component_id.size)


def _group_key(quantity: str, n_p: int, n_s: int) -> tuple:
    return (quantity, n_p, n_s)


def batch_from_columns(
    b: HistogramBatch, rows: np.ndarray, component_id: np.ndarray, upload_id: np.ndarray
) -> Batch:
    """A batch of the histograms ``rows`` of ``b``, with their component and upload ids
    (arrays aligned with ``rows``), in ``rows`` order."""
    rows = np.asarray(rows, dtype=np.int64)
    is_ps = (b.quantity[rows] == QUANTITY_PRESSURE_SPEED).astype(np.int64)
    n_p, n_s = b.n_pressure[rows], b.n_speed[rows]
    codes, uniq = pd.factorize((is_ps << 40) | (n_p << 20) | n_s)
    order = np.argsort(codes, kind="stable")
    bounds = np.r_[0, np.cumsum(np.bincount(codes, minlength=len(uniq)))]
    groups = []
    for j in range(len(uniq)):
        idx = order[bounds[j] : bounds[j + 1]]
        groups.append(_column_group(b, rows[idx], idx, bool(is_ps[idx[0]])))
    ends = b.period_end_ns[rows]
    return Batch(
        component_id=np.asarray(component_id, dtype=np.int64),
        upload_id=np.asarray(upload_id, dtype=np.int64),
        period_end=utc_datetimes(ends),
        hour_meter_start=b.hour_meter_start[rows],
        hour_meter_end=b.hour_meter_end[rows],
        groups=groups,
        period_end_ns=ends,
        oil_temp_c=b.oil_temp_c[rows],
    )


def _column_group(b: HistogramBatch, src: np.ndarray, idx: np.ndarray, is_ps: bool) -> Group:
    """The group of batch rows ``idx`` (histograms ``src`` of ``b``, all of one shape)."""
    p, s = int(b.n_pressure[src[0]]), int(b.n_speed[src[0]])

    def gather(flat: np.ndarray, offset: np.ndarray, width: int) -> np.ndarray:
        return flat[offset[src][:, None] + np.arange(width)]

    hours = gather(b.hours, b.hours_offset, p * max(s, 1))
    return Group(
        quantity=b.quantity[src[0]],
        rows=idx,
        p_lo=gather(b.pressure_low_bar, b.pressure_offset, p),
        p_hi=gather(b.pressure_high_bar, b.pressure_offset, p),
        s_lo=gather(b.speed_low_rpm, b.speed_offset, s) if is_ps else None,
        s_hi=gather(b.speed_high_rpm, b.speed_offset, s) if is_ps else None,
        hours=hours.reshape(len(src), p, s) if is_ps else hours,
        mean_speed=b.mean_speed_rpm[src],
    )


@dataclass(frozen=True)
class ComponentTable:
    """Model id, model rating, registry row and oil of every component (plain dicts).

    ``life_factors``: the accepted life factor per model id (absent: none accepted); it
    multiplies the registry's rated L10 in :meth:`rated_model`.
    """

    model_of: dict[int, int]
    models: dict[int, ComponentModelSpec]
    rows: dict[int, dict]
    oils: dict[int, OilSpec]
    life_factors: dict[int, float] = field(default_factory=dict)

    def rated_model(self, model_id: int) -> ComponentModelSpec:
        """The model's spec with any accepted life factor applied to ``rated_l10_h`` [h]."""
        spec = self.models[model_id]
        factor = self.life_factors.get(model_id)
        if factor is None:
            return spec
        return replace(spec, rated_l10_h=spec.rated_l10_h * factor)

    def bearing_components(self) -> set[int]:
        """Components whose model has the bearing data of the oil-condition factor."""
        with_data = {mid for mid, m in self.models.items() if m.has_bearing_data}
        return {c for c, mid in self.model_of.items() if mid in with_data}
