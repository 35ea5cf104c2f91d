"""Many histograms as columns (:class:`HistogramBatch`), the form ingest and the store
use in bulk; canonical units as in :mod:`monitor.domain.records`."""

from __future__ import annotations

import math
from dataclasses import dataclass
from datetime import UTC, datetime, timedelta
from functools import cached_property

import numpy as np
import pandas as pd

from monitor.domain.records import Histogram


@dataclass
class HistogramBatch:
    """Many histograms as columns: what :class:`Histogram` holds, one array per field.

    Per histogram, arrays of length N in file order: ``unit``, ``position`` and
    ``quantity`` (object arrays of str), ``period_start_ns``/``period_end_ns`` (int64
    ns since the epoch, UTC), ``hour_meter_start``/``hour_meter_end`` [h],
    ``mean_speed_rpm`` [rpm] (nan where not given), ``line`` (first source line; None
    when unknown for all), ``n_pressure`` (P) and ``n_speed`` (S, 0 for ``"pressure"``),
    ``oil_temp_c`` the period mean oil temperature [degC] (nan where not given).

    The bands of all histograms lie end to end in histogram order: ``pressure_low_bar``
    and ``pressure_high_bar`` (P per histogram), ``speed_low_rpm`` and ``speed_high_rpm``
    (S per histogram) and ``hours`` (P, or the P x S matrix row by row). Histogram ``i``
    is :meth:`histogram` ``(i)``; its arrays are views of these.
    """

    unit: np.ndarray
    position: np.ndarray
    quantity: np.ndarray
    period_start_ns: np.ndarray
    period_end_ns: np.ndarray
    hour_meter_start: np.ndarray
    hour_meter_end: np.ndarray
    mean_speed_rpm: np.ndarray
    line: np.ndarray | None
    n_pressure: np.ndarray
    n_speed: np.ndarray
    pressure_low_bar: np.ndarray
    pressure_high_bar: np.ndarray
    speed_low_rpm: np.ndarray
    speed_high_rpm: np.ndarray
    hours: np.ndarray
    oil_temp_c: np.ndarray | None = None

    def __post_init__(self) -> None:
        if self.oil_temp_c is None:
            self.oil_temp_c = np.full(self.n_pressure.size, np.nan)

    def __len__(self) -> int:
        return int(self.n_pressure.size)

    @cached_property
    def n_cells(self) -> np.ndarray:
        """Hours values per histogram: P, or P x S for a pressure-by-speed matrix."""
        return self.n_pressure * np.maximum(self.n_speed, 1)

    @cached_property
    def pressure_offset(self) -> np.ndarray:
        """Start of each histogram's pressure bands in the flat arrays (length N + 1)."""
        return _offsets(self.n_pressure)

    @cached_property
    def speed_offset(self) -> np.ndarray:
        """Start of each histogram's speed bands in the flat arrays (length N + 1)."""
        return _offsets(self.n_speed)

    @cached_property
    def hours_offset(self) -> np.ndarray:
        """Start of each histogram's hours in the flat array (length N + 1)."""
        return _offsets(self.n_cells)

    def runs(self, names: tuple[str, ...]) -> tuple[np.ndarray, np.ndarray]:
        """The flat arrays ``names`` laid out histogram by histogram: histogram 0's run of
        each array in the order named, then histogram 1's, and so on; plus where each
        histogram's part starts (length N + 1). Each name is a flat band array
        (``pressure_low_bar`` ... ``hours``)."""
        offsets = {
            "pressure_low_bar": self.pressure_offset,
            "pressure_high_bar": self.pressure_offset,
            "speed_low_rpm": self.speed_offset,
            "speed_high_rpm": self.speed_offset,
            "hours": self.hours_offset,
        }
        counts = [np.diff(offsets[k]) for k in names]
        bounds = _offsets(np.sum(counts, axis=0, dtype=np.int64))
        out = np.empty(int(bounds[-1]))
        before = bounds[:-1].copy()  # where each histogram's next run starts
        for k, count in zip(names, counts, strict=True):
            values = getattr(self, k)
            if values.size:
                shift = np.repeat(before - offsets[k][:-1], count)
                out[np.arange(values.size) + shift] = values
            before += count
        return out, bounds

    def period_datetimes(self) -> tuple[list[datetime], list[datetime]]:
        """Period start and end of every histogram as UTC datetimes."""
        n = len(self)
        both = utc_datetimes(np.concatenate([self.period_start_ns, self.period_end_ns]))
        return both[:n], both[n:]

    def histogram(self, i: int) -> Histogram:
        """Histogram ``i`` as a record (arrays are views of the batch)."""
        return self.histograms(np.array([i]))[0]

    def histograms(self, rows: np.ndarray | None = None) -> list[Histogram]:
        """Records of all histograms (or of ``rows``), in order; arrays are views."""
        idx = np.arange(len(self)) if rows is None else np.asarray(rows, dtype=np.int64)
        return self._records(idx)

    def _records(self, idx: np.ndarray) -> list[Histogram]:
        p0, s0, h0 = (o[idx].tolist() for o in self._offsets_at())
        n_p, n_s = self.n_pressure[idx].tolist(), self.n_speed[idx].tolist()
        start = utc_datetimes(self.period_start_ns[idx])
        end = utc_datetimes(self.period_end_ns[idx])
        mean = [None if x != x else x for x in self.mean_speed_rpm[idx].tolist()]
        lines = [None] * idx.size if self.line is None else self.line[idx].tolist()
        temps = [None if x != x else x for x in self.oil_temp_c[idx].tolist()]
        pl, ph, sl, sh, hr = (
            self.pressure_low_bar,
            self.pressure_high_bar,
            self.speed_low_rpm,
            self.speed_high_rpm,
            self.hours,
        )
        out = []
        fields = zip(
            self.unit[idx].tolist(),
            self.position[idx].tolist(),
            self.quantity[idx].tolist(),
            start,
            end,
            self.hour_meter_start[idx].tolist(),
            self.hour_meter_end[idx].tolist(),
            p0,
            s0,
            h0,
            n_p,
            n_s,
            mean,
            lines,
            temps,
            strict=True,
        )
        for unit, pos, q, t0, t1, hm0, hm1, a, b, c, p, s, m, line, temp in fields:
            hours = hr[c : c + p * s].reshape(p, s) if s else hr[c : c + p]
            out.append(
                Histogram(
                    unit, pos, q, t0, t1, hm0, hm1, pl[a : a + p], ph[a : a + p], hours,
                    sl[b : b + s] if s else None, sh[b : b + s] if s else None, m, line, temp,
                )
            )  # fmt: skip
        return out

    def _offsets_at(self) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        return self.pressure_offset[:-1], self.speed_offset[:-1], self.hours_offset[:-1]

    def take(self, rows: np.ndarray) -> HistogramBatch:
        """The batch of histograms ``rows`` (positions, in the order given)."""
        rows = np.asarray(rows, dtype=np.int64)
        p = _segments(self.pressure_offset, rows)
        s = _segments(self.speed_offset, rows)
        h = _segments(self.hours_offset, rows)
        return HistogramBatch(
            unit=self.unit[rows],
            position=self.position[rows],
            quantity=self.quantity[rows],
            period_start_ns=self.period_start_ns[rows],
            period_end_ns=self.period_end_ns[rows],
            hour_meter_start=self.hour_meter_start[rows],
            hour_meter_end=self.hour_meter_end[rows],
            mean_speed_rpm=self.mean_speed_rpm[rows],
            line=None if self.line is None else self.line[rows],
            n_pressure=self.n_pressure[rows],
            n_speed=self.n_speed[rows],
            pressure_low_bar=self.pressure_low_bar[p],
            pressure_high_bar=self.pressure_high_bar[p],
            speed_low_rpm=self.speed_low_rpm[s],
            speed_high_rpm=self.speed_high_rpm[s],
            hours=self.hours[h],
            oil_temp_c=self.oil_temp_c[rows],
        )

    @classmethod
    def from_histograms(cls, hs: list[Histogram]) -> HistogramBatch:
        """The batch of some :class:`Histogram` records, in their order."""
        naive = [t.tzinfo is None for h in hs for t in (h.period_start, h.period_end)]
        if any(naive):
            raise ValueError("period_start and period_end must be timezone-aware datetimes")
        n_s = [0 if h.speed_low_rpm is None else len(h.speed_low_rpm) for h in hs]
        mean = [np.nan if h.mean_speed_rpm is None else h.mean_speed_rpm for h in hs]
        lines = [h.line for h in hs]
        return cls(
            unit=_objects([h.unit for h in hs]),
            position=_objects([h.position for h in hs]),
            quantity=_objects([h.quantity for h in hs]),
            period_start_ns=_ns([h.period_start for h in hs]),
            period_end_ns=_ns([h.period_end for h in hs]),
            hour_meter_start=np.array([h.hour_meter_start for h in hs], dtype=float),
            hour_meter_end=np.array([h.hour_meter_end for h in hs], dtype=float),
            mean_speed_rpm=np.array(mean, dtype=float),
            line=None if None in lines else np.array(lines, dtype=np.int64),
            n_pressure=np.array([len(h.pressure_low_bar) for h in hs], dtype=np.int64),
            n_speed=np.array(n_s, dtype=np.int64),
            pressure_low_bar=_flat([h.pressure_low_bar for h in hs]),
            pressure_high_bar=_flat([h.pressure_high_bar for h in hs]),
            speed_low_rpm=_flat([h.speed_low_rpm for h in hs if h.speed_low_rpm is not None]),
            speed_high_rpm=_flat([h.speed_high_rpm for h in hs if h.speed_high_rpm is not None]),
            hours=_flat([h.hours for h in hs]),
            oil_temp_c=np.array(
                [np.nan if h.oil_temp_c is None else h.oil_temp_c for h in hs], dtype=float
            ),
        )


_EPOCH = datetime(1970, 1, 1, tzinfo=UTC)


def utc_datetimes(ns: np.ndarray) -> list[datetime]:
    """int64 ns since the epoch -> UTC datetimes (whole microseconds, rounded down, as
    pandas gives them); each distinct value is converted once."""
    uniq, inv = np.unique(np.asarray(ns, dtype=np.int64), return_inverse=True)
    dts = _objects([_EPOCH + timedelta(microseconds=v // 1000) for v in uniq.tolist()])
    return dts[inv.reshape(-1)].tolist()


def _offsets(counts: np.ndarray) -> np.ndarray:
    out = np.zeros(counts.size + 1, dtype=np.int64)
    np.cumsum(counts, out=out[1:])
    return out


def _segments(offset: np.ndarray, rows: np.ndarray) -> np.ndarray:
    """Positions in a flat array of the segments of ``rows`` (bounded by ``offset``), end
    to end."""
    start, count = offset[rows], offset[rows + 1] - offset[rows]
    total = int(count.sum())
    if total == 0:
        return np.zeros(0, dtype=np.int64)
    first = np.zeros(rows.size, dtype=np.int64)
    np.cumsum(count[:-1], out=first[1:])
    return np.arange(total, dtype=np.int64) + np.repeat(start - first, count)


def _objects(values: list) -> np.ndarray:
    out = np.empty(len(values), dtype=object)
    out[:] = values
    return out


def _ns(values: list[datetime]) -> np.ndarray:
    """Timezone-aware datetimes -> int64 ns since the epoch."""
    return np.array([(t - _EPOCH) // timedelta(microseconds=1) * 1000 for t in values], np.int64)


def _flat(arrays: list) -> np.ndarray:
    if not arrays:
        return np.zeros(0)
    return np.concatenate([np.asarray(a, dtype=float).ravel() for a in arrays])


def group_ids(code_arrays: list[np.ndarray]) -> np.ndarray:
    """Dense int64 id per distinct combination of the code arrays (first-seen order).

    The codes are combined into one mixed-radix key and factorized once; if the key could
    overflow int64 they are combined pairwise instead (same ids, more passes).
    """
    arrays = [np.asarray(c, dtype=np.int64) for c in code_arrays]
    radix = [int(c.max(initial=0)) + 1 for c in arrays[1:]]
    if math.prod([int(arrays[0].max(initial=0)) + 1, *radix]) < 2**62:
        key = arrays[0].copy()
        for c, m in zip(arrays[1:], radix, strict=True):
            key *= m
            key += c
        return pd.factorize(key)[0].astype(np.int64, copy=False)
    gid = arrays[0]
    for c, m in zip(arrays[1:], radix, strict=True):
        gid, _ = pd.factorize(gid * m + c)
        gid = gid.astype(np.int64)
    return gid
