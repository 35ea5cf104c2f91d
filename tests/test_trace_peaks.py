"""Tests of monitor.models.peaks: excursions over a setting, stall times and notes."""

import numpy as np
import pytest

from monitor.models import peaks as P
from monitor.models import trace as T

RELIEF, CUTOFF = 450.0, 420.0
SPIKE_RATE = 2000.0  # bar/s: 2 bar per sample at 1 kHz
SPIKES = ((22.5, 480.0), (52.5, 520.0), (82.5, 600.0))  # (start at the sine's top [s], peak)


def sine_with_spikes() -> tuple[np.ndarray, np.ndarray]:
    """200 + 100 sin(2 pi t / 10 s) bar at 1 kHz for 100 s; at three of the sine's tops
    (300 bar) a triangular spike rises and falls at 2000 bar/s to its peak."""
    k = np.arange(100_000)
    t = k / 1000.0
    p = 200.0 + 100.0 * np.sin(2 * np.pi * t / 10.0)
    for t0, peak in SPIKES:
        m = int((peak - 300.0) / 2.0)  # samples from 300 bar to the peak
        j = np.arange(2 * m + 1)
        p[int(round(t0 * 1000)) + j] = 300.0 + 2.0 * np.minimum(j, 2 * m - j)
    return t, p


def test_spikes_over_relief_as_constructed():
    t, p = sine_with_spikes()
    _, gap = T.sample_durations_s(t)
    e = P.find_excursions(t, p, gap, setting_bar=RELIEF)
    assert len(e) == 3
    t0 = np.array([s[0] for s in SPIKES])
    peak = np.array([s[1] for s in SPIKES])
    # hand-computed on the linear ramps: 450 bar is reached (450 - 300) / 2000 = 0.075 s
    # after the ramp starts; time over 450 bar is 2 (P - 450) / 2000 s; the peak comes
    # (P - 300) / 2000 s after the start; the rise from 405 to 450 bar runs at 2000 bar/s.
    np.testing.assert_allclose(e.start_s, t0 + 0.075, atol=1e-9)
    np.testing.assert_allclose(e.duration_s, 2 * (peak - RELIEF) / SPIKE_RATE, atol=1e-9)
    np.testing.assert_array_equal(e.peak_bar, peak)
    np.testing.assert_allclose(e.peak_s, t0 + (peak - 300.0) / SPIKE_RATE, atol=1e-9)
    np.testing.assert_allclose(e.rise_rate_bar_per_s, SPIKE_RATE, rtol=1e-6)
    c = P.find_excursions(t, p, gap, setting_bar=CUTOFF)
    np.testing.assert_allclose(c.duration_s, 2 * (peak - CUTOFF) / SPIKE_RATE, atol=1e-9)
    np.testing.assert_allclose(c.start_s, t0 + 0.06, atol=1e-9)  # (420 - 300) / 2000


def test_spikes_in_chunks_match_one_pass():
    t, p = sine_with_spikes()
    _, gap = T.sample_durations_s(t)
    whole = P.find_excursions(t, p, gap, setting_bar=RELIEF)
    for size in (487, 33_333):  # chunk ends fall inside spikes
        carry, parts, start = None, [], 0
        while start < t.size:
            stop = min(t.size, start + size)
            lo = max(0, start - 1)  # each chunk starts with the previous chunk's last sample
            _, g = T.sample_durations_s(t[lo:stop])
            found, carry = P.excursions_step(
                t[lo:stop], p[lo:stop], g, setting_bar=RELIEF, carry=carry, final=stop == t.size
            )
            parts.append(found)
            start = stop
        got = P.Excursions.join(RELIEF, 405.0, parts)
        for f in ("start_s", "duration_s", "peak_bar", "peak_s", "rise_rate_bar_per_s"):
            np.testing.assert_allclose(getattr(got, f), getattr(whole, f), rtol=1e-12)


def test_chatter_is_one_excursion_and_start_above_has_no_rise_rate():
    # hand-computed: up-crossing of 450 between 440 (t=0) and 455 (t=1): t = 10/15 s; the
    # dips to 445 stay above the 405-bar reset; last down-crossing between 455 (t=3) and
    # 445 (t=4): t = 3.5 s. No crossing of 405 was seen: rise rate unknown.
    t = np.arange(6.0)
    p = np.array([440.0, 455.0, 445.0, 455.0, 445.0, 300.0])
    e = P.find_excursions(t, p, np.zeros(6, bool), setting_bar=RELIEF)
    assert len(e) == 1
    assert e.start_s[0] == pytest.approx(10 / 15)
    assert e.duration_s[0] == pytest.approx(3.5 - 10 / 15)
    assert (e.peak_bar[0], e.peak_s[0]) == (455.0, 1.0)
    assert np.isnan(e.rise_rate_bar_per_s[0])


def test_gap_splits_an_excursion():
    # hand-computed: 460 bar at 0 and 1 s, a 3-s gap, 460 bar at 4 and 5 s, 300 at 6 s.
    # First: from the first sample to the last before the gap (1 s). Second: from the first
    # sample after the gap to the crossing between 5 s and 6 s: 5 + 10/160 s.
    t = np.array([0.0, 1.0, 4.0, 5.0, 6.0])
    p = np.array([460.0, 460.0, 460.0, 460.0, 300.0])
    _, gap = T.sample_durations_s(t, max_gap_s=2.0)
    e = P.find_excursions(t, p, gap, setting_bar=RELIEF)
    np.testing.assert_allclose(e.start_s, [0.0, 4.0])
    np.testing.assert_allclose(e.duration_s, [1.0, 1.0 + 10 / 160])
    assert np.isnan(e.rise_rate_bar_per_s).all()


def test_no_excursion():
    e = P.find_excursions([0.0, 1.0], [100.0, 449.0], [False, False], setting_bar=RELIEF)
    assert len(e) == 0 and e.peak_bar.dtype == float


def stall_trace() -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """10 s stalled at 448 bar (speed 0), 5 s moving at 440 bar (1000 rpm), 20 s held at
    400 bar (speed 0), 5 s at 100 bar moving; 10 Hz."""
    blocks = ((448.0, 0.0, 100), (440.0, 1000.0, 50), (400.0, 0.0, 200), (100.0, 1500.0, 51))
    p = np.concatenate([np.full(n, v) for v, _, n in blocks])
    n = np.concatenate([np.full(k, s) for _, s, k in blocks])
    return np.arange(p.size) / 10.0, p, n


def test_stall_times_hand_computed():
    t, p, n = stall_trace()
    dt, _ = T.sample_durations_s(t)
    s = P.stall_times_s(p, dt, relief_bar=RELIEF, cutoff_bar=CUTOFF, speed_rpm=n)
    # at relief: p >= 0.95 * 450 = 427.5 bar -> 448 and 440 bar (10 + 5 s), stalled 10 s;
    # at cut-off: 0.95 * 420 = 399 <= p < 427.5 -> 400 bar, 20 s, all stalled
    assert s.at_relief_s == pytest.approx(15.0)
    assert s.stalled_at_relief_s == pytest.approx(10.0)
    assert (s.at_cutoff_s, s.held_at_cutoff_s) == (pytest.approx(20.0), pytest.approx(20.0))
    # no speed logged, or the speed ignored: every sample at a setting counts as stalled
    s2 = P.stall_times_s(p, dt, relief_bar=RELIEF, cutoff_bar=CUTOFF)
    assert s2.stalled_at_relief_s == pytest.approx(15.0)
    s3 = P.stall_times_s(p, dt, relief_bar=RELIEF, speed_rpm=n, stall_speed_rpm=None)
    assert s3.stalled_at_relief_s == pytest.approx(15.0) and s3.at_cutoff_s == 0.0
    # the sum of two halves is the whole
    half = t.size // 2
    parts = P.stall_times_s(p[:half], dt[:half], relief_bar=RELIEF, speed_rpm=n[:half])
    parts += P.stall_times_s(p[half:], dt[half:], relief_bar=RELIEF, speed_rpm=n[half:])
    assert parts.stalled_at_relief_s == pytest.approx(10.0)


def test_notes():
    t, p = sine_with_spikes()
    _, gap = T.sample_durations_s(t)
    e = P.find_excursions(t, p, gap, setting_bar=RELIEF)
    stalls = P.StallTimes(at_relief_s=12.0, stalled_at_relief_s=10.0)
    notes = P.trace_notes(stalls, e, relief_bar=RELIEF, cutoff_bar=CUTOFF)
    assert len(notes) == 2
    assert "cut-off at 420 bar, yet the loop spent 12.0 s at the relief" in notes[0]
    # 480 bar is within 10 % of 450 (495); 520 and 600 bar are not
    assert notes[1].startswith("2 pressure spike(s) exceeded the relief setting of 450 bar")
    assert "600.0 bar at 82.650 s" in notes[1]
    close = P.trace_notes(stalls, e, relief_bar=RELIEF, cutoff_bar=440.0)
    assert "within 5% of the relief setting" in close[0]
    # no cut-off, or too short a visit: no cut-off note; no spikes over 495 bar: no spike note
    assert len(P.trace_notes(stalls, e, relief_bar=RELIEF)) == 1
    short = P.StallTimes(at_relief_s=0.5)
    assert P.trace_notes(short, P.Excursions.join(RELIEF, 405.0, []), relief_bar=RELIEF) == ()


def test_errors():
    with pytest.raises(ValueError, match="setting_bar must be a pressure setting > 0 bar"):
        P.find_excursions([0.0], [1.0], [False], setting_bar=-1.0)
    with pytest.raises(ValueError, match=r"reset_fraction must be in \(0, 1\)"):
        P.find_excursions([0.0], [1.0], [False], setting_bar=450.0, reset_fraction=1.0)
    with pytest.raises(ValueError, match=r"cutoff_bar \(460\) must be below relief_bar \(450\)"):
        P.check_settings(450.0, 460.0)
    with pytest.raises(ValueError, match="relief_bar must be a pressure setting > 0 bar"):
        P.stall_times_s([1.0], [1.0], relief_bar=0.0)
