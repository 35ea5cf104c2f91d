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

from monitor import bearings, queries, relief, spectrum, store
from monitor import oil as oil_mod
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
    return None not in (
        m.bearing_type,
        m.bearing_pitch_diameter_mm,
        m.bearing_fatigue_limit_kn,
        m.bearing_load_at_rated_kn,
    )


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


def _metrics_same_shape(
    hs: list[Histogram], quantity: str, m: ComponentModelSpec, oil: OilCondition | None
) -> dict:
    p_lo, p_hi = _stack(hs, "pressure_low_bar"), _stack(hs, "pressure_high_bar")
    hours = _stack(hs, "hours")
    kw = _model_kwargs(m)
    if quantity == QUANTITY_PRESSURE_SPEED:
        s_lo, s_hi = _stack(hs, "speed_low_rpm"), _stack(hs, "speed_high_rpm")
        dp, speed3 = spectrum.band_conditions_2d(
            p_lo, p_hi, s_lo, s_hi, len(hs), low_side_bar=m.low_side_bar
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
        mean = np.array([np.nan if h.mean_speed_rpm is None else h.mean_speed_rpm for h in hs])
        dp, speed = spectrum.band_conditions_1d(
            p_lo,
            p_hi,
            len(hs),
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


# --- writing at ingest --------------------------------------------------------------


def write_upload(conn: Connection, file_id: int, plan) -> None:  # noqa: ANN001 - UploadPlan
    """Store a checked file's uploads, histograms, readings and their ledger rows.

    New ISO 4406 samples change the oil-condition factor of later uploads, so the
    ledger of a component with bearing data that got a new sample is rebuilt whole.
    """
    upload_ids = _insert_uploads(conn, file_id, plan)
    _insert_histograms(conn, plan, upload_ids)
    _insert_readings(conn, file_id, plan)
    comps = queries.components_frame(conn).set_index("component_id")
    resampled = sorted(
        {c for r, c in plan.readings if r.iso4406}
        & {c for c in comps.index if has_bearing_data(queries.model_spec(comps.loc[c]))}
    )
    if resampled:
        rebuild_components(conn, resampled, comps)
    items = [
        (h, c, upload_ids[_upload_key(h, plan.component_unit[c])])
        for h, c, _ in plan.histograms
        if c not in set(resampled)
    ]
    if not items:
        return
    rows = _rows_for(conn, _select_for_ledger(items), comps)
    conn.execute(store.ledger.insert(), rows.to_dict("records"))
    starts = rows.groupby("component_id")["period_end"].min()
    refresh_cumulative(conn, starts.index.tolist(), starts.min())


def _upload_key(h: Histogram, unit_id: int) -> tuple:
    return (unit_id, h.period_start, h.period_end, h.hour_meter_start, h.hour_meter_end)


def _insert_uploads(conn: Connection, file_id: int, plan) -> dict[tuple, int]:  # noqa: ANN001
    keys = list(
        dict.fromkeys(_upload_key(h, plan.component_unit[c]) for h, c, _ in plan.histograms)
    )
    if not keys:
        return {}
    rows = [
        dict(
            file_id=file_id,
            unit_id=k[0],
            period_start=k[1],
            period_end=k[2],
            hour_meter_start=k[3],
            hour_meter_end=k[4],
        )
        for k in keys
    ]
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
        rows.append(
            dict(
                upload_id=upload_ids[_upload_key(h, plan.component_unit[comp])],
                component_id=comp,
                quantity=h.quantity,
                period_start=h.period_start,
                period_end=h.period_end,
                n_pressure=len(h.pressure_low_bar),
                n_speed=0 if h.speed_low_rpm is None else len(h.speed_low_rpm),
                pressure_bands=store.pack(
                    np.concatenate([h.pressure_low_bar, h.pressure_high_bar])
                ),
                speed_bands=speed,
                hours=store.pack(h.hours),
                total_hours=h.total_hours,
                mean_speed_rpm=h.mean_speed_rpm,
                content_sha256=sha,
            )
        )
    if rows:
        conn.execute(store.histogram.insert(), rows)


def _insert_readings(conn: Connection, file_id: int, plan) -> None:  # noqa: ANN001
    rows = [
        dict(
            file_id=file_id,
            component_id=comp,
            taken_at=r.taken_at,
            hour_meter=r.hour_meter,
            case_drain_lpm=r.case_drain_lpm,
            test_pressure_bar=r.test_pressure_bar,
            oil_temp_c=r.oil_temp_c,
            iso4406=r.iso4406,
        )
        for r, comp in plan.readings
    ]
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


def _rows_for(conn: Connection, items: list[tuple], comps: pd.DataFrame) -> pd.DataFrame:
    """Ledger rows (without running totals) of (histogram, component, upload id) items."""
    by_model: dict[int, list] = {}
    for it in items:
        by_model.setdefault(int(comps.loc[it[1], "model_id"]), []).append(it)
    samples = _oil_samples(conn, sorted({it[1] for it in items}))
    frames = []
    for group in by_model.values():
        first = comps.loc[group[0][1]]
        model = queries.model_spec(first)
        oil = _group_oil(group, comps, model, samples)
        met = metrics_for([g[0] for g in group], model, oil)
        frames.append(
            pd.DataFrame(
                {
                    "upload_id": [g[2] for g in group],
                    "component_id": [g[1] for g in group],
                    "period_end": [g[0].period_end for g in group],
                    "hour_meter_end": [g[0].hour_meter_end for g in group],
                    "meter_hours": [g[0].hour_meter_end - g[0].hour_meter_start for g in group],
                    **{k: getattr(met, k) for k in Metrics.__dataclass_fields__},
                }
            )
        )
    return pd.concat(frames, ignore_index=True)


def _group_oil(
    group: list, comps: pd.DataFrame, model: ComponentModelSpec, samples: dict[int, pd.DataFrame]
) -> OilCondition | None:
    """Oil condition of every item of one model group, in item order (None if unknown)."""
    if not has_bearing_data(model):
        return None
    nu = np.full(len(group), np.nan)
    ec = np.full(len(group), np.nan)
    idx_by_comp: dict[int, list[int]] = {}
    for i, g in enumerate(group):
        idx_by_comp.setdefault(g[1], []).append(i)
    for comp, idx in idx_by_comp.items():
        if comp not in samples:
            continue
        line = oil_mod.oil_line_from_spec(**_oil_kwargs(comps.loc[comp]))
        cond = oil_condition(samples[comp], [group[i][0].period_end for i in idx], model, line)
        if cond is not None:
            nu[idx], ec[idx] = cond.viscosity_mm2s, cond.contamination_ec
    return OilCondition(nu, ec)


def _oil_kwargs(row: pd.Series) -> dict:
    spec = queries.oil_spec(row)
    return dict(
        iso_vg=spec.iso_vg,
        viscosity_index=spec.viscosity_index,
        nu40_mm2s=spec.nu40_mm2s,
        nu100_mm2s=spec.nu100_mm2s,
    )


def _oil_samples(conn: Connection, comp_ids: list[int]) -> dict[int, pd.DataFrame]:
    """ISO 4406 samples of some components, keyed by component id."""
    t = store.reading
    if not comp_ids:
        return {}
    q = select(t.c.component_id, t.c.taken_at, t.c.iso4406).where(
        t.c.component_id.in_(comp_ids), t.c.iso4406.is_not(None)
    )
    df = pd.DataFrame(conn.execute(q).all(), columns=["component_id", "taken_at", "iso4406"])
    return {int(c): g for c, g in df.groupby("component_id")}


# --- running totals -----------------------------------------------------------------


def refresh_cumulative(conn: Connection, component_ids: list[int], since) -> None:  # noqa: ANN001
    """Recalculate the running totals of some components from ``since`` on."""
    t = store.ledger
    cols = [
        t.c.id,
        t.c.component_id,
        t.c.period_end,
        t.c.upload_id,
        *[t.c[v] for v in CUM_COLUMNS.values()],
    ]
    ids = [int(c) for c in component_ids]
    later = pd.DataFrame(
        conn.execute(select(*cols).where(t.c.component_id.in_(ids), t.c.period_end >= since)).all(),
        columns=[c.name for c in cols],
    )
    base = _base_totals(conn, ids, since)
    later = later.sort_values(["component_id", "period_end", "upload_id"])
    g = later.groupby("component_id")
    for cum, col in CUM_COLUMNS.items():
        later[cum] = g[col].cumsum() + later["component_id"].map(base[cum]).fillna(0.0)
    params = later[["id", *CUM_COLUMNS]].rename(columns={"id": "b_id"}).to_dict("records")
    if params:
        from sqlalchemy import bindparam

        stmt = (
            update(t)
            .where(t.c.id == bindparam("b_id"))
            .values(**{c: bindparam(c) for c in CUM_COLUMNS})
        )
        conn.execute(stmt, params)


def _base_totals(conn: Connection, ids: list[int], since) -> pd.DataFrame:  # noqa: ANN001
    """Running totals of each component's last ledger row before ``since``."""
    t = store.ledger
    last = (
        select(t.c.component_id, func.max(t.c.period_end).label("pe"))
        .where(t.c.component_id.in_(ids), t.c.period_end < since)
        .group_by(t.c.component_id)
        .subquery()
    )
    q = select(t.c.component_id, t.c.upload_id, *[t.c[c] for c in CUM_COLUMNS]).join(
        last, (last.c.component_id == t.c.component_id) & (last.c.pe == t.c.period_end)
    )
    df = pd.DataFrame(conn.execute(q).all(), columns=["component_id", "upload_id", *CUM_COLUMNS])
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
    hs, upload_ids = stored_histograms(conn, chunk)
    if not hs:
        return pd.DataFrame()
    items = _select_for_ledger([(h, c, k) for (h, c), k in zip(hs, upload_ids, strict=True)])
    rows = _rows_for(conn, items, comps)
    rows = rows.sort_values(["component_id", "period_end", "upload_id"], kind="stable")
    g = rows.groupby("component_id")
    for cum, col in CUM_COLUMNS.items():
        rows[cum] = g[col].cumsum()
    return rows


def rebuild_components(conn: Connection, comp_ids: list[int], comps: pd.DataFrame) -> None:
    """Delete and rewrite the ledger rows of some components from their histograms."""
    conn.execute(delete(store.ledger).where(store.ledger.c.component_id.in_(comp_ids)))
    rows = _recompute_rows(conn, comp_ids, comps)
    if not rows.empty:
        conn.execute(store.ledger.insert(), rows.to_dict("records"))


def stored_histograms(conn: Connection, component_ids: list[int]) -> tuple[list, list]:
    """Stored histograms of some components as (Histogram, component_id) with upload ids."""
    t, u = store.histogram, store.upload
    q = (
        select(t, u.c.hour_meter_start, u.c.hour_meter_end, u.c.period_end.label("u_end"))
        .join(u, u.c.id == t.c.upload_id)
        .where(t.c.component_id.in_(component_ids))
        .order_by(t.c.component_id, u.c.period_end, t.c.upload_id)
    )
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
        unit="",
        position="",
        quantity=r["quantity"],
        period_start=r["period_start"],
        period_end=r["u_end"],
        hour_meter_start=r["hour_meter_start"],
        hour_meter_end=r["hour_meter_end"],
        pressure_low_bar=bands[:n_p],
        pressure_high_bar=bands[n_p:],
        hours=store.unpack(r["hours"], shape),
        speed_low_rpm=s_lo,
        speed_high_rpm=s_hi,
        mean_speed_rpm=r["mean_speed_rpm"],
    )
