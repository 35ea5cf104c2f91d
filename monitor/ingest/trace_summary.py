"""What is kept of a pressure trace beside its histogram, and the trace's sidecar file.

:func:`stored_summary` turns a clean :class:`~monitor.ingest.trace.TraceResult` into one
JSON-ready document: the trace's summary (:meth:`TraceResult.summary`), the histogram
made from it, its rainflow cycles (range-by-mean matrix and cycles per operating hour
above a few range levels, :func:`monitor.models.cycles.summarise_cycles`), the
excursions above the relief and cut-off settings, and the min-max envelope for plotting,
so that a page never has to read the trace file again.

:func:`read_sidecar` reads the small JSON file that may travel with a trace
(``FILE.json`` beside ``FILE``) and names the unit, position, hour meter and start.
"""

from __future__ import annotations

import json
from datetime import datetime

import numpy as np

from monitor.domain.records import Problem
from monitor.ingest.trace_accumulate import TraceResult
from monitor.models import cycles as C

MAX_EXCURSIONS_KEPT = 500
"""Excursions listed per setting; above this, the ones with the highest peaks are kept
(the summary's ``relief_excursions`` / ``cutoff_excursions`` still count all of them)."""

ENVELOPE_DIGITS = 2
"""Decimals kept of the envelope's pressures [bar] and speeds [rpm]."""

SIDECAR_FIELDS = ("unit", "position", "hour_meter_start", "started_at", "max_gap_s")
"""Fields of a trace's sidecar JSON file (all optional there; the command line wins)."""


def _floats(values: np.ndarray, digits: int | None = None) -> list:
    """A float array as a JSON list, nan as None."""
    a = np.asarray(values, dtype=float)
    if digits is not None:
        a = np.round(a, digits)
    return [None if np.isnan(v) else float(v) for v in a.ravel().tolist()]


def _excursions(exc) -> list[dict] | None:  # noqa: ANN001 - peaks.Excursions or None
    if exc is None:
        return None
    keep = np.arange(len(exc))
    if keep.size > MAX_EXCURSIONS_KEPT:
        keep = np.sort(np.argsort(-exc.peak_bar, kind="stable")[:MAX_EXCURSIONS_KEPT])
    fields = ("start_s", "duration_s", "peak_bar", "peak_s", "rise_rate_bar_per_s")
    columns = {f: _floats(getattr(exc, f)[keep], 4) for f in fields}
    return [dict(zip(fields, row, strict=True)) for row in zip(*columns.values(), strict=True)]


def _cycles(result: TraceResult) -> dict | None:
    if not (result.operating_hours > 0 and result.turning_points_bar.size >= 2):
        return None
    s = C.summarise_cycles(result.turning_points_bar, operating_hours=result.operating_hours)
    return {
        "range_edges_bar": _floats(s.range_edges_bar),
        "mean_edges_bar": _floats(s.mean_edges_bar),
        "counts": np.asarray(s.counts, dtype=float).tolist(),
        "levels_bar": _floats(s.levels_bar),
        "per_hour": _floats(s.per_hour, 4),
        "total_cycles": float(s.total_cycles),
        "hysteresis_bar": float(result.settings.hysteresis_bar),
    }


def _envelope(result: TraceResult) -> dict | None:
    env = result.envelope
    if env is None:
        return None
    return {
        "bucket_s": float(env.bucket_s),
        "start_s": _floats(env.start_s, 4),
        "minimum": {c: _floats(v, ENVELOPE_DIGITS) for c, v in env.minimum.items()},
        "maximum": {c: _floats(v, ENVELOPE_DIGITS) for c, v in env.maximum.items()},
    }


def stored_summary(result: TraceResult, *, started_at: datetime, hour_meter_start: float) -> dict:
    """The document kept with a stored trace (JSON-ready; see the module notes).

    Parameters
    ----------
    result : TraceResult
        A trace without problems.
    started_at : datetime
        Time of the first sample (timezone-aware), as stored with the upload.
    hour_meter_start : float
        Hour meter at the first sample [h].
    """
    if not result.ok:
        raise ValueError("result has problems: a rejected trace has no summary")
    out = result.summary()
    out["period_start"] = started_at.isoformat()
    out["hour_meter_start"] = float(hour_meter_start)
    out["operating_hours"] = result.operating_hours
    out["histogram"] = {
        "pressure_edges_bar": _floats(result.pressure_edges_bar),
        "hours": _floats(result.hours),
    }
    out["cycles"] = _cycles(result)
    out["excursions"] = {
        "relief": _excursions(result.relief_excursions),
        "cutoff": _excursions(result.cutoff_excursions),
    }
    out["envelope"] = _envelope(result)
    return out


def read_sidecar(data: bytes, name: str) -> tuple[dict, list[Problem]]:
    """The fields of a trace's sidecar JSON file, or the problems with it.

    The file is one JSON object with any of :data:`SIDECAR_FIELDS`: ``unit`` and
    ``position`` (text), ``hour_meter_start`` [h] and ``max_gap_s`` [s] (numbers),
    ``started_at`` (ISO 8601 text with an offset; checked by the use case).
    """

    def problem(field: str | None, value: object, message: str) -> Problem:
        return Problem(name, None, field, None if value is None else str(value), message)

    try:
        doc = json.loads(data.decode("utf-8-sig"))
    except UnicodeDecodeError:
        return {}, [problem(None, None, "sidecar is not UTF-8 text: save it as UTF-8")]
    except json.JSONDecodeError as e:
        return {}, [Problem(name, e.lineno, f"column {e.colno}", None, f"not valid JSON: {e.msg}")]
    if not isinstance(doc, dict):
        return {}, [problem(None, None, "sidecar must be one JSON object {...}")]
    probs = [
        problem(k, None, f"unknown field; known fields: {', '.join(SIDECAR_FIELDS)}")
        for k in doc
        if k not in SIDECAR_FIELDS
    ]
    for k in ("unit", "position", "started_at"):
        if k in doc and not (isinstance(doc[k], str) and doc[k].strip()):
            probs.append(problem(k, doc[k], "expected non-empty text"))
    for k in ("hour_meter_start", "max_gap_s"):
        v = doc.get(k)
        if k in doc and (isinstance(v, bool) or not isinstance(v, int | float)):
            probs.append(problem(k, v, "expected a number"))
    return ({} if probs else dict(doc)), probs
