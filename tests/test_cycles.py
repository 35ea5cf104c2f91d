"""Tests of monitor.models.cycles: turning points, rainflow counting, cycle matrices."""

from collections import defaultdict

import numpy as np
import pytest
import rainflow
from hypothesis import given, settings
from hypothesis import strategies as st

from monitor.models import cycles as C

# ASTM E1049-85 (reapproved 2017), Section 5.4.4, Fig. 6: the rainflow counting example
ASTM_HISTORY = [-2.0, 1.0, -3.0, 5.0, -1.0, 3.0, -4.0, 4.0, -2.0]
ASTM_RANGE_COUNTS = [(3.0, 0.5), (4.0, 1.5), (6.0, 0.5), (8.0, 1.0), (9.0, 0.5)]


def test_astm_e1049_rainflow_example():
    rng, mean, count = C.rainflow_cycles(ASTM_HISTORY)
    by_range = defaultdict(float)
    for r, c in zip(rng.tolist(), count.tolist(), strict=True):
        by_range[r] += c
    assert sorted(by_range.items()) == ASTM_RANGE_COUNTS
    # every point of the history is a peak or a valley, so the turning points are the history
    tp, _, _ = C.turning_points(ASTM_HISTORY, np.arange(9.0), hysteresis=0.0)
    assert tp.tolist() == ASTM_HISTORY


def test_range_mean_matrix_of_the_astm_example():
    rng, mean, count = C.rainflow_cycles(ASTM_HISTORY)
    m = C.range_mean_matrix(rng, mean, count, [0.0, 5.0, 10.0], [-1.0, 0.0, 1.0, 2.0])
    # hand-computed from the standard's cycles (range, mean, count): (3, -0.5, .5),
    # (4, -1, .5), (4, 1, 1), (8, 1, .5), (9, .5, .5), (8, 0, .5), (6, 1, .5)
    np.testing.assert_allclose(m, [[1.0, 0.0, 1.0], [0.0, 1.0, 1.0]])
    assert m.sum() == pytest.approx(count.sum()) == 4.0


def test_cycles_per_hour_hand_computed():
    rng, _, count = C.rainflow_cycles(ASTM_HISTORY)
    per_h = C.cycles_per_hour(rng, count, operating_hours=2.0, levels_bar=[4.0, 8.0, 10.0])
    # ranges >= 4: 1.5 + 0.5 + 1.0 + 0.5 = 3.5 cycles; >= 8: 1.5; >= 10: none; over 2 h
    np.testing.assert_allclose(per_h, [1.75, 0.75, 0.0])


def test_hysteresis_gate_hand_computed():
    x = [0.0, 3.0, 1.0, 10.0, 8.0, 9.0, 0.0]
    t = np.arange(7.0)
    # gate 2.5: 3 -> 1 (2 bar) and 10 -> 8 -> 9 (2 and 1 bar) are inside the gate
    v, tt, _ = C.turning_points(x, t, hysteresis=2.5)
    assert v.tolist() == [0.0, 10.0, 0.0] and tt.tolist() == [0.0, 3.0, 6.0]
    v, _, _ = C.turning_points(x, t, hysteresis=0.0)
    assert v.tolist() == x
    # a signal that never leaves the gate keeps only its first sample
    v, _, _ = C.turning_points([5.0, 6.0, 4.5], [0.0, 1.0, 2.0], hysteresis=2.0)
    assert v.tolist() == [5.0]


def test_gate_removes_only_small_cycles():
    # a square wave 300 / 100 bar (200 samples per level, 10 periods) with +-1 bar of
    # alternating noise: with a 5-bar gate only the big swings stay
    k = np.arange(4000)
    p = np.where((k // 200) % 2 == 0, 300.0, 100.0) + np.where(k % 2, 1.0, -1.0)
    tp, _, _ = C.turning_points(p, k / 100.0, hysteresis=5.0)
    # hand-computed: the first sample (299), then valleys at 99 and peaks at 301 in turn,
    # ending on the tenth valley: 1 + 19 points
    assert tp.tolist() == [299.0] + [99.0, 301.0] * 9 + [99.0]
    rng, _, count = C.rainflow_cycles(tp)
    # each of the 19 ranges (200 bar once, then 202) is counted as a half cycle (ASTM
    # E1049-85 5.4.4: three points holding the start give a half cycle): 9.5 cycles
    assert rng.min() == 200.0 and count.sum() == 9.5
    # without the gate every sample is a reversal except the two inside each of the nine
    # rising jumps (99 -> 101 -> 299 -> 301 rises throughout): 4000 - 18 points
    assert C.turning_points(p, k / 100.0, hysteresis=0.0)[0].size == 4000 - 18


@settings(max_examples=60, deadline=None)
@given(
    st.lists(st.integers(-5, 5), min_size=1, max_size=80),
    st.lists(st.integers(1, 12), min_size=1, max_size=10),
    st.sampled_from([0.0, 0.5, 2.0]),
)
def test_chunks_give_the_same_points_and_gate_zero_is_the_library(values, sizes, gate):
    x = np.array(values, dtype=float)
    t = np.arange(x.size, dtype=float)
    whole, whole_t, _ = C.turning_points(x, t, hysteresis=gate)
    got, got_t, carry, start, i = [], [], None, 0, 0
    while start < x.size:
        stop = min(x.size, start + sizes[i % len(sizes)])
        v, tt, carry = C.turning_points(
            x[start:stop], t[start:stop], hysteresis=gate, carry=carry, final=stop == x.size
        )
        got += v.tolist()
        got_t += tt.tolist()
        start, i = stop, i + 1
    assert got == whole.tolist() and got_t == whole_t.tolist()
    # against the library, except where it is degenerate: of two points it yields only the
    # first, and of a constant series the value twice (a zero-range half cycle)
    if gate == 0.0 and x.size >= 3 and np.ptp(x) > 0:
        assert whole.tolist() == [v for _, v in rainflow.reversals(x.tolist())]
    if np.ptp(x) == 0:
        assert whole.tolist() == [x[0]]


def test_summary_default_edges_cover_every_cycle():
    tp = np.array([20.0, 300.0, 50.0, 450.0, 0.0, 200.0])
    s = C.summarise_cycles(tp, operating_hours=0.5)
    assert s.counts.sum() == pytest.approx(s.total_cycles)
    assert s.range_edges_bar[-1] > 450.0 and s.mean_edges_bar[0] == 0.0
    # cycles of 200 bar or more per hour, against the library's own count
    ref = sum(c for r, _, c, _, _ in rainflow.extract_cycles(tp.tolist()) if r >= 200.0)
    assert s.per_hour[2] == pytest.approx(ref / 0.5)


def test_empty_two_points_and_errors():
    rng, mean, count = C.rainflow_cycles([5.0])
    assert rng.size == mean.size == count.size == 0
    # two turning points are one half cycle (ASTM E1049-85 5.4.4: the residue)
    rng, mean, count = C.rainflow_cycles([100.0, 300.0])
    assert (rng.tolist(), mean.tolist(), count.tolist()) == ([200.0], [200.0], [0.5])
    with pytest.raises(ValueError, match="hysteresis must be >= 0"):
        C.turning_points([1.0], [0.0], hysteresis=-1.0)
    with pytest.raises(ValueError, match="turning_points_bar must be a 1-D array of finite"):
        C.rainflow_cycles([1.0, np.nan])
    with pytest.raises(ValueError, match="operating_hours must be > 0 h"):
        C.cycles_per_hour([1.0], [1.0], operating_hours=0.0)
    with pytest.raises(ValueError, match="range_edges_bar must be at least two strictly"):
        C.range_mean_matrix([1.0], [1.0], [1.0], [5.0, 1.0], [0.0, 1.0])
