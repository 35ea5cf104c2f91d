"""Read telemetry JSON (one upload document or a list of them) into column tables.

Each histogram band (or pressure-by-speed cell) and each reading becomes one row of a
:class:`~monitor.ingest.common.Table` whose values know their JSON field path, so the
checks shared with the CSV readers report problems as e.g.
``[0].histograms[1].pressure_edges[3]``. Format: ``docs/formats.md``.

The text is loaded within bounds by :mod:`monitor.ingest.json_text`. The structure is
then walked once per histogram (checking the types of its lists), and the band rows of
all histograms are built together with numpy: the work is linear in the number of bands,
and a field path is only spelled out when a problem is reported.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from monitor.domain.records import QUANTITIES, QUANTITY_PRESSURE, QUANTITY_PRESSURE_SPEED
from monitor.ingest import units as U
from monitor.ingest.common import READ_UNIT_COLUMNS, ProblemList, Table
from monitor.ingest.json_text import FAILED, is_number, load_json, number_problem, shown
from monitor.ingest.limits import shorten

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
    "oil_temp",
    "oil_temp_unit",
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
_DOC_FIELDS = ("unit", "period_start", "period_end", "hour_meter_start", "hour_meter_end")


def read_json_tables(data: bytes, probs: ProblemList) -> tuple[Table | None, Table | None]:
    """The band table and the readings table of JSON ``data`` (None where there are none).

    Structural problems (syntax, depth, size, unknown fields, wrong types, shapes) go to
    ``probs``; the value checks are left to the table validators shared with the CSV
    readers.
    """
    doc = load_json(data, probs)
    if doc is FAILED:
        return None, None
    docs = doc if isinstance(doc, list) else [doc]
    bands, reads = _Bands(), _Readings()
    for d, item in enumerate(docs):
        if probs.full:  # rejected anyway: do not walk the rest of a hostile file
            probs.stopped = True
            break
        prefix = f"[{d}]" if isinstance(doc, list) else ""
        if not isinstance(item, dict):
            probs.add(None, prefix or "$", None, "expected a JSON object `{...}` per upload")
            continue
        _json_doc(item, prefix, bands, reads, probs)
    if not bands.hists and not reads.rows and not probs:  # else it only echoes those
        probs.add(None, None, None, "the JSON holds no histograms and no readings")
    return (
        bands.table() if bands.hists else None,
        reads.table() if reads.rows else None,
    )


def _join(prefix: str, key: str) -> str:
    return f"{prefix}.{key}" if prefix else key


def _text(v: object, path: str, key: str, probs: ProblemList) -> str:
    """A text field as stripped text ("" when absent); numbers are taken as written."""
    if v is None:
        return ""
    if isinstance(v, str):
        return v.strip()
    if type(v) in (int, float):
        return str(v)
    probs.add(None, path, shorten(v), f"`{key}` must be text")
    return shorten(v)


def _check_keys(obj: dict, known: tuple[str, ...], path: str, probs: ProblemList) -> None:
    for k in obj:
        if k not in known:
            probs.add(
                None,
                _join(path, shorten(k)),
                None,
                f"unknown field `{shorten(k)}`: known fields are {', '.join(known)}",
            )


def _json_num(
    obj: dict, key: str, path: str, probs: ProblemList, required: bool, refused: set
) -> float:
    """A number field [as written]; NaN when absent or refused (with a problem, and the
    field noted in ``refused`` so the table checks do not report it again)."""
    v = obj.get(key)
    if v is None:
        if required:
            probs.add(None, _join(path, key), None, f"`{key}` is missing: expected a number")
            refused.add(key)
        return np.nan
    if not is_number(v):
        probs.add(None, _join(path, key), shown(v), number_problem(v, key))
        refused.add(key)
        return np.nan
    return float(v)


def _temperature(obj: dict, path: str, probs: ProblemList, refused: set) -> tuple:
    """A histogram's ``oil_temp`` with its ``oil_temp_unit``: (degC, as written, unit);
    NaN when absent or refused."""
    v = _json_num(obj, "oil_temp", path, probs, required=False, refused=refused)
    if np.isnan(v):
        if "oil_temp_unit" in obj:
            msg = "`oil_temp_unit` without `oil_temp`: give the temperature or remove the unit"
            probs.add(None, _join(path, "oil_temp_unit"), shorten(obj["oil_temp_unit"]), msg)
        return np.nan, np.nan, None
    if "oil_temp_unit" not in obj:
        msg = "`oil_temp` needs its unit: add `oil_temp_unit` (c or f)"
        probs.add(None, _join(path, "oil_temp_unit"), None, msg)
        refused.add("oil_temp")
        return np.nan, v, None
    u = _json_unit(obj, "oil_temp_unit", U.TEMPERATURE, path, probs)
    if u is None:
        refused.add("oil_temp")
        return np.nan, v, None
    with np.errstate(over="ignore"):
        return float(U.convert([v], U.TEMPERATURE, u)[0]), v, u


def _json_unit(obj: dict, key: str, kind: str, path: str, probs: ProblemList) -> str | None:
    v = obj.get(key, "")
    try:
        if not isinstance(v, str):
            raise ValueError(f"`{key}` must be text: use one of {U.accepted_spellings(kind)}")
        return U.normalise_unit(kind, v)
    except ValueError as e:
        probs.add(None, _join(path, key), shorten(v), str(e))
        return None


def _numbers(v: list, key: str, path: str, probs: ProblemList) -> bool:
    """True if ``v`` is a list of finite numbers; else one problem at the first bad item."""
    if all(type(x) is int or type(x) is float for x in v):
        finite = np.isfinite(np.asarray(v, dtype=np.float64))
        if finite.all():
            return True
        bad = int(np.flatnonzero(~finite)[0])
    else:
        bad = next(i for i, x in enumerate(v) if not is_number(x))
    probs.add(None, f"{path}[{bad}]", shown(v[bad]), number_problem(v[bad], key))
    return False


def _json_doc(item: dict, p: str, bands: _Bands, reads: _Readings, probs: ProblemList) -> None:
    _check_keys(item, DOC_KEYS, p, probs)
    hists, rdgs = item.get("histograms") or [], item.get("readings") or []
    unit = item.get("unit")
    if not isinstance(unit, str):
        probs.add(None, _join(p, "unit"), None, "`unit` is missing: expected the unit tag as text")
    doc = {"path": p, "unit": unit.strip() if isinstance(unit, str) else "", "refused": set()}
    if not isinstance(unit, str):
        doc["refused"].add("unit")
    if hists:
        for k in ("period_start", "period_end"):
            doc[k] = _text(item.get(k), _join(p, k), k, probs)
        for k in ("hour_meter_start", "hour_meter_end"):
            doc[k] = _json_num(item, k, p, probs, required=True, refused=doc["refused"])
    for key, lst in (("histograms", hists), ("readings", rdgs)):
        if not isinstance(lst, list):
            probs.add(None, _join(p, key), None, f"`{key}` must be a list")
            continue
        for i, obj in enumerate(lst):
            if probs.full:
                probs.stopped = True
                return
            path = f"{_join(p, key)}[{i}]"
            if not isinstance(obj, dict):
                probs.add(None, path, None, "expected a JSON object `{...}`")
            elif key == "histograms":
                bands.add(obj, path, doc, probs)
            else:
                reads.add(obj, path, doc, probs)


class _Bands:
    """The histograms of a JSON text, checked one by one, then made into one band table."""

    def __init__(self) -> None:
        self.hists: list[dict] = []
        self.docs: dict[int, dict] = {}

    def add(self, obj: dict, path: str, doc: dict, probs: ProblemList) -> None:
        _check_keys(obj, HIST_KEYS, path, probs)
        q = obj.get("quantity")
        q = q.lower() if isinstance(q, str) else q
        if q not in QUANTITIES:
            probs.add(
                None,
                f"{path}.quantity",
                shorten(obj.get("quantity")),
                "unknown quantity: use `pressure` or `pressure_speed`",
            )
            return
        pu = _json_unit(obj, "pressure_unit", U.PRESSURE, path, probs)
        pe = _edges(obj, "pressure_edges", path, probs)
        se = _edges(obj, "speed_edges_rpm", path, probs) if q == QUANTITY_PRESSURE_SPEED else []
        refused: set = set()
        ms = _json_num(obj, "mean_speed_rpm", path, probs, required=False, refused=refused)
        ot = _temperature(obj, path, probs, refused)
        if pu is None or pe is None or se is None:
            return
        shape = (len(pe) - 1,) if q == QUANTITY_PRESSURE else (len(pe) - 1, len(se) - 1)
        h = _hours(obj.get("hours"), shape, path, probs)
        if h is None:
            return
        self.docs[id(doc)] = doc
        position = _text(obj.get("position"), f"{path}.position", "position", probs)
        self.hists.append(
            dict(doc=id(doc), path=path, position=position, quantity=q, pu=pu, pe=pe, se=se,
                 hours=h, n_s=shape[1] if len(shape) == 2 else 0, ms=ms, ot=ot, refused=refused)
        )  # fmt: skip

    def table(self) -> Table:
        """One row per band or cell of every histogram, in file order."""
        hs = self.hists
        n_s = np.array([h["n_s"] for h in hs], dtype=np.int64)
        k = np.array([len(h["hours"]) for h in hs], dtype=np.int64)
        hist = np.repeat(np.arange(len(hs)), k)
        within = np.arange(int(k.sum())) - np.repeat(np.cumsum(k) - k, k)
        width = np.maximum(n_s, 1)[hist]
        i = within // width
        j = np.where(n_s[hist] > 0, within % width, -1)
        b = _Built(hs, hist)
        b.edges("pressure", "pe", i, lambda h: U.to_bar(h["pe"], h["pu"]))
        b.edges("speed", "se", j, lambda h: np.asarray(h["se"], dtype=np.float64))
        b.per_row("hours", np.concatenate([h["hours"] for h in hs]), "")
        b.per_hist("mean_speed", [h["ms"] for h in hs], "rpm")
        b.per_hist("oil_temp", [h["ot"][0] for h in hs], "c")
        b.raw["oil_temp"] = np.array([h["ot"][1] for h in hs], dtype=np.float64)[hist]
        b.unit["oil_temp"] = np.array([h["ot"][2] or "c" for h in hs], dtype=object)[hist]
        docs = [self.docs[h["doc"]] for h in hs]
        for f in ("hour_meter_start", "hour_meter_end"):
            b.per_hist(f, [d[f] for d in docs], "")
        for f in ("unit", "period_start", "period_end"):
            b.text(f, [d[f] for d in docs])
        b.text("position", [h["position"] for h in hs])
        b.text("quantity", [h["quantity"] for h in hs])
        doc_paths = [d["path"] for d in docs]
        t = Table(
            len(hist),
            b.texts,
            b.num,
            b.raw,
            b.unit,
            lambda r, f: (None, _band_path(hs, doc_paths, int(hist[r]), int(i[r]), int(j[r]), f)),
            labels=dict(_JSON_FIELD),
        )
        for f in ("unit", "hour_meter_start", "hour_meter_end"):
            per_hist = np.array([f in d["refused"] for d in docs], dtype=bool)
            if per_hist.any():
                t.refuse(f, per_hist[hist])
        for f, key in (("mean_speed", "mean_speed_rpm"), ("oil_temp", "oil_temp")):
            per_hist = np.array([key in h["refused"] for h in hs], dtype=bool)
            if per_hist.any():
                t.refuse(f, per_hist[hist])
        return t


class _Built:
    """Column arrays of the band table, built from the histograms with numpy."""

    def __init__(self, hs: list[dict], hist: np.ndarray) -> None:
        self.hs, self.hist = hs, hist
        self.texts: dict = {}
        self.num: dict = {}
        self.raw: dict = {}
        self.unit: dict = {}

    def edges(self, name: str, key: str, idx: np.ndarray, canon) -> None:  # noqa: ANN001
        """``<name>_low``/``_high``: edges ``idx`` and ``idx + 1`` of each row's histogram
        (NaN where ``idx`` is -1: no speed band on a plain histogram)."""
        counts = np.array([len(h[key]) for h in self.hs], dtype=np.int64)
        start = np.cumsum(counts) - counts
        flat_raw = np.array([x for h in self.hs for x in h[key]] + [np.nan], dtype=np.float64)
        with np.errstate(over="ignore"):
            flat = np.concatenate([*(canon(h) for h in self.hs if h[key]), [np.nan]])
        nan_at = len(flat) - 1  # the NaN appended to both
        at = start[self.hist] + idx
        unit = "rpm"
        if name == "pressure":
            unit = np.array([h["pu"] for h in self.hs], dtype=object)[self.hist]
        for side, off in (("low", 0), ("high", 1)):
            pick = np.where(idx >= 0, at + off, nan_at)
            f = f"{name}_{side}"
            self.num[f], self.raw[f], self.unit[f] = flat[pick], flat_raw[pick], unit

    def per_row(self, f: str, values: np.ndarray, unit: str) -> None:
        self.num[f] = self.raw[f] = values
        self.unit[f] = unit

    def per_hist(self, f: str, values: list[float], unit: str) -> None:
        self.per_row(f, np.asarray(values, dtype=np.float64)[self.hist], unit)

    def text(self, f: str, values: list[str]) -> None:
        codes, uniq = pd.factorize(pd.Series(values, dtype=object))
        self.texts[f] = (np.asarray(codes, dtype=np.int64)[self.hist], np.asarray(uniq, object))


def _band_path(hs: list, doc_paths: list, h: int, i: int, j: int, f: str) -> str:
    """The JSON field path of field ``f`` of band (or cell) ``i``, ``j`` of histogram ``h``."""
    p = hs[h]["path"]
    if f in _DOC_FIELDS:
        return _join(doc_paths[h], f)
    if f in ("position", "quantity"):
        return f"{p}.{f}"
    if f == "mean_speed":
        return f"{p}.mean_speed_rpm"
    if f == "oil_temp":
        return f"{p}.oil_temp"
    if f.startswith("pressure_"):
        return f"{p}.pressure_edges[{i + (f == 'pressure_high')}]"
    if f.startswith("speed_"):
        return f"{p}.speed_edges_rpm[{j + (f == 'speed_high')}]"
    return f"{p}.hours[{i}]" + (f"[{j}]" if j >= 0 else "")


def _edges(obj: dict, key: str, path: str, probs: ProblemList) -> list | None:
    e = obj.get(key)
    if isinstance(e, list) and len(e) >= 2:
        return e if _numbers(e, key, f"{path}.{key}", probs) else None
    probs.add(
        None,
        f"{path}.{key}",
        None,
        f"`{key}` must be a list of at least two numbers (N+1 edges for N bands)",
    )
    return None


def _hours(hours: object, shape: tuple, path: str, probs: ProblemList) -> np.ndarray | None:
    """The hours as a flat float64 array (row by row), or None with a problem."""
    rows = hours if len(shape) == 2 else [hours]
    if (
        isinstance(hours, list)
        and len(hours) == shape[0]
        and all(isinstance(r, list) and len(r) == shape[-1] for r in rows)
    ):
        at = [f"{path}.hours"]
        if len(shape) == 2:
            at = [f"{path}.hours[{r}]" for r in range(shape[0])]
        if all(_numbers(r, "hours", a, probs) for r, a in zip(rows, at, strict=True)):
            return np.asarray(hours, dtype=np.float64).ravel()
        return None
    probs.add(
        None,
        f"{path}.hours",
        None,
        f"`hours` must be {'a list' if len(shape) == 1 else 'a list of rows'} of "
        f"numbers of shape {shape} (one per band)",
    )
    return None


class _Readings:
    """The readings of a JSON text, one row each."""

    NUM = ("hour_meter", *READ_UNIT_COLUMNS)
    TEXT = ("unit", "position", "taken_at", "iso4406")

    def __init__(self) -> None:
        self.rows: list[dict] = []

    def add(self, obj: dict, path: str, doc: dict, probs: ProblemList) -> None:
        _check_keys(obj, READING_KEYS, path, probs)
        row = {"path": path, "doc": doc["path"], "unit": doc["unit"], "refused": set()}
        row["refused"] |= doc["refused"] & {"unit"}
        for k in ("position", "taken_at", "iso4406"):
            row[k] = _text(obj.get(k), f"{path}.{k}", k, probs)
        hm = _json_num(obj, "hour_meter", path, probs, required=True, refused=row["refused"])
        row["hour_meter"] = (hm, hm, "")
        for f, kind in READ_UNIT_COLUMNS.items():
            v = _json_num(obj, f, path, probs, required=False, refused=row["refused"])
            u = None if np.isnan(v) else _json_unit(obj, f + "_unit", kind, path, probs)
            with np.errstate(over="ignore"):
                conv = float(U.convert([v], kind, u)[0]) if u else np.nan
            row[f] = (conv, v, u)
        self.rows.append(row)

    def table(self) -> Table:
        rows = self.rows
        text, num, raw, unit = {}, {}, {}, {}
        for f in self.TEXT:
            codes, uniq = pd.factorize(pd.Series([r[f] for r in rows], dtype=object))
            text[f] = (np.asarray(codes, dtype=np.int64), np.asarray(uniq, dtype=object))
        for f in self.NUM:
            num[f] = np.array([r[f][0] for r in rows], dtype=np.float64)
            raw[f] = np.array([r[f][1] for r in rows], dtype=np.float64)
            unit[f] = np.array([r[f][2] for r in rows], dtype=object)

        def where(r: int, f: str) -> tuple[None, str]:
            return None, _join(rows[r]["doc"], f) if f == "unit" else f"{rows[r]['path']}.{f}"

        t = Table(len(rows), text, num, raw, unit, where, labels=dict(_JSON_FIELD))
        for f in ("unit", *self.NUM):
            mask = np.array([f in r["refused"] for r in rows], dtype=bool)
            if mask.any():
                t.refuse(f, mask)
        return t
