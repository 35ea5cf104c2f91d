"""Checks of a parsed file against what the store already holds.

A parsed file is clean on its own (see :mod:`monitor.ingest`); here it is matched
to the fleet registry and to the stored history: unknown units or positions,
periods that overlap a stored upload with different content, hour meters that run
backwards. The result is an :class:`UploadPlan`: what to write, or the problems.
"""

from __future__ import annotations

import hashlib
from dataclasses import dataclass, field
from datetime import timedelta

import numpy as np
import pandas as pd
from sqlalchemy import Connection, and_, select

from monitor import store
from monitor.ledger_batch import gc_paused
from monitor.records import Histogram, ParsedFile, Problem, Reading

HOUR_METER_TOLERANCE_H = 0.01
NEIGHBOUR_WINDOW = timedelta(days=400)  # how far around a file stored uploads are compared


@dataclass
class UploadPlan:
    """Histograms and readings to store (with their component ids), or the problems."""

    histograms: list[tuple[Histogram, int, str]] = field(default_factory=list)  # (h, comp, sha)
    readings: list[tuple[Reading, int]] = field(default_factory=list)
    skipped: int = 0
    problems: list[Problem] = field(default_factory=list)
    component_unit: dict[int, int] = field(default_factory=dict)


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


def _rounded_rows(arrays: list) -> list[bytes]:
    """``np.round(a, 9).tobytes()`` of each array, done once per stack of equal shapes."""
    out: list[bytes] = [b""] * len(arrays)
    by_shape: dict[tuple, list[int]] = {}
    for i, a in enumerate(arrays):
        by_shape.setdefault(np.shape(a), []).append(i)
    for shape, idx in by_shape.items():
        stack = np.round(np.stack([np.asarray(arrays[i], dtype=float) for i in idx]), 9)
        data = stack.tobytes()
        w = 8 * int(np.prod(shape, dtype=np.int64))
        for j, i in enumerate(idx):
            out[i] = data[j * w : (j + 1) * w]
    return out


def histogram_shas(hs: list[Histogram]) -> list[str]:
    """:func:`histogram_sha` of many histograms (the same digests, arrays rounded in stacks)."""
    iso: dict = {}

    def stamp(t) -> str:  # noqa: ANN001
        s = iso.get(t)
        if s is None:
            s = iso[t] = t.isoformat()
        return s

    parts = [
        _rounded_rows([h.pressure_low_bar for h in hs]),
        _rounded_rows([h.pressure_high_bar for h in hs]),
        _rounded_rows([h.hours for h in hs]),
    ]
    speed = [i for i, h in enumerate(hs) if h.speed_low_rpm is not None]
    s_lo = dict(zip(speed, _rounded_rows([hs[i].speed_low_rpm for i in speed]), strict=True))
    s_hi = dict(zip(speed, _rounded_rows([hs[i].speed_high_rpm for i in speed]), strict=True))
    out = []
    for i, h in enumerate(hs):
        head = (
            f"{h.quantity}|{stamp(h.period_start)}|{stamp(h.period_end)}|"
            f"{h.hour_meter_start:.6f}|{h.hour_meter_end:.6f}|"
        ).encode()
        body = parts[0][i] + parts[1][i] + s_lo.get(i, b"") + s_hi.get(i, b"") + parts[2][i]
        out.append(hashlib.sha256(head + body).hexdigest())
    return out


def plan_upload(conn: Connection, parsed: ParsedFile) -> UploadPlan:
    """Match a parsed file to the registry and the stored history."""
    with gc_paused():
        return _plan_upload(conn, parsed)


def _plan_upload(conn: Connection, parsed: ParsedFile) -> UploadPlan:
    plan = UploadPlan()
    keys = {(h.unit, h.position) for h in parsed.histograms}
    keys |= {(r.unit, r.position) for r in parsed.readings}
    lookup = _component_lookup(conn, {u for u, _ in keys})
    name = parsed.name
    resolved = []
    for h in parsed.histograms:
        comp = _resolve(lookup, h.unit, h.position, name, h.line, plan.problems)
        if comp is not None:
            resolved.append((h, comp[0]))
            plan.component_unit[comp[0]] = comp[1]
    shas = histogram_shas([h for h, _ in resolved]) if not plan.problems else []
    plan.histograms = [(h, c, sha) for (h, c), sha in zip(resolved, shas, strict=False)]
    for r in parsed.readings:
        comp = _resolve(lookup, r.unit, r.position, name, r.line, plan.problems)
        if comp is not None:
            plan.readings.append((r, comp[0]))
            plan.component_unit[comp[0]] = comp[1]
    if plan.problems:
        return plan
    _check_overlaps(conn, plan, name)
    _check_hour_meters(conn, plan, name)
    _check_readings(conn, plan, name)
    return plan


def _component_lookup(conn: Connection, tags: set[str]) -> dict[str, dict[str, tuple[int, int]]]:
    c, u = store.component, store.unit
    out: dict[str, dict[str, tuple[int, int]]] = {}
    if not tags:
        return out
    for tag in conn.execute(select(u.c.tag).where(u.c.tag.in_(tags))).scalars():
        out[tag] = {}
    rows = conn.execute(
        select(u.c.tag, c.c.position, c.c.id, u.c.id)
        .join(c, c.c.unit_id == u.c.id)
        .where(u.c.tag.in_(tags))
    ).all()
    for tag, position, comp_id, unit_id in rows:
        out[tag][position] = (comp_id, unit_id)
    return out


def _resolve(lookup, unit, position, name, line, problems):  # noqa: ANN001, ANN202
    if unit not in lookup:
        problems.append(
            Problem(
                name,
                line,
                "unit",
                unit,
                "unit is not in the fleet registry: "
                "add it to the registry and import it first "
                "(drivespan fleet import FILE)",
            )
        )
        return None
    if position not in lookup[unit]:
        known = ", ".join(sorted(lookup[unit])) or "none"
        problems.append(
            Problem(
                name,
                line,
                "position",
                position,
                f"unit {unit} has no component at this position (registered positions: {known})",
            )
        )
        return None
    return lookup[unit][position]


def _utc_times(values: list) -> pd.DatetimeIndex:
    """UTC timestamps of many datetimes, each distinct value converted once."""
    codes: dict = {}
    pos = np.array([codes.setdefault(v, len(codes)) for v in values], dtype=np.int64)
    return pd.DatetimeIndex(pd.to_datetime(list(codes), utc=True)).take(pos)


def _new_histogram_frame(plan: UploadPlan) -> pd.DataFrame:
    hs = plan.histograms
    return pd.DataFrame(
        {
            "component_id": np.array([c for _, c, _ in hs], dtype=np.int64),
            "quantity": [h.quantity for h, _, _ in hs],
            "start": _utc_times([h.period_start for h, _, _ in hs]),
            "end": _utc_times([h.period_end for h, _, _ in hs]),
            "sha": [sha for _, _, sha in hs],
            "line": [h.line for h, _, _ in hs],
            "idx": np.arange(len(hs)),
        }
    )


def _stored_histograms(conn: Connection, new: pd.DataFrame) -> pd.DataFrame:
    t, f, up = store.histogram, store.upload_file, store.upload
    q = (
        select(
            t.c.component_id,
            t.c.quantity,
            t.c.period_start.label("start"),
            t.c.period_end.label("end"),
            t.c.content_sha256.label("sha"),
            t.c.upload_id,
            f.c.name.label("file"),
        )
        .join(up, up.c.id == t.c.upload_id)
        .join(f, f.c.id == up.c.file_id)
        .where(
            t.c.component_id.in_([int(x) for x in new["component_id"].unique()]),
            t.c.period_start < new["end"].max().to_pydatetime(),
            t.c.period_end > new["start"].min().to_pydatetime(),
        )
    )
    df = pd.DataFrame(conn.execute(q).all(), columns=list(q.selected_columns.keys()))
    df["start"] = pd.to_datetime(df["start"], utc=True)
    df["end"] = pd.to_datetime(df["end"], utc=True)
    return df


def _check_overlaps(conn: Connection, plan: UploadPlan, name: str) -> None:
    """Periods of one component and quantity must not overlap unless identical."""
    if not plan.histograms:
        return
    new = _new_histogram_frame(plan)
    stored = _stored_histograms(conn, new)
    if stored.empty:
        return
    both = new.merge(stored, on=["component_id", "quantity"], suffixes=("", "_s"))
    hit = both[(both["start"] < both["end_s"]) & (both["start_s"] < both["end"])]
    same = hit[(hit["sha"] == hit["sha_s"]) & (hit["start"] == hit["start_s"])]
    drop = set(same["idx"])
    for row in hit[~hit["idx"].isin(drop)].itertuples():
        plan.problems.append(
            Problem(
                name,
                row.line,
                "period_start",
                str(row.start.isoformat()),
                f"period overlaps stored upload #{row.upload_id} from file {row.file!r} "
                f"({row.start_s.isoformat()} to {row.end_s.isoformat()}) with different "
                "content: each period of a drive loop is stored once; remove the overlap "
                "or correct the export",
            )
        )
    if drop:
        plan.histograms = [x for i, x in enumerate(plan.histograms) if i not in drop]
        plan.skipped += len(drop)


def _check_hour_meters(conn: Connection, plan: UploadPlan, name: str) -> None:
    """Hour meters of a unit must not run backwards unless a meter change is recorded."""
    if not plan.histograms:
        return
    hs = plan.histograms
    new = pd.DataFrame(
        {
            "unit_id": np.array([plan.component_unit[c] for _, c, _ in hs], dtype=np.int64),
            "start": _utc_times([h.period_start for h, _, _ in hs]),
            "end": _utc_times([h.period_end for h, _, _ in hs]),
            "hm_start": np.array([h.hour_meter_start for h, _, _ in hs], dtype=float),
            "hm_end": np.array([h.hour_meter_end for h, _, _ in hs], dtype=float),
            "line": [h.line for h, _, _ in hs],
            "new": True,
        }
    ).drop_duplicates(["unit_id", "start", "end", "hm_start", "hm_end"])
    stored = _stored_uploads(conn, new)
    changes = _meter_changes(conn, new["unit_id"].unique())
    df = pd.concat([stored, new], ignore_index=True).sort_values(["unit_id", "start", "end"])
    prev = df.groupby("unit_id")[["hm_end", "end", "new"]].shift(1)
    back = df[
        (df["hm_start"] < prev["hm_end"] - HOUR_METER_TOLERANCE_H)
        & (df["new"] | prev["new"].fillna(False).astype(bool))
    ]
    for idx, row in back.iterrows():
        if _change_between(changes, row.unit_id, prev.loc[idx, "end"], row.start):
            continue
        plan.problems.append(
            Problem(
                name,
                None if pd.isna(row.line) else int(row.line),
                "hour_meter_start",
                f"{row.hm_start:g}",
                f"hour meter runs backwards: {prev.loc[idx, 'hm_end']:g} h at "
                f"{prev.loc[idx, 'end'].isoformat()} then {row.hm_start:g} h at "
                f"{row.start.isoformat()}; if the meter was changed, record an "
                "hour_meter_change service event in the registry first",
            )
        )


def _stored_uploads(conn: Connection, new: pd.DataFrame) -> pd.DataFrame:
    t = store.upload
    lo = new["start"].min().to_pydatetime() - NEIGHBOUR_WINDOW
    hi = new["end"].max().to_pydatetime() + NEIGHBOUR_WINDOW
    q = select(
        t.c.unit_id, t.c.period_start, t.c.period_end, t.c.hour_meter_start, t.c.hour_meter_end
    ).where(
        t.c.unit_id.in_([int(x) for x in new["unit_id"].unique()]),
        t.c.period_start >= lo,
        t.c.period_start <= hi,
    )
    df = pd.DataFrame(
        conn.execute(q).all(), columns=["unit_id", "start", "end", "hm_start", "hm_end"]
    )
    df["start"] = pd.to_datetime(df["start"], utc=True)
    df["end"] = pd.to_datetime(df["end"], utc=True)
    df["new"] = False
    df["line"] = np.nan
    return df


def _meter_changes(conn: Connection, unit_ids) -> pd.DataFrame:  # noqa: ANN001
    t = store.service_event
    q = select(t.c.unit_id, t.c.at).where(
        and_(t.c.kind == "hour_meter_change", t.c.unit_id.in_([int(u) for u in unit_ids]))
    )
    df = pd.DataFrame(conn.execute(q).all(), columns=["unit_id", "at"])
    df["at"] = pd.to_datetime(df["at"], utc=True)
    return df


def _change_between(changes: pd.DataFrame, unit_id, t0, t1) -> bool:  # noqa: ANN001
    sel = changes[(changes["unit_id"] == unit_id)]
    return bool(((sel["at"] >= t0) & (sel["at"] <= t1)).any())


def _check_readings(conn: Connection, plan: UploadPlan, name: str) -> None:
    """A reading already stored for the same component and time must be identical."""
    if not plan.readings:
        return
    t = store.reading
    comps = list({c for _, c in plan.readings})
    rows = conn.execute(
        select(
            t.c.component_id,
            t.c.taken_at,
            t.c.case_drain_lpm,
            t.c.test_pressure_bar,
            t.c.oil_temp_c,
            t.c.iso4406,
        ).where(t.c.component_id.in_(comps))
    ).all()
    stored = {
        (r[0], pd.Timestamp(r[1], tz="UTC") if r[1].tzinfo is None else pd.Timestamp(r[1])): r[2:]
        for r in rows
    }
    keep = []
    for r, comp in plan.readings:
        key = (comp, pd.Timestamp(r.taken_at))
        if key not in stored:
            keep.append((r, comp))
            continue
        values = (r.case_drain_lpm, r.test_pressure_bar, r.oil_temp_c, r.iso4406)
        if _same_values(stored[key], values):
            plan.skipped += 1
        else:
            plan.problems.append(
                Problem(
                    name,
                    r.line,
                    "taken_at",
                    r.taken_at.isoformat(),
                    f"a different reading of {r.unit} {r.position} at this time is already "
                    "stored: correct the time or the values",
                )
            )
    plan.readings = keep


def _same_values(a, b) -> bool:  # noqa: ANN001
    for x, y in zip(a, b, strict=True):
        if x is None or y is None or isinstance(x, str):
            if x != y and not (_isnan(x) and _isnan(y)):
                return False
        elif abs(float(x) - float(y)) > 1e-9 * max(1.0, abs(float(y))):
            return False
    return True


def _isnan(v) -> bool:  # noqa: ANN001
    return v is None or (isinstance(v, float) and np.isnan(v))
