"""Pressure excursions over a setting, and stalls against the relief or the cut-off.

Only a sampled trace shows these: a histogram hides how long each visit over the relief
lasted and how fast the pressure got there. The functions take the high-side pressure of a
trace (see :mod:`monitor.models.trace`) as whole arrays, or chunk by chunk with the state
of an unfinished excursion carried from one chunk to the next.

Excursion rule
--------------
An excursion starts when the pressure rises above the setting and ends when it falls back
below the **reset** level ``lower_fraction x setting`` (90 % by default), at a gap in the
recording, or at the end of the trace. Dips between the reset level and the setting (a
relief valve chattering while a drive stalls) stay inside one excursion. For each one:

- ``start_s``: the upward crossing of the setting, interpolated linearly between samples;
- ``duration_s``: from ``start_s`` to the last downward crossing of the setting (linear
  interpolation; at a gap or the end of the trace, the last sample above);
- ``peak_bar`` and ``peak_s``: the highest sample and its (first) time;
- ``rise_rate_bar_per_s``: ``(setting - reset) / (start_s - t_reset_up)``, the mean rate of
  rise through the last 10 % below the setting, from the last upward crossing of the reset
  level; nan when the trace or a gap begins above the reset level.

Results are estimates from the logged samples: a spike shorter than the sample interval is
missed or clipped, and the makers' settings and service checks decide.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import numpy.typing as npt

from monitor.models.relief import RELIEF_FRACTION

RESET_FRACTION = 0.90
"""Reset level and start of the rise-rate measurement, as a share of the setting [-]
(common practice, no source)."""

AT_SETTING_FRACTION = RELIEF_FRACTION
"""A sample is "at" a setting from this share of it [-]: the rule of the relief hours of
logged histograms (0.95; common practice, no source)."""

STALL_SPEED_RPM = 50.0
"""Below this shaft speed a drive is taken as stalled [rpm] (common practice, no source)."""

SPIKE_MARGIN = 0.10
"""A spike more than this share above the relief setting gets a note [-] (common practice,
no source)."""

NOTE_MIN_S = 1.0
"""Time at the relief below which a drive with a cut-off gets no note [s]: a cut-off takes
some tens of milliseconds to destroke the pump, so short visits are normal (common
practice, no source)."""

_FIELDS = ("start_s", "duration_s", "peak_bar", "peak_s", "rise_rate_bar_per_s")


@dataclass(frozen=True)
class Excursions:
    """Excursions above one setting, arrays of shape (E,) in time order.

    Attributes
    ----------
    setting_bar : float
        The setting [bar].
    reset_bar : float
        The reset level [bar].
    start_s, duration_s, peak_bar, peak_s, rise_rate_bar_per_s : numpy.ndarray
        Start [s, trace time], time over the setting [s], highest pressure [bar], its time
        [s], mean rise rate before the start [bar/s] (see the module notes).
    """

    setting_bar: float
    reset_bar: float
    start_s: np.ndarray
    duration_s: np.ndarray
    peak_bar: np.ndarray
    peak_s: np.ndarray
    rise_rate_bar_per_s: np.ndarray

    def __len__(self) -> int:
        return int(self.start_s.size)

    @classmethod
    def join(cls, setting_bar: float, reset_bar: float, parts: list[Excursions]) -> Excursions:
        """The excursions of consecutive chunks as one record."""
        arrays = {f: np.concatenate([[]] + [getattr(p, f) for p in parts]) for f in _FIELDS}
        return cls(setting_bar, reset_bar, **arrays)


@dataclass(frozen=True)
class ExcursionCarry:
    """What one chunk hands to the next: the state at its last sample.

    ``in_event`` says whether the last sample is inside an excursion, whose start, peak,
    last downward crossing so far (nan if none yet) and rise rate follow. ``reset_up_s``
    is the last upward crossing of the reset level since the last gap (nan if none).
    """

    in_event: bool = False
    start_s: float = np.nan
    peak_bar: float = np.nan
    peak_s: float = np.nan
    end_s: float = np.nan
    rise_rate_bar_per_s: float = np.nan
    reset_up_s: float = np.nan


def _cross(t: np.ndarray, p: np.ndarray, i: np.ndarray, level: float) -> np.ndarray:
    """Time where the segment from sample ``i`` to ``i + 1`` crosses ``level`` (linear)."""
    with np.errstate(invalid="ignore", divide="ignore"):
        frac = (level - p[i]) / (p[i + 1] - p[i])
    return t[i] + frac * (t[i + 1] - t[i])


def _event_mask(above, below, gap_before, carry_in) -> tuple[np.ndarray, np.ndarray]:
    """In-excursion mask and excursion starts (see the module notes)."""
    idx = np.arange(above.size)
    set_i = np.where(above, idx, -1)
    reset_i = np.where((below | gap_before) & ~above, idx, -1)
    if carry_in:
        set_i[0], reset_i[0] = 0, -1
    elif not above[0]:
        reset_i[0] = 0
    inside = above | (np.maximum.accumulate(set_i) > np.maximum.accumulate(reset_i))
    before = np.r_[carry_in, inside[:-1]]
    starts = inside & (~before | gap_before)
    return inside, starts


def _last_before(mask: np.ndarray) -> np.ndarray:
    """Index of the last True at or before each position, -1 if none."""
    return np.maximum.accumulate(np.where(mask, np.arange(mask.size), -1))


def _rise_rates(t, p, gap_before, start_idx, start_s, setting, reset, carry):
    """Rise rate of each new excursion, from the last upward crossing of the reset level."""
    up = np.zeros(t.size, dtype=bool)
    up[1:] = (p[:-1] <= reset) & (p[1:] > reset) & ~gap_before[1:]
    t_up = np.full(t.size, np.nan)
    t_up[up] = _cross(t, p, np.flatnonzero(up) - 1, reset)
    last_up, last_gap = _last_before(up), _last_before(gap_before)
    lu, lg = last_up[start_idx], last_gap[start_idx]
    t0 = np.where(lu > lg, t_up[np.maximum(lu, 0)], np.nan)
    t0 = np.where((lu < 0) & (lg < 0), carry.reset_up_s, t0)
    with np.errstate(invalid="ignore", divide="ignore"):
        rate = (setting - reset) / (start_s - t0)
    end_up = t_up[last_up[-1]] if last_up[-1] > last_gap[-1] else np.nan
    carry_up = carry.reset_up_s if (last_up[-1] < 0 and last_gap[-1] < 0) else end_up
    return rate, carry_up


def excursions_step(
    time_s: npt.ArrayLike,
    pressure_bar: npt.ArrayLike,
    gap_after: npt.ArrayLike,
    *,
    setting_bar: float,
    reset_fraction: float = RESET_FRACTION,
    carry: ExcursionCarry | None = None,
    final: bool = True,
) -> tuple[Excursions, ExcursionCarry]:
    """Excursions above a setting in one chunk of a trace.

    Parameters
    ----------
    time_s : array_like (n,)
        Sample times [s], increasing. After the first chunk, sample 0 must be the last
        sample of the previous chunk (the one the carry describes).
    pressure_bar : array_like (n,)
        High-side pressure [bar].
    gap_after : array_like of bool (n,)
        True where the interval after a sample is a gap (:func:`sample_durations_s`).
    setting_bar : float
        Relief or cut-off setting [bar], > 0.
    reset_fraction : float, default 0.9
        Reset level as a share of the setting [-], in (0, 1).
    carry : ExcursionCarry, optional
        State after the previous chunk; None for the first chunk.
    final : bool, default True
        True for the last chunk: an excursion still open at its end is closed there.

    Returns
    -------
    Excursions
        The excursions that ended in this chunk (and the open one if ``final``).
    ExcursionCarry
        The state to pass with the next chunk.

    Notes
    -----
    Crossing of level ``L`` between samples i and i+1:
    ``t = t_i + (L - p_i) (t_{i+1} - t_i) / (p_{i+1} - p_i)``. Rise rate
    ``(p_set - p_reset) / (t_set - t_reset)``.
    """
    setting, reset = _settings(setting_bar, reset_fraction)
    t = np.asarray(time_s, dtype=float)
    p = np.asarray(pressure_bar, dtype=float)
    gap = np.asarray(gap_after, dtype=bool)
    carry = carry or ExcursionCarry()
    empty = Excursions.join(setting, reset, [])
    if t.size == 0:
        return empty, carry
    gap_before = np.r_[False, gap[:-1]]
    above = p > setting
    inside, starts = _event_mask(above, p < reset, gap_before, carry.in_event)
    run = np.cumsum(starts) - (0 if carry.in_event else 1)
    ev = np.flatnonzero(inside)
    if ev.size == 0:
        _, reset_up = _rise_rates(t, p, gap_before, ev, ev.astype(float), setting, reset, carry)
        return empty, ExcursionCarry(reset_up_s=reset_up)
    runs = _runs(t, p, above, gap, gap_before, ev, run, setting, final)
    rate, reset_up = _rise_rates(
        t, p, gap_before, runs["first"], runs["start_s"], setting, reset, carry
    )
    runs["rise_rate_bar_per_s"] = rate
    if carry.in_event:
        _merge_carry(runs, carry)
    return _split_open(runs, setting, reset, inside[-1] and not final, reset_up)


def _runs(t, p, above, gap, gap_before, ev, run, setting, final) -> dict[str, np.ndarray]:
    """Start, end, peak and first sample of each run of in-excursion samples."""
    n = t.size
    b = np.flatnonzero(np.r_[True, run[ev][1:] != run[ev][:-1]])
    first = ev[b]
    peak = np.maximum.reduceat(p[ev], b)
    at_peak = np.where(p[ev] == np.repeat(peak, np.diff(np.r_[b, ev.size])), ev, n)
    peak_i = np.minimum.reduceat(at_peak, b)
    interp = (first > 0) & ~gap_before[first]
    start = t[first].copy()
    start[interp] = _cross(t, p, first[interp] - 1, setting)
    down = np.zeros(n, dtype=bool)
    down[:-1] = above[:-1] & (~above[1:] | gap[:-1])
    down[-1] = above[-1] and final
    t_down = np.full(n, np.nan)
    k = np.flatnonzero(down)
    t_down[k] = t[k]
    cross = k[(k < n - 1) & ~gap[k]]
    t_down[cross] = _cross(t, p, cross, setting)
    end = np.fmax.reduceat(t_down[ev], b)
    return {"first": first, "start_s": start, "end_s": end, "peak_bar": peak, "peak_s": t[peak_i]}


def _merge_carry(runs: dict[str, np.ndarray], carry: ExcursionCarry) -> None:
    """Join the first run (which continues the carried excursion) with the carry."""
    runs["start_s"][0] = carry.start_s
    runs["rise_rate_bar_per_s"][0] = carry.rise_rate_bar_per_s
    runs["end_s"][0] = np.fmax(carry.end_s, runs["end_s"][0])
    if not runs["peak_bar"][0] > carry.peak_bar:
        runs["peak_bar"][0], runs["peak_s"][0] = carry.peak_bar, carry.peak_s


def _split_open(runs, setting, reset, still_open, reset_up) -> tuple[Excursions, ExcursionCarry]:
    """Closed excursions and the carry (the last run if it is still open)."""
    n = runs["start_s"].size - (1 if still_open else 0)
    closed = Excursions(
        setting,
        reset,
        start_s=runs["start_s"][:n],
        duration_s=runs["end_s"][:n] - runs["start_s"][:n],
        peak_bar=runs["peak_bar"][:n],
        peak_s=runs["peak_s"][:n],
        rise_rate_bar_per_s=runs["rise_rate_bar_per_s"][:n],
    )
    if not still_open:
        return closed, ExcursionCarry(reset_up_s=reset_up)
    last = {f: float(runs[f][-1]) for f in ("start_s", "peak_bar", "peak_s", "end_s")}
    rate = float(runs["rise_rate_bar_per_s"][-1])
    return closed, ExcursionCarry(True, **last, rise_rate_bar_per_s=rate, reset_up_s=reset_up)


def _settings(setting_bar: float, reset_fraction: float) -> tuple[float, float]:
    if not (np.isfinite(setting_bar) and setting_bar > 0):
        raise ValueError(f"setting_bar must be a pressure setting > 0 bar, got {setting_bar!r}")
    if not (0 < reset_fraction < 1):
        raise ValueError(f"reset_fraction must be in (0, 1), got {reset_fraction!r}")
    return float(setting_bar), float(setting_bar) * float(reset_fraction)


def find_excursions(
    time_s: npt.ArrayLike,
    pressure_bar: npt.ArrayLike,
    gap_after: npt.ArrayLike,
    *,
    setting_bar: float,
    reset_fraction: float = RESET_FRACTION,
) -> Excursions:
    """Every excursion above ``setting_bar`` in a whole trace (one-chunk
    :func:`excursions_step`; parameters and units as there)."""
    return excursions_step(
        time_s, pressure_bar, gap_after, setting_bar=setting_bar, reset_fraction=reset_fraction
    )[0]


@dataclass(frozen=True)
class StallTimes:
    """Seconds a trace spent at the relief and at the cut-off.

    Attributes
    ----------
    at_relief_s : float
        High side at or above ``AT_SETTING_FRACTION`` of the relief setting [s].
    stalled_at_relief_s : float
        The part of ``at_relief_s`` with the drive stalled [s].
    at_cutoff_s : float
        At or above that share of the cut-off setting but below the relief threshold [s];
        0 without a cut-off.
    held_at_cutoff_s : float
        The part of ``at_cutoff_s`` with the drive stalled [s].
    """

    at_relief_s: float = 0.0
    stalled_at_relief_s: float = 0.0
    at_cutoff_s: float = 0.0
    held_at_cutoff_s: float = 0.0

    def __add__(self, other: StallTimes) -> StallTimes:
        return StallTimes(
            self.at_relief_s + other.at_relief_s,
            self.stalled_at_relief_s + other.stalled_at_relief_s,
            self.at_cutoff_s + other.at_cutoff_s,
            self.held_at_cutoff_s + other.held_at_cutoff_s,
        )


def stall_times_s(
    high_bar: npt.ArrayLike,
    duration_s: npt.ArrayLike,
    *,
    relief_bar: float,
    cutoff_bar: float | None = None,
    speed_rpm: npt.ArrayLike | None = None,
    stall_speed_rpm: float | None = STALL_SPEED_RPM,
    fraction: float = AT_SETTING_FRACTION,
) -> StallTimes:
    """Time at the relief and at the cut-off, and how much of it the drive was stalled.

    Parameters
    ----------
    high_bar : array_like (n,)
        High-side pressure [bar].
    duration_s : array_like (n,)
        Duration of each sample [s].
    relief_bar : float
        Relief setting [bar].
    cutoff_bar : float, optional
        Pressure cut-off setting [bar], below ``relief_bar``; None without a cut-off.
    speed_rpm : array_like (n,), optional
        Shaft speed [rpm]. None: no speed was logged, and every sample at a setting counts
        as stalled (a drive held at its relief or cut-off for long is stalled).
    stall_speed_rpm : float or None, default 50
        Stalled below this speed [rpm]. None ignores the speed (use it when the logged speed
        is the engine-driven pump shaft, which keeps turning in a stall).
    fraction : float, default 0.95
        A sample is at a setting from this share of it [-], in (0, 1].

    Returns
    -------
    StallTimes
        Seconds [s].

    Notes
    -----
    ``at_relief = p >= f p_relief``; ``at_cutoff = f p_cutoff <= p < f p_relief``;
    ``stalled = n < n_stall``; each adds ``sum dt_i`` over its samples.
    """
    relief, cutoff = _check_relief(relief_bar, cutoff_bar)
    if not (0 < fraction <= 1):
        raise ValueError(f"fraction must be in (0, 1], got {fraction!r}")
    p = np.asarray(high_bar, dtype=float)
    dt = np.asarray(duration_s, dtype=float)
    at_relief = p >= fraction * relief
    at_cutoff = (p >= fraction * cutoff) & ~at_relief if cutoff else np.zeros(p.size, bool)
    if speed_rpm is None or stall_speed_rpm is None:
        stalled = np.ones(p.size, dtype=bool)
    else:
        stalled = np.asarray(speed_rpm, dtype=float) < stall_speed_rpm
    return StallTimes(
        float(dt[at_relief].sum()),
        float(dt[at_relief & stalled].sum()),
        float(dt[at_cutoff].sum()),
        float(dt[at_cutoff & stalled].sum()),
    )


def _check_relief(relief_bar: float, cutoff_bar: float | None) -> tuple[float, float | None]:
    if not (np.isfinite(relief_bar) and relief_bar > 0):
        raise ValueError(f"relief_bar must be a pressure setting > 0 bar, got {relief_bar!r}")
    if cutoff_bar is not None and not (np.isfinite(cutoff_bar) and 0 < cutoff_bar):
        raise ValueError(
            f"cutoff_bar must be a pressure setting > 0 bar or None, got {cutoff_bar!r}"
        )
    return float(relief_bar), None if cutoff_bar is None else float(cutoff_bar)


def check_settings(
    relief_bar: float,
    cutoff_bar: float | None = None,
    reset_fraction: float = RESET_FRACTION,
    fraction: float = AT_SETTING_FRACTION,
) -> None:
    """Raise ValueError naming the argument if a setting or share is out of range:
    settings > 0 bar, the cut-off below the relief, ``reset_fraction`` in (0, 1) and
    ``fraction`` in (0, 1]."""
    relief, cutoff = _check_relief(relief_bar, cutoff_bar)
    if cutoff is not None and cutoff >= relief:
        raise ValueError(f"cutoff_bar ({cutoff:g}) must be below relief_bar ({relief:g})")
    _settings(relief, reset_fraction)
    if not (0 < fraction <= 1):
        raise ValueError(f"fraction must be in (0, 1], got {fraction!r}")


def trace_notes(
    stalls: StallTimes,
    relief_excursions: Excursions,
    *,
    relief_bar: float,
    cutoff_bar: float | None = None,
    spike_margin: float = SPIKE_MARGIN,
    note_min_s: float = NOTE_MIN_S,
    fraction: float = AT_SETTING_FRACTION,
) -> tuple[str, ...]:
    """Plain-words notes on a trace's relief and cut-off behaviour.

    Parameters
    ----------
    stalls : StallTimes
        From :func:`stall_times_s`.
    relief_excursions : Excursions
        Excursions above the relief setting.
    relief_bar, cutoff_bar : float
        Settings [bar]; ``cutoff_bar`` None without a cut-off.
    spike_margin : float, default 0.10
        Note spikes more than this share above the relief setting [-].
    note_min_s : float, default 1.0
        Note a drive with a cut-off that spent at least this long at the relief [s].
    fraction : float, default 0.95
        The share of a setting used by :func:`stall_times_s` [-].

    Returns
    -------
    tuple of str
        Zero, one or two notes.
    """
    relief, cutoff = _check_relief(relief_bar, cutoff_bar)
    notes = []
    if cutoff is not None and stalls.at_relief_s >= note_min_s:
        if cutoff >= relief:
            why = "the cut-off is set at or above the relief setting"
        elif cutoff >= fraction * relief:
            why = f"the cut-off is set within {1 - fraction:.0%} of the relief setting"
        else:
            why = "the cut-off may be set higher than recorded, or respond too slowly"
        notes.append(
            f"The pump has a pressure cut-off at {cutoff:g} bar, yet the loop spent "
            f"{stalls.at_relief_s:.1f} s at the relief ({fraction:.0%} of {relief:g} bar or "
            f"more), {stalls.stalled_at_relief_s:.1f} s of it stalled: {why}. Have the "
            "cut-off and relief settings checked against the maker's data."
        )
    limit = relief * (1 + spike_margin)
    over = relief_excursions.peak_bar > limit
    if over.any():
        top = int(np.argmax(relief_excursions.peak_bar))
        notes.append(
            f"{int(over.sum())} pressure spike(s) exceeded the relief setting of {relief:g} bar "
            f"by more than {spike_margin:.0%} (above {limit:g} bar); the highest reached "
            f"{relief_excursions.peak_bar[top]:.1f} bar at {relief_excursions.peak_s[top]:.3f} s. "
            "Have the relief valve's setting and response checked."
        )
    return tuple(notes)
