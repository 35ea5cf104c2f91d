"""Chunk-by-chunk accumulation of a pressure trace: histogram, cycles, peaks, stalls.

:class:`TraceAccumulator` takes validated samples one chunk at a time and keeps only
bounded state: the histogram and matrix, sums for the means, the turning points of the
high side, the excursions found so far, stall times, a min-max envelope for plotting, and
the last sample (each sample's duration is the time to the next one, which may be in the
next chunk). The arithmetic is in :mod:`monitor.models.trace`, :mod:`monitor.models.peaks`
and :mod:`monitor.models.cycles`; the result does not depend on the chunk size.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass, field
from datetime import datetime, timedelta

import numpy as np

from monitor.domain.records import QUANTITY_PRESSURE, QUANTITY_PRESSURE_SPEED, Histogram
from monitor.models import cycles as C
from monitor.models import peaks as P
from monitor.models import trace as T


@dataclass(frozen=True)
class TraceSettings:
    """Every choice that moves a trace's results; defaults documented at their constants.

    Attributes
    ----------
    max_gap_s : float
        Longer intervals are gaps, left out of the histogram [s]
        (:data:`monitor.models.trace.DEFAULT_MAX_GAP_S`).
    edges_bar : tuple of float, optional
        Pressure band edges to use (e.g. the component model's bands) [bar]; extended with
        ``band_width_bar`` bands below and above so that no time is lost.
    band_width_bar : float
        Default band width [bar] (:data:`monitor.models.trace.DEFAULT_BAND_WIDTH_BAR`).
    speed_edges_rpm : tuple of float, optional
        Speed band edges of the pressure-by-speed matrix [rpm].
    speed_band_width_rpm : float
        Default speed band width [rpm].
    relief_bar, cutoff_bar : float, optional
        Relief and pressure cut-off settings [bar]. Without ``relief_bar`` there are no
        excursions, stall times or notes; bands then reach the highest pressure logged,
        with it at least to the relief setting rounded up to a band edge.
    reset_fraction, at_setting_fraction, stall_speed_rpm, spike_margin, note_min_s
        See :mod:`monitor.models.peaks`. ``stall_speed_rpm`` None ignores the speed.
    hysteresis_bar : float
        Turning-point gate [bar] (:data:`monitor.models.cycles.DEFAULT_HYSTERESIS_BAR`).
    envelope_buckets : int
        The plotting envelope keeps at most twice this many buckets (of equal width, at
        least half as many over the whole trace).
    chunk_rows : int
        Rows read per chunk (memory bound; results do not depend on it).
    """

    max_gap_s: float = T.DEFAULT_MAX_GAP_S
    edges_bar: tuple[float, ...] | None = None
    band_width_bar: float = T.DEFAULT_BAND_WIDTH_BAR
    speed_edges_rpm: tuple[float, ...] | None = None
    speed_band_width_rpm: float = T.DEFAULT_SPEED_BAND_WIDTH_RPM
    relief_bar: float | None = None
    cutoff_bar: float | None = None
    reset_fraction: float = P.RESET_FRACTION
    at_setting_fraction: float = P.AT_SETTING_FRACTION
    stall_speed_rpm: float | None = P.STALL_SPEED_RPM
    spike_margin: float = P.SPIKE_MARGIN
    note_min_s: float = P.NOTE_MIN_S
    hysteresis_bar: float = C.DEFAULT_HYSTERESIS_BAR
    envelope_buckets: int = 2000
    chunk_rows: int = 200_000

    def __post_init__(self) -> None:
        for name in ("edges_bar", "speed_edges_rpm"):  # lists given: keep them immutable
            value = getattr(self, name)
            if value is not None:
                object.__setattr__(self, name, tuple(float(v) for v in np.ravel(value)))
        for name in ("max_gap_s", "band_width_bar", "speed_band_width_rpm", "note_min_s"):
            value = getattr(self, name)
            if not (np.isfinite(value) and value > 0):
                raise ValueError(f"{name} must be a number > 0, got {value!r}")
        T.band_edges(self.edges_bar, width=self.band_width_bar)
        T.band_edges(self.speed_edges_rpm, width=self.speed_band_width_rpm)
        if self.relief_bar is None and self.cutoff_bar is not None:
            raise ValueError("cutoff_bar needs relief_bar: give both settings or neither")
        if self.relief_bar is not None:
            P.check_settings(
                self.relief_bar, self.cutoff_bar, self.reset_fraction, self.at_setting_fraction
            )
        if not (np.isfinite(self.hysteresis_bar) and self.hysteresis_bar >= 0):
            raise ValueError(f"hysteresis_bar must be >= 0 bar, got {self.hysteresis_bar!r}")
        for name in ("envelope_buckets", "chunk_rows"):
            value = getattr(self, name)
            if not (isinstance(value, int) and value >= 1):
                raise ValueError(f"{name} must be an integer >= 1, got {value!r}")


@dataclass(frozen=True)
class Envelope:
    """Min-max envelope of a trace for plotting (see :func:`monitor.models.trace.minmax_envelope`).

    Attributes
    ----------
    bucket_s : float
        Bucket width [s].
    start_s : numpy.ndarray (K,)
        Start of each bucket that holds samples [s since the first sample]; buckets without
        samples are left out, so a plot should break its line where ``start_s`` jumps by
        more than the gap limit.
    minimum, maximum : dict of str to numpy.ndarray (K,)
        Per channel (``pressure_a_bar``, ``pressure_b_bar``, ``speed_rpm``), the smallest and
        largest sample in each bucket.
    """

    bucket_s: float
    start_s: np.ndarray
    minimum: dict[str, np.ndarray]
    maximum: dict[str, np.ndarray]


class EnvelopeBuilder:
    """Streaming min-max envelope: fine buckets, doubled in width whenever more than
    ``2 n`` would be needed, so memory stays at ``2 n`` buckets per channel."""

    BASE_S = 2.0**-10
    """Narrowest bucket [s] (about 1 ms)."""

    def __init__(self, channels: tuple[str, ...], n_buckets: int) -> None:
        self.cap = 2 * n_buckets
        self.width = self.BASE_S
        self.used = 0
        self.lo = {c: np.full(self.cap, np.nan) for c in channels}
        self.hi = {c: np.full(self.cap, np.nan) for c in channels}

    def add(self, time_s: np.ndarray, columns: dict[str, np.ndarray]) -> None:
        """Add samples at ``time_s`` [s since the first sample, >= 0, increasing]."""
        if time_s.size == 0:
            return
        while int(time_s[-1] // self.width) >= self.cap:
            self._coarsen()
        k = (time_s // self.width).astype(np.int64)
        k0, k1 = int(k[0]), int(k[-1]) + 1
        for c, v in columns.items():
            vmin, vmax = T.bucket_minmax(k - k0, v, k1 - k0)
            self.lo[c][k0:k1] = np.fmin(self.lo[c][k0:k1], vmin)
            self.hi[c][k0:k1] = np.fmax(self.hi[c][k0:k1], vmax)
        self.used = max(self.used, k1)

    def _coarsen(self) -> None:
        self.width *= 2
        for arrays, reduce in ((self.lo, np.fmin), (self.hi, np.fmax)):
            for c, a in arrays.items():
                half = reduce(a[0::2], a[1::2])
                arrays[c] = np.r_[half, np.full(self.cap - half.size, np.nan)]
        self.used = (self.used + 1) // 2

    def result(self) -> Envelope:
        first = next(iter(self.lo.values()))[: self.used]
        keep = np.flatnonzero(~np.isnan(first))  # buckets with samples
        return Envelope(
            bucket_s=self.width,
            start_s=keep * self.width,
            minimum={c: a[keep] for c, a in self.lo.items()},
            maximum={c: a[keep] for c, a in self.hi.items()},
        )


@dataclass(frozen=True)
class TraceResult:
    """What a trace file gave: its histogram, cycles input, peaks, stalls and problems.

    A trace with any problem is rejected whole: ``problems`` lists them and every other
    field is empty (zero, None or empty arrays). Times are seconds since the first sample.

    Attributes
    ----------
    name : str
        File name shown in problems.
    problems : tuple of Problem
        Everything wrong with the file (the first 200, then a count).
    samples : int
        Data rows read.
    duration_s : float
        Last sample time minus first [s].
    covered_s : float
        Time in the histogram: ``duration_s`` less gaps [s].
    gap_count, gap_total_s : int, float
        Intervals longer than ``settings.max_gap_s`` and their total length [s].
    started_at, ended_at : datetime, optional
        UTC times of the first and last sample, when the file has timestamps.
    source_units : dict of str to str
        Unit of each pressure column as written (``{"pressure_a": "psi", ...}``).
    pressure_edges_bar : numpy.ndarray (B + 1,)
        Band edges, high-side gauge pressure [bar].
    hours : numpy.ndarray (B,)
        Hours per band [h].
    speed_edges_rpm : numpy.ndarray (S + 1,) or None
        Speed band edges [rpm] when the file has speed.
    hours_by_speed : numpy.ndarray (B, S) or None
        Hours per pressure-by-speed cell [h] when the file has speed.
    mean_low_side_bar, mean_high_side_bar, max_high_side_bar : float
        Time-weighted mean low and high side, and the highest high side [bar].
    mean_speed_rpm : float or None
        Time-weighted mean speed [rpm].
    turning_points_bar, turning_points_s : numpy.ndarray
        Turning points of the high side [bar] and their times [s]
        (:func:`monitor.models.cycles.turning_points`).
    relief_excursions, cutoff_excursions : Excursions or None
        Excursions above the relief and cut-off settings (None without the setting).
    stalls : StallTimes or None
        Time at relief and cut-off (None without a relief setting).
    notes : tuple of str
        Plain-words notes (:func:`monitor.models.peaks.trace_notes`).
    envelope : Envelope or None
        Min-max envelope of both pressures and the speed for plotting.
    settings : TraceSettings
        The settings used.
    """

    name: str
    problems: tuple
    settings: TraceSettings
    samples: int = 0
    duration_s: float = 0.0
    covered_s: float = 0.0
    gap_count: int = 0
    gap_total_s: float = 0.0
    started_at: datetime | None = None
    ended_at: datetime | None = None
    source_units: dict[str, str] = field(default_factory=dict)
    pressure_edges_bar: np.ndarray = field(default_factory=lambda: np.zeros(0))
    hours: np.ndarray = field(default_factory=lambda: np.zeros(0))
    speed_edges_rpm: np.ndarray | None = None
    hours_by_speed: np.ndarray | None = None
    mean_low_side_bar: float = float("nan")
    mean_high_side_bar: float = float("nan")
    max_high_side_bar: float = float("nan")
    mean_speed_rpm: float | None = None
    turning_points_bar: np.ndarray = field(default_factory=lambda: np.zeros(0))
    turning_points_s: np.ndarray = field(default_factory=lambda: np.zeros(0))
    relief_excursions: P.Excursions | None = None
    cutoff_excursions: P.Excursions | None = None
    stalls: P.StallTimes | None = None
    notes: tuple[str, ...] = ()
    envelope: Envelope | None = None

    @property
    def ok(self) -> bool:
        return not self.problems

    @property
    def operating_hours(self) -> float:
        """Hours in the histogram [h] (``covered_s / 3600``)."""
        return self.covered_s / 3600.0

    def summary(self) -> dict:
        """The trace's summary as plain JSON-ready values (nan as None), to keep beside the
        histogram made from it: sizes, times, means, peak and stall figures, notes and the
        settings used."""
        relief, cutoff = self.relief_excursions, self.cutoff_excursions
        out = {
            "file": self.name,
            "samples": self.samples,
            "duration_s": self.duration_s,
            "covered_s": self.covered_s,
            "gap_count": self.gap_count,
            "gap_total_s": self.gap_total_s,
            "started_at": None if self.started_at is None else self.started_at.isoformat(),
            "ended_at": None if self.ended_at is None else self.ended_at.isoformat(),
            "source_units": dict(self.source_units),
            "mean_low_side_bar": self.mean_low_side_bar,
            "mean_high_side_bar": self.mean_high_side_bar,
            "max_high_side_bar": self.max_high_side_bar,
            "mean_speed_rpm": self.mean_speed_rpm,
            "turning_points": int(self.turning_points_bar.size),
            "relief_excursions": None if relief is None else len(relief),
            "cutoff_excursions": None if cutoff is None else len(cutoff),
            "stalls": None if self.stalls is None else asdict(self.stalls),
            "notes": list(self.notes),
            "settings": asdict(self.settings),
        }
        return _plain(out)


def _plain(value):
    """nan -> None and tuples -> lists, recursively (JSON has neither)."""
    if isinstance(value, dict):
        return {k: _plain(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [_plain(v) for v in value]
    if isinstance(value, float | np.floating):
        return None if np.isnan(value) else float(value)
    return value


def trace_histograms(
    result: TraceResult,
    *,
    unit: str,
    position: str,
    hour_meter_start: float,
    started_at: datetime | None = None,
    hour_meter_end: float | None = None,
) -> list[Histogram]:
    """The histograms of a clean trace as ordinary upload records.

    Parameters
    ----------
    result : TraceResult
        A trace without problems.
    unit, position : str
        The unit's tag and the loop's position.
    hour_meter_start : float
        Hour meter at the first sample [h].
    started_at : datetime, optional
        Time of the first sample (timezone-aware); required when the file has no
        timestamps, ignored when it has.
    hour_meter_end : float, optional
        Hour meter at the last sample [h]; default ``hour_meter_start + duration_s / 3600``
        (the machine ran through the gaps; their time is in no band).

    Returns
    -------
    list of Histogram
        A ``pressure`` histogram of the high side [bar, h] with the mean speed when there
        is one, and a ``pressure_speed`` matrix when the file has speed.
    """
    if not result.ok:
        raise ValueError("result has problems: a rejected trace has no histograms")
    start = result.started_at or started_at
    if start is None or start.tzinfo is None:
        raise ValueError(
            "started_at must be a timezone-aware datetime when the file has no timestamps"
        )
    end = start + timedelta(seconds=result.duration_s)
    hm_end = (
        hour_meter_start + result.duration_s / 3600.0 if hour_meter_end is None else hour_meter_end
    )
    edges = result.pressure_edges_bar
    common = dict(
        unit=unit,
        position=position,
        period_start=start,
        period_end=end,
        hour_meter_start=hour_meter_start,
        hour_meter_end=hm_end,
        pressure_low_bar=edges[:-1].copy(),
        pressure_high_bar=edges[1:].copy(),
        mean_speed_rpm=result.mean_speed_rpm,
    )
    out = [Histogram(quantity=QUANTITY_PRESSURE, hours=result.hours.copy(), **common)]
    if result.hours_by_speed is not None:
        s = result.speed_edges_rpm
        out.append(
            Histogram(
                quantity=QUANTITY_PRESSURE_SPEED,
                hours=result.hours_by_speed.copy(),
                speed_low_rpm=s[:-1].copy(),
                speed_high_rpm=s[1:].copy(),
                **common,
            )
        )
    return out


class TraceAccumulator:
    """Running results of one trace; feed validated chunks with :meth:`add`, then
    :meth:`finish`."""

    def __init__(self, settings: TraceSettings, has_speed: bool) -> None:
        s = self.s = settings
        self.edges = T.band_edges(s.edges_bar, width=s.band_width_bar)
        self.hours = np.zeros(self.edges.size - 1)
        self.speed_edges = None
        self.matrix = None
        if has_speed:
            self.speed_edges = T.band_edges(
                s.speed_edges_rpm, width=s.speed_band_width_rpm, top=T.SPEED_TOP_RPM
            )
            self.matrix = np.zeros((self.edges.size - 1, self.speed_edges.size - 1))
        self.prev: tuple[float, float, float, float] | None = None  # t, high, low, speed
        self.samples = 0
        self.sums = np.zeros(5)  # covered s, low*s, high*s, speed*s, gap s
        self.gap_count = 0
        self.max_high = -np.inf
        self.tp_carry: C.TurningCarry | None = None
        self.tp: list[tuple[np.ndarray, np.ndarray]] = []
        self.exc = {k: (None, []) for k in self._settings_by_name()}
        self.stalls = P.StallTimes()
        names = ("pressure_a_bar", "pressure_b_bar") + (("speed_rpm",) if has_speed else ())
        self.envelope = EnvelopeBuilder(names, s.envelope_buckets)

    def _settings_by_name(self) -> dict[str, float]:
        out = {}
        if self.s.relief_bar is not None:
            out["relief"] = self.s.relief_bar
        if self.s.cutoff_bar is not None:
            out["cutoff"] = self.s.cutoff_bar
        return out

    def add(self, time_s, pressure_a_bar, pressure_b_bar, speed_rpm=None) -> None:
        """One chunk of samples: time [s since the first sample], pressures [bar], speed
        [rpm] or None; times increasing and later than the previous chunk's."""
        high, low = T.loop_sides_bar(pressure_a_bar, pressure_b_bar)
        channels = {"pressure_a_bar": pressure_a_bar, "pressure_b_bar": pressure_b_bar}
        if speed_rpm is not None:
            channels["speed_rpm"] = speed_rpm
        self.envelope.add(time_s, channels)
        v, t, self.tp_carry = C.turning_points(
            high, time_s, hysteresis=self.s.hysteresis_bar, carry=self.tp_carry, final=False
        )
        self.tp.append((v, t))
        self.samples += time_s.size
        self.max_high = max(self.max_high, float(high.max(initial=-np.inf)))
        speed = np.zeros(time_s.size) if speed_rpm is None else speed_rpm
        if self.prev is not None:
            time_s, high, low, speed = (
                np.r_[a, b] for a, b in zip(self.prev, (time_s, high, low, speed), strict=True)
            )
        self._intervals(time_s, high, low, speed, final=False)
        self.prev = (float(time_s[-1]), float(high[-1]), float(low[-1]), float(speed[-1]))

    def _intervals(self, t, high, low, speed, final: bool) -> None:
        """Durations of all samples but the last (whose next sample is not known yet)."""
        dur, gap = T.sample_durations_s(t, max_gap_s=self.s.max_gap_s)
        d, h, n = dur[:-1], high[:-1], speed[:-1]
        self.hours += T.time_at_pressure_h(h, d, self.edges)
        if self.matrix is not None:
            self.matrix += T.time_at_pressure_speed_h(h, n, d, self.edges, self.speed_edges)
        g = gap[:-1]
        self.gap_count += int(g.sum())
        self.sums += (d.sum(), d @ low[:-1], d @ h, d @ n, np.diff(t)[g].sum())
        for key, setting in self._settings_by_name().items():
            carry, parts = self.exc[key]
            found, carry = P.excursions_step(
                t,
                high,
                gap,
                setting_bar=setting,
                reset_fraction=self.s.reset_fraction,
                carry=carry,
                final=final,
            )
            parts.append(found)
            self.exc[key] = (carry, parts)
        if self.s.relief_bar is not None:
            self.stalls += P.stall_times_s(
                h,
                d,
                relief_bar=self.s.relief_bar,
                cutoff_bar=self.s.cutoff_bar,
                speed_rpm=None if self.matrix is None else n,
                stall_speed_rpm=self.s.stall_speed_rpm,
                fraction=self.s.at_setting_fraction,
            )

    def finish(self) -> dict:
        """The result fields (for :class:`TraceResult`); needs at least one sample."""
        t, h, lo, n = self.prev
        self._intervals(np.array([t]), np.array([h]), np.array([lo]), np.array([n]), final=True)
        v, tt, _ = C.turning_points([], [], hysteresis=self.s.hysteresis_bar, carry=self.tp_carry)
        self.tp.append((v, tt))
        covered, low_s, high_s, speed_s, gap_s = self.sums.tolist()
        out = self._bands()
        with np.errstate(invalid="ignore", divide="ignore"):
            out.update(
                covered_s=covered,
                gap_count=self.gap_count,
                gap_total_s=gap_s,
                mean_low_side_bar=low_s / covered if covered > 0 else np.nan,
                mean_high_side_bar=high_s / covered if covered > 0 else np.nan,
                max_high_side_bar=self.max_high,
                mean_speed_rpm=(speed_s / covered if covered > 0 else np.nan)
                if self.matrix is not None
                else None,
            )
        out["turning_points_bar"] = np.concatenate([p[0] for p in self.tp])
        out["turning_points_s"] = np.concatenate([p[1] for p in self.tp])
        out.update(self._peaks())
        out["envelope"] = self.envelope.result()
        return out

    def _bands(self) -> dict:
        """Histogram and matrix, trimmed above the last band with time (kept at least to the
        last given edge and to the relief setting rounded up to a band edge)."""
        s = self.s
        keep_to = max(s.edges_bar[-1] if s.edges_bar else 0.0, s.relief_bar or 0.0)
        nb = T.used_bands(self.hours, self.edges, keep_to)
        out = {"pressure_edges_bar": self.edges[: nb + 1], "hours": self.hours[:nb]}
        if self.matrix is not None:
            ns = T.used_bands(self.matrix.T, self.speed_edges, (s.speed_edges_rpm or (0.0,))[-1])
            out["speed_edges_rpm"] = self.speed_edges[: ns + 1]
            out["hours_by_speed"] = self.matrix[:nb, :ns]
        return out

    def _peaks(self) -> dict:
        s = self.s
        out = {}
        for key, setting in self._settings_by_name().items():
            reset = setting * s.reset_fraction
            out[f"{key}_excursions"] = P.Excursions.join(setting, reset, self.exc[key][1])
        if s.relief_bar is not None:
            out["stalls"] = self.stalls
            out["notes"] = P.trace_notes(
                self.stalls,
                out["relief_excursions"],
                relief_bar=s.relief_bar,
                cutoff_bar=s.cutoff_bar,
                spike_margin=s.spike_margin,
                note_min_s=s.note_min_s,
                fraction=s.at_setting_fraction,
            )
        return out
