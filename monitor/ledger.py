"""The damage ledger: one row per upload and component, written at ingest.

Damage is additive, so it is computed once per upload with the life models and
kept; a ranking is then a few index seeks per component over running totals
(the ``cum_*`` columns) instead of a re-read of every histogram. ``recompute``
rebuilds the whole ledger from the stored histograms after a model or registry
change; its result equals what ingest wrote.

Damage is stored at the 90 % reliability reference (a1 = 1): the planning
reliability is applied when a status is computed, so it can change per request.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
import pandas as pd
from sqlalchemy import Connection, delete, func, select, update

from monitor import queries, relief, spectrum, store
from monitor.records import QUANTITY_PRESSURE_SPEED, ComponentModelSpec, Histogram

CUM_COLUMNS = {
    "cum_meter_hours": "meter_hours",
    "cum_hours": "hours",
    "cum_damage": "damage",
    "cum_relief_hours": "relief_hours",
    "cum_cutoff_hours": "cutoff_hours",
    "cum_relief_heat_kwh": "relief_heat_kwh",
}
RECOMPUTE_CHUNK = 200  # components per read/compute/write round of recompute


@dataclass(frozen=True)
class Metrics:
    """Per-histogram results of the life models (arrays of equal length)."""

    hours: np.ndarray
    damage: np.ndarray
    relief_hours: np.ndarray
    cutoff_hours: np.ndarray
    relief_heat_kwh: np.ndarray


def _model_kwargs(m: ComponentModelSpec) -> dict:
    return dict(
        rated_life_h=m.rated_l10_h,
        rated_dp_bar=m.rated_dp_bar,
        rated_speed_rpm=m.rated_speed_rpm,
        life_exponent=m.life_exponent,
        low_side_bar=m.low_side_bar,
    )


def _stack(hs: list[Histogram], attr: str) -> np.ndarray:
    return np.stack([np.asarray(getattr(h, attr), dtype=float) for h in hs])


def metrics_for(hs: list[Histogram], m: ComponentModelSpec) -> Metrics:
    """Life-model results for histograms of one component model, batched by shape."""
    n = len(hs)
    out = {k: np.zeros(n) for k in Metrics.__dataclass_fields__}
    groups: dict[tuple, list[int]] = {}
    for i, h in enumerate(hs):
        groups.setdefault((h.quantity, np.shape(h.hours)), []).append(i)
    for (quantity, _), idx in groups.items():
        part = [hs[i] for i in idx]
        res = _metrics_same_shape(part, quantity, m)
        for k, v in res.items():
            out[k][idx] = v
    return Metrics(**out)


def _metrics_same_shape(hs: list[Histogram], quantity: str, m: ComponentModelSpec) -> dict:
    p_lo, p_hi = _stack(hs, "pressure_low_bar"), _stack(hs, "pressure_high_bar")
    hours = _stack(hs, "hours")
    kw = _model_kwargs(m)
    if quantity == QUANTITY_PRESSURE_SPEED:
        s_lo, s_hi = _stack(hs, "speed_low_rpm"), _stack(hs, "speed_high_rpm")
        damage = spectrum.damage_2d(p_lo, p_hi, s_lo, s_hi, hours, **kw)
        band_hours = hours.sum(axis=2)
        speed = np.where(band_hours > 0,
                         (hours * (0.5 * (s_lo + s_hi))[:, None, :]).sum(axis=2)
                         / np.where(band_hours > 0, band_hours, 1.0), m.rated_speed_rpm)
    else:
        mean = np.array([np.nan if h.mean_speed_rpm is None else h.mean_speed_rpm for h in hs])
        damage = spectrum.damage_1d(p_lo, p_hi, hours, mean_speed_rpm=mean, **kw)
        band_hours = hours
        speed = np.where(np.isnan(mean), m.rated_speed_rpm, mean)[:, None] * np.ones_like(p_lo)
    rel = relief.relief_summary(
        p_lo, p_hi, band_hours, speed_rpm=speed, displacement_cm3=m.displacement_cm3,
        relief_bar=m.relief_bar, cutoff_bar=m.cutoff_bar, low_side_bar=m.low_side_bar,
    )
    return {
        "hours": band_hours.sum(axis=1),
        "damage": damage,
        "relief_hours": rel.relief_hours,
        "cutoff_hours": rel.cutoff_hours,
        "relief_heat_kwh": rel.relief_heat_kwh,
    }


# --- writing at ingest --------------------------------------------------------------


def write_upload(conn: Connection, file_id: int, plan) -> None:  # noqa: ANN001 - UploadPlan
    """Store a checked file's uploads, histograms, readings and their ledger rows."""
    upload_ids = _insert_uploads(conn, file_id, plan)
    _insert_histograms(conn, plan, upload_ids)
    _insert_readings(conn, file_id, plan)
    if not plan.histograms:
        return
    comps = queries.components_frame(conn).set_index("component_id")
    rows = _ledger_rows(plan, upload_ids, comps)
    conn.execute(store.ledger.insert(), rows.to_dict("records"))
    starts = rows.groupby("component_id")["period_end"].min()
    refresh_cumulative(conn, starts.index.tolist(), starts.min())


def _upload_key(h: Histogram, unit_id: int) -> tuple:
    return (unit_id, h.period_start, h.period_end, h.hour_meter_start, h.hour_meter_end)


def _insert_uploads(conn: Connection, file_id: int, plan) -> dict[tuple, int]:  # noqa: ANN001
    keys = list(dict.fromkeys(
        _upload_key(h, plan.component_unit[c]) for h, c, _ in plan.histograms))
    if not keys:
        return {}
    rows = [dict(file_id=file_id, unit_id=k[0], period_start=k[1], period_end=k[2],
                 hour_meter_start=k[3], hour_meter_end=k[4]) for k in keys]
    t = store.upload
    stmt = t.insert().returning(t.c.id, sort_by_parameter_order=True)
    ids = conn.execute(stmt, rows).scalars().all()
    return dict(zip(keys, ids, strict=True))


def _insert_histograms(conn: Connection, plan, upload_ids: dict) -> None:  # noqa: ANN001
    rows = []
    for h, comp, sha in plan.histograms:
        speed = None
        if h.speed_low_rpm is not None:
            speed = store.pack(np.concatenate([h.speed_low_rpm, h.speed_high_rpm]))
        rows.append(dict(
            upload_id=upload_ids[_upload_key(h, plan.component_unit[comp])],
            component_id=comp, quantity=h.quantity,
            period_start=h.period_start, period_end=h.period_end,
            n_pressure=len(h.pressure_low_bar),
            n_speed=0 if h.speed_low_rpm is None else len(h.speed_low_rpm),
            pressure_bands=store.pack(np.concatenate([h.pressure_low_bar, h.pressure_high_bar])),
            speed_bands=speed, hours=store.pack(h.hours), total_hours=h.total_hours,
            mean_speed_rpm=h.mean_speed_rpm, content_sha256=sha))
    if rows:
        conn.execute(store.histogram.insert(), rows)


def _insert_readings(conn: Connection, file_id: int, plan) -> None:  # noqa: ANN001
    rows = [dict(file_id=file_id, component_id=comp, taken_at=r.taken_at,
                 hour_meter=r.hour_meter, case_drain_lpm=r.case_drain_lpm,
                 test_pressure_bar=r.test_pressure_bar, oil_temp_c=r.oil_temp_c,
                 iso4406=r.iso4406) for r, comp in plan.readings]
    if rows:
        conn.execute(store.reading.insert(), rows)


def _select_for_ledger(items: list[tuple[Histogram, int, tuple]]) -> list[tuple]:
    """One histogram per (upload, component): a pressure-by-speed matrix wins."""
    chosen: dict[tuple, tuple] = {}
    for h, comp, ukey in items:
        k = (ukey, comp)
        if k not in chosen or h.quantity == QUANTITY_PRESSURE_SPEED:
            chosen[k] = (h, comp, ukey)
    return list(chosen.values())


def _ledger_rows(plan, upload_ids: dict, comps: pd.DataFrame) -> pd.DataFrame:  # noqa: ANN001
    items = [(h, c, _upload_key(h, plan.component_unit[c])) for h, c, _ in plan.histograms]
    items = _select_for_ledger(items)
    frames = []
    by_model: dict[int, list] = {}
    for it in items:
        by_model.setdefault(int(comps.loc[it[1], "model_id"]), []).append(it)
    for group in by_model.values():
        model = queries.model_spec(comps.loc[group[0][1]])
        met = metrics_for([g[0] for g in group], model)
        frames.append(pd.DataFrame({
            "upload_id": [upload_ids[g[2]] for g in group],
            "component_id": [g[1] for g in group],
            "period_end": [g[0].period_end for g in group],
            "hour_meter_end": [g[0].hour_meter_end for g in group],
            "meter_hours": [g[0].hour_meter_end - g[0].hour_meter_start for g in group],
            **{k: getattr(met, k) for k in Metrics.__dataclass_fields__},
        }))
    return pd.concat(frames, ignore_index=True)


# --- running totals -----------------------------------------------------------------


def refresh_cumulative(conn: Connection, component_ids: list[int], since) -> None:  # noqa: ANN001
    """Recalculate the running totals of some components from ``since`` on."""
    t = store.ledger
    cols = [t.c.id, t.c.component_id, t.c.period_end, t.c.upload_id,
            *[t.c[v] for v in CUM_COLUMNS.values()]]
    ids = [int(c) for c in component_ids]
    later = pd.DataFrame(conn.execute(select(*cols).where(
        t.c.component_id.in_(ids), t.c.period_end >= since)).all(),
        columns=[c.name for c in cols])
    base = _base_totals(conn, ids, since)
    later = later.sort_values(["component_id", "period_end", "upload_id"])
    g = later.groupby("component_id")
    for cum, col in CUM_COLUMNS.items():
        later[cum] = g[col].cumsum() + later["component_id"].map(base[cum]).fillna(0.0)
    params = later[["id", *CUM_COLUMNS]].rename(columns={"id": "b_id"}).to_dict("records")
    if params:
        from sqlalchemy import bindparam

        stmt = update(t).where(t.c.id == bindparam("b_id")).values(
            **{c: bindparam(c) for c in CUM_COLUMNS})
        conn.execute(stmt, params)


def _base_totals(conn: Connection, ids: list[int], since) -> pd.DataFrame:  # noqa: ANN001
    """Running totals of each component's last ledger row before ``since``."""
    t = store.ledger
    last = (select(t.c.component_id, func.max(t.c.period_end).label("pe"))
            .where(t.c.component_id.in_(ids), t.c.period_end < since)
            .group_by(t.c.component_id).subquery())
    q = select(t.c.component_id, t.c.upload_id, *[t.c[c] for c in CUM_COLUMNS]).join(
        last, (last.c.component_id == t.c.component_id) & (last.c.pe == t.c.period_end))
    df = pd.DataFrame(conn.execute(q).all(),
                      columns=["component_id", "upload_id", *CUM_COLUMNS])
    df = df.sort_values("upload_id").drop_duplicates("component_id", keep="last")
    return df.set_index("component_id")


# --- recompute ----------------------------------------------------------------------


def recompute(conn: Connection, progress: Callable[[int, int], None] | None = None) -> int:
    """Rebuild the whole ledger from the stored histograms; return the row count."""
    conn.execute(delete(store.ledger))
    comps = queries.components_frame(conn).set_index("component_id")
    ids = comps.index.tolist()
    written = 0
    for start in range(0, len(ids), RECOMPUTE_CHUNK):
        chunk = ids[start : start + RECOMPUTE_CHUNK]
        rows = _recompute_rows(conn, chunk, comps)
        if not rows.empty:
            conn.execute(store.ledger.insert(), rows.to_dict("records"))
            written += len(rows)
        if progress is not None:
            progress(min(start + RECOMPUTE_CHUNK, len(ids)), len(ids))
    return written


def _recompute_rows(conn: Connection, chunk: list[int], comps: pd.DataFrame) -> pd.DataFrame:
    hs, ukeys = stored_histograms(conn, chunk)
    if not hs:
        return pd.DataFrame()
    items = _select_for_ledger([(h, c, k) for (h, c), k in zip(hs, ukeys, strict=True)])
    frames = []
    by_model: dict[int, list] = {}
    for it in items:
        by_model.setdefault(int(comps.loc[it[1], "model_id"]), []).append(it)
    for group in by_model.values():
        model = queries.model_spec(comps.loc[group[0][1]])
        met = metrics_for([g[0] for g in group], model)
        frames.append(pd.DataFrame({
            "upload_id": [g[2] for g in group],
            "component_id": [g[1] for g in group],
            "period_end": [g[0].period_end for g in group],
            "hour_meter_end": [g[0].hour_meter_end for g in group],
            "meter_hours": [g[0].hour_meter_end - g[0].hour_meter_start for g in group],
            **{k: getattr(met, k) for k in Metrics.__dataclass_fields__},
        }))
    rows = pd.concat(frames, ignore_index=True)
    rows = rows.sort_values(["component_id", "period_end", "upload_id"], kind="stable")
    g = rows.groupby("component_id")
    for cum, col in CUM_COLUMNS.items():
        rows[cum] = g[col].cumsum()
    return rows


def stored_histograms(conn: Connection, component_ids: list[int]) -> tuple[list, list]:
    """Stored histograms of some components as (Histogram, component_id) with upload ids."""
    t, u = store.histogram, store.upload
    q = (select(t, u.c.hour_meter_start, u.c.hour_meter_end, u.c.period_end.label("u_end"))
         .join(u, u.c.id == t.c.upload_id)
         .where(t.c.component_id.in_(component_ids))
         .order_by(t.c.component_id, u.c.period_end, t.c.upload_id))
    out, keys = [], []
    for r in conn.execute(q).mappings():
        out.append((histogram_from_row(r), r["component_id"]))
        keys.append(r["upload_id"])
    return out, keys


def histogram_from_row(r) -> Histogram:  # noqa: ANN001 - a row mapping
    """Rebuild a :class:`Histogram` from a stored ``histogram`` row joined with its upload."""
    n_p, n_s = r["n_pressure"], r["n_speed"]
    bands = store.unpack(r["pressure_bands"])
    s_lo = s_hi = None
    shape: tuple[int, ...] = (n_p,)
    if n_s:
        sb = store.unpack(r["speed_bands"])
        s_lo, s_hi, shape = sb[:n_s], sb[n_s:], (n_p, n_s)
    return Histogram(
        unit="", position="", quantity=r["quantity"],
        period_start=r["period_start"], period_end=r["u_end"],
        hour_meter_start=r["hour_meter_start"], hour_meter_end=r["hour_meter_end"],
        pressure_low_bar=bands[:n_p], pressure_high_bar=bands[n_p:],
        hours=store.unpack(r["hours"], shape), speed_low_rpm=s_lo, speed_high_rpm=s_hi,
        mean_speed_rpm=r["mean_speed_rpm"])
