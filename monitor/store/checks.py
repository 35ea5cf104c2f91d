"""Checks of a parsed file against what the store already holds.

A parsed file is clean on its own (see :mod:`monitor.ingest.parse`); here it is matched
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

from monitor.domain.batch import HistogramBatch, group_ids, utc_datetimes
from monitor.domain.parsed import ParsedFile
from monitor.domain.records import Problem, Reading
from monitor.store import blocks, db
from monitor.store.bulk import runs_bytes

HOUR_METER_TOLERANCE_H = 0.01
NEIGHBOUR_WINDOW = timedelta(days=400)  # how far around a file stored uploads are compared


@dataclass
class UploadPlan:
    """Histograms and readings to store (with their component ids), or the problems.

    ``batch`` holds the histograms to store; per histogram of it, ``component_id``,
    ``unit_id`` and ``upload``, the number of its upload (one per unit, period and hour
    meters, numbered in order of first appearance).
    ``upload_first`` is the first histogram of each upload.
    """

    batch: HistogramBatch = field(default_factory=lambda: HistogramBatch.from_histograms([]))
    component_id: np.ndarray = field(default_factory=lambda: np.zeros(0, dtype=np.int64))
    unit_id: np.ndarray = field(default_factory=lambda: np.zeros(0, dtype=np.int64))
    upload: np.ndarray = field(default_factory=lambda: np.zeros(0, dtype=np.int64))
    upload_first: np.ndarray = field(default_factory=lambda: np.zeros(0, dtype=np.int64))
    readings: list[tuple[Reading, int]] = field(default_factory=list)
    skipped: int = 0
    problems: list[Problem] = field(default_factory=list)
    component_unit: dict[int, int] = field(default_factory=dict)

    @property
    def n_histograms(self) -> int:
        """Histograms to store."""
        return len(self.batch)

    def keep(self, rows: np.ndarray) -> None:
        """Keep only the histograms ``rows`` (positions, ascending)."""
        self.batch = self.batch.take(rows)
        self.component_id, self.unit_id = self.component_id[rows], self.unit_id[rows]


DIGEST_ORDER = ("pressure_low_bar", "pressure_high_bar", "speed_low_rpm", "speed_high_rpm", "hours")
"""The band arrays a histogram's content hash reads, in order (after its header)."""


def batch_shas(b: HistogramBatch) -> list[str]:
    """:func:`histogram_sha` of every histogram of a batch: the same digests.

    The bands and hours of all histograms are laid out once in the order the digest
    reads them (pressure low, pressure high, speed low, speed high, hours; each
    histogram's run after the one before) and rounded in one pass. The text header is
    written once per distinct quantity, period and hour meters (both loops of an
    upload share it); each digest then reads its header and a slice of those bytes.
    """
    if len(b) == 0:
        return []
    body, bounds = b.runs(DIGEST_ORDER)
    bodies = runs_bytes(np.round(body, 9), bounds)
    meters = (b.hour_meter_start.view(np.int64), b.hour_meter_end.view(np.int64))  # -0.0 != 0.0
    keys = (b.quantity, b.period_start_ns, b.period_end_ns, *meters)
    head_of = group_ids([pd.factorize(k)[0] for k in keys])
    first = np.unique(head_of, return_index=True)[1]
    iso = _iso_stamps(np.concatenate([b.period_start_ns[first], b.period_end_ns[first]]))
    fields = zip(
        b.quantity[first].tolist(),
        iso[: first.size],
        iso[first.size :],
        b.hour_meter_start[first].tolist(),
        b.hour_meter_end[first].tolist(),
        strict=True,
    )
    heads = np.empty(first.size, dtype=object)
    heads[:] = [f"{q}|{t0}|{t1}|{m0:.6f}|{m1:.6f}|".encode() for q, t0, t1, m0, m1 in fields]
    sha = hashlib.sha256
    return [sha(h + x).hexdigest() for h, x in zip(heads[head_of].tolist(), bodies, strict=True)]


def _iso_stamps(ns: np.ndarray) -> list[str]:
    """ISO 8601 text of UTC timestamps [ns since the epoch], as ``datetime.isoformat``
    writes them; each distinct value is converted once."""
    uniq, inv = np.unique(ns, return_inverse=True)
    text = np.array([t.isoformat() for t in utc_datetimes(uniq)], dtype=object)
    return text[inv.reshape(-1)].tolist()


def plan_upload(conn: Connection, parsed: ParsedFile) -> UploadPlan:
    """Match a parsed file to the registry and the stored history."""
    return _plan_upload(conn, parsed)


def _plan_upload(conn: Connection, parsed: ParsedFile) -> UploadPlan:
    plan = UploadPlan()
    batch = parsed.histogram_batch()
    pairs = _pairs(batch)
    tags = {u for u, _ in pairs} | {r.unit for r in parsed.readings}
    lookup = _component_lookup(conn, tags)
    name = parsed.name
    comp, unit = _resolve_batch(lookup, batch, pairs, name, plan.problems)
    for r in parsed.readings:
        resolved = _resolve(lookup, r.unit, r.position, name, r.line, plan.problems)
        if resolved is not None:
            plan.readings.append((r, resolved[0]))
            plan.component_unit[resolved[0]] = resolved[1]
    if plan.problems:
        return plan
    plan.component_unit.update(zip(comp.tolist(), unit.tolist(), strict=True))
    plan.batch, plan.component_id, plan.unit_id = batch, comp, unit
    _check_overlaps(conn, plan, name)
    _number_uploads(plan)
    _check_hour_meters(conn, plan, name)
    _check_readings(conn, plan, name)
    return plan


def _pairs(b: HistogramBatch) -> dict[tuple[str, str], np.ndarray]:
    """Histogram positions of each (unit, position), in order of first appearance."""
    if len(b) == 0:
        return {}
    codes = [pd.factorize(b.unit)[0], pd.factorize(b.position)[0]]
    gid = group_ids(codes)
    order = np.argsort(gid, kind="stable")
    cut = np.flatnonzero(np.diff(gid[order])) + 1
    groups = np.split(order, cut)
    return {(b.unit[g[0]], b.position[g[0]]): g for g in groups}


def _resolve_batch(lookup, b: HistogramBatch, pairs: dict, name: str, problems: list):  # noqa: ANN001, ANN202
    """Component and unit id per histogram (-1 where unknown); a problem per histogram
    whose unit or position is not registered, in histogram order."""
    comp = np.full(len(b), -1, dtype=np.int64)
    unit = np.full(len(b), -1, dtype=np.int64)
    bad = []
    for (u, pos), rows in pairs.items():
        found = lookup.get(u, {}).get(pos)
        if found is None:
            bad.append(rows)
        else:
            comp[rows], unit[rows] = found
    lines = [None] * len(b) if b.line is None else b.line.tolist()
    for i in np.sort(np.concatenate(bad)).tolist() if bad else []:
        _resolve(lookup, b.unit[i], b.position[i], name, lines[i], problems)
    return comp, unit


def _component_lookup(conn: Connection, tags: set[str]) -> dict[str, dict[str, tuple[int, int]]]:
    c, u = db.component, db.unit
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


def _utc(ns: np.ndarray) -> pd.DatetimeIndex:
    """UTC timestamps of int64 ns since the epoch."""
    return pd.DatetimeIndex(pd.to_datetime(ns, unit="ns", utc=True))


def _lines(b: HistogramBatch) -> list:
    return [None] * len(b) if b.line is None else b.line.tolist()


def _new_histogram_frame(plan: UploadPlan, rows: np.ndarray) -> pd.DataFrame:
    """The histograms ``rows`` of the plan; ``idx`` is their position in the plan."""
    b, lines = plan.batch, _lines(plan.batch)
    return pd.DataFrame(
        {
            "component_id": plan.component_id[rows],
            "quantity": b.quantity[rows],
            "start": _utc(b.period_start_ns[rows]),
            "end": _utc(b.period_end_ns[rows]),
            "sha": batch_shas(b.take(rows)),
            "line": [lines[i] for i in rows.tolist()],
            "idx": rows,
        }
    )


def _stored_histograms(conn: Connection, new: pd.DataFrame) -> pd.DataFrame:
    """Stored histograms of the new histograms' components that overlap their span."""
    stored = blocks.overlapping(
        conn,
        [int(x) for x in new["component_id"].unique()],
        new["start"].min().to_pydatetime(),
        new["end"].max().to_pydatetime(),
    )
    names = blocks.file_names(conn, np.unique(stored.file_id).tolist())
    b = stored.batch
    return pd.DataFrame(
        {
            "component_id": stored.component_id,
            "quantity": b.quantity,
            "start": _utc(b.period_start_ns),
            "end": _utc(b.period_end_ns),
            "sha": batch_shas(b),
            "upload_id": stored.upload_id,
            "file": [names[i] for i in stored.file_id.tolist()],
        }
    )


def _early_components(conn: Connection, plan: UploadPlan) -> np.ndarray:
    """Components with a new histogram that starts before the end of the last stored
    histogram of the same quantity; the others cannot overlap a stored period.

    One index seek per component and quantity.
    """
    b = plan.batch
    early = []
    for quantity in pd.unique(b.quantity).tolist():
        sel = b.quantity == quantity
        first = pd.Series(b.period_start_ns[sel]).groupby(plan.component_id[sel]).min()
        stored = blocks.last_ends(conn, [int(x) for x in first.index], quantity)
        if stored:
            ids = np.array(list(stored), dtype=np.int64)
            ends = pd.DatetimeIndex(pd.to_datetime(list(stored.values()), utc=True))
            starts = first.loc[ids].to_numpy()
            early.append(ids[starts < ends.as_unit("ns").asi8])
    return np.unique(np.concatenate(early)) if early else np.zeros(0, dtype=np.int64)


def _check_overlaps(conn: Connection, plan: UploadPlan, name: str) -> None:
    """Periods of one component and quantity must not overlap unless identical."""
    if not plan.n_histograms:
        return
    early = _early_components(conn, plan)
    if not early.size:
        return
    new = _new_histogram_frame(plan, np.flatnonzero(np.isin(plan.component_id, early)))
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
        plan.keep(np.setdiff1d(np.arange(plan.n_histograms), np.fromiter(drop, np.int64)))
        plan.skipped += len(drop)


def _number_uploads(plan: UploadPlan) -> None:
    """Number the uploads of the histograms to store: one per unit, period and hour
    meters, in order of first appearance."""
    b = plan.batch
    if not len(b):
        return
    meters = (b.hour_meter_start + 0.0, b.hour_meter_end + 0.0)  # -0.0 reads as 0.0
    keys = (plan.unit_id, b.period_start_ns, b.period_end_ns, *meters)
    plan.upload = group_ids([pd.factorize(k)[0] for k in keys])
    plan.upload_first = np.unique(plan.upload, return_index=True)[1]


def _check_hour_meters(conn: Connection, plan: UploadPlan, name: str) -> None:
    """Hour meters of a unit must not run backwards unless a meter change is recorded.

    The new uploads and the stored ones near them are sorted per unit by period; an
    upload whose meter starts below where the one before it ended is flagged when
    either of the two is new. Uploads of the same period and meter readings (the two
    loops of a unit sent in different files) are one upload of the unit.
    """
    if not plan.n_histograms:
        return
    b, f = plan.batch, plan.upload_first
    lines = _lines(b)
    unit = plan.unit_id[f]
    stored = _stored_uploads(conn, unit, b.period_start_ns[f], b.period_end_ns[f])
    rows = {
        "unit": np.r_[stored["unit"], unit],
        "start": np.r_[stored["start"], b.period_start_ns[f]],
        "end": np.r_[stored["end"], b.period_end_ns[f]],
        "hm_start": np.r_[stored["hm_start"], b.hour_meter_start[f]],
        "hm_end": np.r_[stored["hm_end"], b.hour_meter_end[f]],
        "new": np.r_[np.zeros(stored["unit"].size, bool), np.ones(f.size, bool)],
    }
    o = np.lexsort((rows["end"], rows["start"], rows["unit"]))  # stable: stored first
    r = {k: v[o] for k, v in rows.items()}
    same = r["unit"][1:] == r["unit"][:-1]
    with np.errstate(invalid="ignore"):
        back = same & (r["hm_start"][1:] < r["hm_end"][:-1] - HOUR_METER_TOLERANCE_H)
    back &= r["new"][1:] | r["new"][:-1]
    # the other loop's histogram of a stored period is the same upload of the unit, not a
    # step back: equal period and meter readings are one upload
    back &= ~_same_upload(r)
    if not back.any():
        return
    changes = _meter_changes(conn, np.unique(unit))
    n_stored = stored["unit"].size
    for j in (np.flatnonzero(back) + 1).tolist():
        k, p = int(o[j]), int(o[j - 1])
        start, prev_end = _stamp(rows["start"][k]), _stamp(rows["end"][p])
        if _change_between(changes, int(rows["unit"][k]), prev_end, start):
            continue
        hm_start = float(rows["hm_start"][k])
        plan.problems.append(
            Problem(
                name,
                lines[int(f[k - n_stored])] if k >= n_stored else None,
                "hour_meter_start",
                f"{hm_start:g}",
                _meter_message(rows, k, p, start, prev_end),
            )
        )


def _meter_message(rows: dict, k: int, p: int, start, prev_end) -> str:  # noqa: ANN001
    """What is wrong when upload ``k`` starts below where upload ``p`` ended."""
    hm_start, hm_end_prev = float(rows["hm_start"][k]), float(rows["hm_end"][p])
    if rows["start"][k] == rows["start"][p] and rows["end"][k] == rows["end"][p]:
        return (
            f"another upload of this unit for the same period gives the hour meter as "
            f"{float(rows['hm_start'][p]):g}-{hm_end_prev:g} h, this one "
            f"{hm_start:g}-{float(rows['hm_end'][k]):g} h: every drive loop of a unit "
            "logs the unit's one hour meter, so the readings must match; correct the export"
        )
    return (
        f"hour meter runs backwards: {hm_end_prev:g} h at {prev_end.isoformat()} then "
        f"{hm_start:g} h at {start.isoformat()}; if the meter was changed, record an "
        "hour_meter_change service event in the registry first"
    )


def _same_upload(r: dict[str, np.ndarray]) -> np.ndarray:
    """Neighbours (in sorted order) with equal unit, period and meter readings."""
    eq = np.ones(r["unit"].size - 1, bool)
    for key in ("unit", "start", "end", "hm_start", "hm_end"):
        eq &= r[key][1:] == r[key][:-1]
    return eq


def _stamp(ns: int) -> pd.Timestamp:
    return pd.Timestamp(int(ns), unit="ns", tz="UTC")


def _stored_uploads(
    conn: Connection, unit: np.ndarray, start_ns: np.ndarray, end_ns: np.ndarray
) -> dict[str, np.ndarray]:
    """Stored uploads of some units that start within :data:`NEIGHBOUR_WINDOW` of a
    period [ns since the epoch] of the file and can neighbour a new upload, as arrays.

    A unit's new uploads usually all come after its stored ones; then only its last
    stored upload can be the neighbour of a new one, found with one index seek. The
    other units' stored uploads in the window are all read.
    """
    lo = _stamp(start_ns.min()).to_pydatetime() - NEIGHBOUR_WINDOW
    hi = _stamp(end_ns.max()).to_pydatetime() + NEIGHBOUR_WINDOW
    units = np.unique(unit)
    last = _last_uploads(conn, units, hi)
    o = np.lexsort((end_ns, start_ns, unit))
    head = o[np.r_[True, unit[o][1:] != unit[o][:-1]]]  # each unit's first new upload
    period = zip(start_ns[head].tolist(), end_ns[head].tolist(), strict=True)
    first = dict(zip(unit[head].tolist(), period, strict=True))
    lo_ns = _ns_of([lo])[0]
    fast, slow = [], []
    for row in last:
        if row[1] < lo_ns:
            continue  # nothing stored in the window
        (fast if first[row[0]] >= (row[1], row[2]) else slow).append(row)
    rows = fast + (_window_uploads(conn, [r[0] for r in slow], lo, hi) if slow else [])
    cols = list(zip(*rows, strict=True)) if rows else [[]] * 5
    return {
        "unit": np.array(cols[0], dtype=np.int64),
        "start": np.array(cols[1], dtype=np.int64),
        "end": np.array(cols[2], dtype=np.int64),
        "hm_start": np.array(cols[3], dtype=float),
        "hm_end": np.array(cols[4], dtype=float),
    }


def _last_uploads(conn: Connection, units: np.ndarray, hi) -> list[tuple]:  # noqa: ANN001
    """Per unit, its last stored upload starting at or before ``hi`` (by start, end and
    id), as (unit, start [ns], end [ns], hour meter start, end); one seek per unit."""
    t, u = db.upload, db.unit
    la = t.alias("la")
    last = (
        select(la.c.id)
        .where(la.c.unit_id == u.c.id, la.c.period_start <= hi)
        .order_by(la.c.period_start.desc(), la.c.period_end.desc(), la.c.id.desc())
        .limit(1)
        .correlate(u)
        .scalar_subquery()
    )
    pts = select(u.c.id.label("uid"), last.label("last_id"))
    pts = pts.where(u.c.id.in_([int(x) for x in units])).subquery()
    q = select(
        t.c.unit_id, t.c.period_start, t.c.period_end, t.c.hour_meter_start, t.c.hour_meter_end
    ).join(pts, pts.c.last_id == t.c.id)
    return _with_ns(conn.execute(q).all())


def _window_uploads(conn: Connection, units: list[int], lo, hi) -> list[tuple]:  # noqa: ANN001
    """Stored uploads of ``units`` starting between ``lo`` and ``hi``, as in
    :func:`_last_uploads`."""
    t = db.upload
    q = select(
        t.c.unit_id, t.c.period_start, t.c.period_end, t.c.hour_meter_start, t.c.hour_meter_end
    ).where(
        t.c.unit_id.in_([int(x) for x in units]),
        t.c.period_start >= lo,
        t.c.period_start <= hi,
    )
    return _with_ns(conn.execute(q).all())


def _with_ns(rows: list) -> list[tuple]:
    """Upload rows with their stored period start and end as int64 ns since the epoch."""
    if not rows:
        return []
    cols = list(zip(*rows, strict=True))
    start, end = _ns_of(cols[1]).tolist(), _ns_of(cols[2]).tolist()
    return list(zip(cols[0], start, end, cols[3], cols[4], strict=True))


def _ns_of(values) -> np.ndarray:  # noqa: ANN001
    """Stored timestamps (naive ones are UTC) as int64 ns since the epoch."""
    return pd.DatetimeIndex(pd.to_datetime(list(values), utc=True)).as_unit("ns").asi8


def _meter_changes(conn: Connection, unit_ids) -> pd.DataFrame:  # noqa: ANN001
    t = db.service_event
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
    """A reading already stored for the same component and time must be identical (only
    the stored readings within the file's time span are read)."""
    if not plan.readings:
        return
    t = db.reading
    comps = list({c for _, c in plan.readings})
    times = [r.taken_at for r, _ in plan.readings]
    rows = conn.execute(
        select(
            t.c.component_id,
            t.c.taken_at,
            t.c.case_drain_lpm,
            t.c.test_pressure_bar,
            t.c.oil_temp_c,
            t.c.iso4406,
        ).where(
            t.c.component_id.in_(comps),
            t.c.taken_at >= min(times),
            t.c.taken_at <= max(times),
        )
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
