"""The demo's hired-in loader (demo_fleet/traces.py): both traces ingest cleanly and tell
the story in demo_fleet/README.md."""

from __future__ import annotations

import pytest

from monitor import usecases


@pytest.fixture(scope="module")
def small_demo(full_demo):
    """The shared demo fleet (tests/conftest.py); its traces do not depend on its size."""
    return full_demo


def test_demo_traces_tell_the_relief_stall_and_the_cutoff_hold(small_demo):
    traces = {r.name: r for r in small_demo.results if r.kind == "trace"}
    assert sorted(traces) == ["TH-27_left_relief_stall.csv", "TH-27_right_cutoff_hold.csv"]
    assert all(r.status == usecases.ACCEPTED for r in traces.values())
    left = traces["TH-27_left_relief_stall.csv"].trace
    right = traces["TH-27_right_cutoff_hold.csv"].trace
    # ten 6-s stalls in 240 s: about 60 s at the relief (left) or the cut-off (right)
    assert left["stalls"]["stalled_at_relief_s"] == pytest.approx(60.0, abs=3.0)
    assert right["stalls"]["held_at_cutoff_s"] == pytest.approx(60.0, abs=3.0)
    assert right["stalls"]["at_relief_s"] == 0.0 and right["relief_excursions"] == 0
    assert left["cutoff_excursions"] is None  # DS-P46 has no cut-off
    assert left["relief_excursions"] == right["cutoff_excursions"] == 10
    (note,) = left["notes"]
    assert "exceeded the relief setting of 420 bar by more than 10%" in note
    assert right["notes"] == []
    report = usecases.unit_report(usecases.init_db(small_demo.db_url), "TH-27")
    assert list(report.traces["position"]) == ["left", "right"]
    assert len(report.components["left"].traces) == 1
