"""Read telemetry JSON (one upload document or a list of them) into column tables.

Each histogram band (or pressure-by-speed cell) and each reading becomes one row of a
:class:`~monitor.ingest_common.Table` whose values remember their JSON field path, so
the checks shared with the CSV readers report problems as e.g.
``[0].histograms[1].pressure_edges[3]``. Format: ``docs/formats.md``.
"""

from __future__ import annotations

import json

import numpy as np
import pandas as pd

from monitor.domain.records import QUANTITIES, QUANTITY_PRESSURE, QUANTITY_PRESSURE_SPEED
from monitor.ingest import units as U
from monitor.ingest.common import HIST_TEXT, READ_TEXT, READ_UNIT_COLUMNS, ProblemList, Table

DOC_KEYS = (
    "unit",
    "period_start",
    "period_end",
    "hour_meter_start",
    "hour_meter_end",
    "histograms",
    "readings",
)
HIST_KEYS = (
    "position",
    "quantity",
    "pressure_unit",
    "pressure_edges",
    "speed_edges_rpm",
    "hours",
    "mean_speed_rpm",
)
READING_KEYS = (
    "position",
    "taken_at",
    "hour_meter",
    "case_drain",
    "case_drain_unit",
    "test_pressure",
    "test_pressure_unit",
    "oil_temp",
    "oil_temp_unit",
    "iso4406",
)
_JSON_FIELD = {
    "pressure_low": "pressure_edges",
    "pressure_high": "pressure_edges",
    "speed_low": "speed_edges_rpm",
    "speed_high": "speed_edges_rpm",
    "mean_speed": "mean_speed_rpm",
}


def read_json_tables(text: str, probs: ProblemList) -> tuple[Table | None, Table | None]:
    """The band table and the readings table of a JSON text (None where there are none).

    Structural problems (syntax, unknown fields, wrong types, shapes) go to ``probs``;
    the value checks are left to the table validators shared with the CSV readers.
    """
    try:
        doc = json.loads(text.lstrip("\ufeff"))
    except json.JSONDecodeError as e:
        probs.add(
            e.lineno,
            f"column {e.colno}",
            None,
            f"invalid JSON at line {e.lineno}, column {e.colno}: {e.msg}; expected one "
            "document `{...}` or a list of documents `[{...}, ...]`",
        )
        return None, None
    docs = doc if isinstance(doc, list) else [doc]
    prefix = [f"[{d}]" if isinstance(doc, list) else "" for d in range(len(docs))]
    bands, reads = _Rows(), _Rows()
    for d, item in enumerate(docs):
        if not isinstance(item, dict):
            probs.add(None, prefix[d] or "$", None, "expected a JSON object `{...}` per upload")
            continue
        _json_doc(item, prefix[d], bands, reads, probs)
    if not bands.n and not reads.n:
        probs.add(None, None, None, "the JSON holds no histograms and no readings")
    return (
        bands.table(HIST_TEXT) if bands.n else None,
        reads.table(READ_TEXT) if reads.n else None,
    )


class _Rows:
    """Row-wise collector for JSON values; becomes a Table with one path per value."""

    def __init__(self) -> None:
        self.n = 0
        self.cols: dict[str, list] = {}
        self.raw: dict[str, list] = {}
        self.units: dict[str, list] = {}
        self.paths: dict[str, list] = {}

    def add(self, values: dict[str, tuple]) -> None:
        """values: column -> (canonical or text value, raw value, unit, path)."""
        for f, (v, raw, unit, path) in values.items():
            for store, x in (
                (self.cols, v),
                (self.raw, raw),
                (self.units, unit),
                (self.paths, path),
            ):
                store.setdefault(f, [None] * self.n).append(x)
        self.n += 1
        for store in (self.cols, self.raw, self.units, self.paths):
            for lst in store.values():
                if len(lst) < self.n:
                    lst.append(None)

    def table(self, text_cols: tuple[str, ...]) -> Table:
        text, num, raw, unit = {}, {}, {}, {}
        for f, vals in self.cols.items():
            if f in text_cols:
                codes, uniq = pd.factorize(
                    pd.Series(["" if v is None else str(v).strip() for v in vals], dtype=object)
                )
                text[f] = (codes, np.asarray(uniq, dtype=object))
            else:
                num[f] = np.array([np.nan if v is None else v for v in vals], dtype=np.float64)
                raw[f] = np.array([np.nan if v is None else v for v in self.raw[f]], dtype=float)
                unit[f] = np.array(self.units[f], dtype=object)
        paths = self.paths
        return Table(
            self.n,
            text,
            num,
            raw,
            unit,
            lambda r, f: (None, paths[f][r] if f in paths else f),
            labels=dict(_JSON_FIELD),
        )


def _check_keys(obj: dict, known: tuple[str, ...], path: str, probs: ProblemList) -> None:
    for k in obj:
        if k not in known:
            probs.add(
                None,
                f"{path}.{k}" if path else k,
                None,
                f"unknown field `{k}`: known fields are {', '.join(known)}",
            )


def _json_num(obj: dict, key: str, path: str, probs: ProblemList, required: bool) -> float | None:
    v = obj.get(key)
    if v is None:
        if required:
            probs.add(None, f"{path}.{key}", None, f"`{key}` is missing: expected a number")
        return None
    if isinstance(v, bool) or not isinstance(v, int | float):
        probs.add(None, f"{path}.{key}", str(v), f"`{key}` must be a number")
        return None
    return float(v)


def _json_unit(obj: dict, key: str, kind: str, path: str, probs: ProblemList) -> str | None:
    try:
        return U.normalise_unit(kind, obj.get(key, ""))
    except ValueError as e:
        probs.add(None, f"{path}.{key}", str(obj.get(key)), str(e))
        return None


def _json_doc(item: dict, p: str, bands: _Rows, reads: _Rows, probs: ProblemList) -> None:
    dot = "." if p else ""
    _check_keys(item, DOC_KEYS, p, probs)
    hists, rdgs = item.get("histograms") or [], item.get("readings") or []
    if not isinstance(item.get("unit"), str):
        probs.add(None, f"{p}{dot}unit", None, "`unit` is missing: expected the unit tag as text")
    common = {"unit": (item.get("unit"), None, None, f"{p}{dot}unit")}
    if hists:
        for k in ("period_start", "period_end"):
            common[k] = (item.get(k), None, None, f"{p}{dot}{k}")
        for k in ("hour_meter_start", "hour_meter_end"):
            v = _json_num(item, k, p, probs, required=True)
            common[k] = (v, v, "", f"{p}{dot}{k}")
    for key, lst, fn in (("histograms", hists, _json_hist), ("readings", rdgs, _json_reading)):
        if not isinstance(lst, list):
            probs.add(None, f"{p}{dot}{key}", None, f"`{key}` must be a list")
            continue
        for i, obj in enumerate(lst):
            path = f"{p}{dot}{key}[{i}]"
            if not isinstance(obj, dict):
                probs.add(None, path, None, "expected a JSON object `{...}`")
            else:
                fn(obj, path, common, bands if key == "histograms" else reads, probs)


def _edges(obj: dict, key: str, path: str, probs: ProblemList) -> list[float] | None:
    e = obj.get(key)
    if (
        not isinstance(e, list)
        or len(e) < 2
        or not all(isinstance(x, int | float) and not isinstance(x, bool) for x in e)
    ):
        probs.add(
            None,
            f"{path}.{key}",
            None,
            f"`{key}` must be a list of at least two numbers (N+1 edges for N bands)",
        )
        return None
    return [float(x) for x in e]


def _json_hist(obj: dict, path: str, common: dict, rows: _Rows, probs: ProblemList) -> None:
    _check_keys(obj, HIST_KEYS, path, probs)
    q = str(obj.get("quantity", "")).lower()
    if q not in QUANTITIES:
        probs.add(
            None,
            f"{path}.quantity",
            str(obj.get("quantity")),
            "unknown quantity: use `pressure` or `pressure_speed`",
        )
        return
    pu = _json_unit(obj, "pressure_unit", U.PRESSURE, path, probs)
    pe = _edges(obj, "pressure_edges", path, probs)
    se = _edges(obj, "speed_edges_rpm", path, probs) if q == QUANTITY_PRESSURE_SPEED else [0, 0]
    ms = _json_num(obj, "mean_speed_rpm", path, probs, required=False)
    if pu is None or pe is None or se is None:
        return
    shape = (len(pe) - 1,) if q == QUANTITY_PRESSURE else (len(pe) - 1, len(se) - 1)
    h = _hours(obj.get("hours"), shape, path, probs)
    if h is None:
        return
    base = dict(common)
    base["position"] = (obj.get("position"), None, None, f"{path}.position")
    base["quantity"] = (q, None, None, f"{path}.quantity")
    base["mean_speed"] = (ms, ms, "rpm", f"{path}.mean_speed_rpm")
    _band_rows(rows, base, path, pu, pe, se, h)


def _hours(hours: object, shape: tuple, path: str, probs: ProblemList) -> np.ndarray | None:
    """The hours as a float64 array of ``shape``, or None with a problem."""
    try:
        h = np.asarray(hours, dtype=np.float64)
        if h.shape == shape:
            return h
    except (TypeError, ValueError):
        pass
    probs.add(
        None,
        f"{path}.hours",
        None,
        f"`hours` must be {'a list' if len(shape) == 1 else 'a list of rows'} of "
        f"numbers of shape {shape} (one per band)",
    )
    return None


def _band_rows(
    rows: _Rows, base: dict, path: str, pu: str, pe: list, se: list, h: np.ndarray
) -> None:
    """One row per band (or matrix cell) of one JSON histogram."""
    pb = U.to_bar(pe, pu)
    for idx in np.ndindex(*h.shape):
        i = idx[0]
        row = dict(base)
        row["pressure_low"] = (pb[i], pe[i], pu, f"{path}.pressure_edges[{i}]")
        row["pressure_high"] = (pb[i + 1], pe[i + 1], pu, f"{path}.pressure_edges[{i + 1}]")
        if len(idx) == 2:
            j = idx[1]
            row["speed_low"] = (se[j], se[j], "rpm", f"{path}.speed_edges_rpm[{j}]")
            row["speed_high"] = (se[j + 1], se[j + 1], "rpm", f"{path}.speed_edges_rpm[{j + 1}]")
        hv = float(h[idx])
        row["hours"] = (hv, hv, "", f"{path}.hours" + "".join(f"[{k}]" for k in idx))
        rows.add(row)


def _json_reading(obj: dict, path: str, common: dict, rows: _Rows, probs: ProblemList) -> None:
    _check_keys(obj, READING_KEYS, path, probs)
    row = {"unit": common["unit"]}
    for k in ("position", "taken_at", "iso4406"):
        v = obj.get(k)
        row[k] = (v, None, None, f"{path}.{k}")
    hm = _json_num(obj, "hour_meter", path, probs, required=True)
    row["hour_meter"] = (hm, hm, "", f"{path}.hour_meter")
    for f, kind in READ_UNIT_COLUMNS.items():
        v = _json_num(obj, f, path, probs, required=False)
        if v is None:
            row[f] = (None, None, None, f"{path}.{f}")
            continue
        u = _json_unit(obj, f + "_unit", kind, path, probs)
        conv = float(U.convert([v], kind, u)[0]) if u else None
        row[f] = (conv, v, u, f"{path}.{f}")
    rows.add(row)
