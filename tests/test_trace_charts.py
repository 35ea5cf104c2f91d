"""Pure figure builders of the unit page's trace view (dashboards.trace_charts), without
Streamlit: what is plotted, where the line breaks, the axis units."""

from __future__ import annotations

import numpy as np
import pandas as pd

from dashboards import trace_charts as tc

ENVELOPE = {
    "bucket_s": 0.5,
    # buckets at 0, 0.5, 1.0, then a gap, then 5.0 and 5.5
    "start_s": [0.0, 0.5, 1.0, 5.0, 5.5],
    "minimum": {
        "pressure_a_bar": [100.0, 120.0, 150.0, 200.0, 210.0],
        "pressure_b_bar": [20.0, 20.0, 21.0, 20.0, 20.0],
        "speed_rpm": [1800.0, 1700.0, 0.0, 0.0, 0.0],
    },
    "maximum": {
        "pressure_a_bar": [110.0, 140.0, 170.0, 420.0, 215.0],
        "pressure_b_bar": [25.0, 24.0, 22.0, 21.0, 22.0],
        "speed_rpm": [1850.0, 1800.0, 40.0, 0.0, 0.0],
    },
}


def test_envelope_figure_plots_min_and_max_with_a_break_at_the_gap():
    fig = tc.trace_envelope_figure(ENVELOPE, relief_bar=420.0, cutoff_bar=400.0)
    by_name = {t.name: t for t in fig.data}
    a_max = by_name["pressure A max"]
    assert list(a_max.y) == [110.0, 140.0, 170.0, None, 420.0, 215.0]
    assert list(a_max.x) == [0.0, 0.5, 1.0, None, 5.0, 5.5]
    assert by_name["pressure A min"].fill == "tonexty"
    assert by_name["speed (max)"].yaxis == "y2"
    assert list(by_name["relief setting 420 bar"].y) == [420.0, 420.0]
    assert list(by_name["pressure cut-off 400 bar"].y) == [400.0, 400.0]
    assert fig.layout.xaxis.title.text == "Time since the first sample [s]"
    assert fig.layout.yaxis.title.text == "Pressure [bar]"
    assert fig.layout.yaxis2.title.text == "Speed [rpm]"


def test_envelope_figure_without_speed_cutoff_or_data():
    env = {k: v for k, v in ENVELOPE.items()}
    env["minimum"] = {k: v for k, v in ENVELOPE["minimum"].items() if k != "speed_rpm"}
    env["maximum"] = {k: v for k, v in ENVELOPE["maximum"].items() if k != "speed_rpm"}
    names = [t.name for t in tc.trace_envelope_figure(env, 420.0, None).data]
    assert "speed (max)" not in names and not any("cut-off" in n for n in names)
    empty = tc.trace_envelope_figure(None, 420.0, None)
    assert not empty.data and "No trace stored" in empty.layout.annotations[0].text


def test_histogram_frame_drops_empty_bands():
    frame = tc.trace_histogram_frame(
        {"pressure_edges_bar": [0.0, 25.0, 50.0, 75.0], "hours": [0.5, 0.0, 0.25]}
    )
    assert frame.to_dict("list") == {
        "pressure_low_bar": [0.0, 50.0],
        "pressure_high_bar": [25.0, 75.0],
        "hours": [0.5, 0.25],
    }
    assert tc.trace_histogram_frame(None).empty


def test_cycle_matrix_heatmap_is_trimmed_to_the_counted_cells():
    counts = np.zeros((4, 5))
    counts[1, 2] = 3.0
    counts[2, 3] = 0.5
    cycles = {
        "range_edges_bar": [0.0, 25.0, 50.0, 75.0, 100.0],
        "mean_edges_bar": [0.0, 25.0, 50.0, 75.0, 100.0, 125.0],
        "counts": counts.tolist(),
    }
    fig = tc.cycle_matrix_figure(cycles)
    heat = fig.data[0]
    assert list(heat.x) == [62.5, 87.5] and list(heat.y) == [37.5, 62.5]
    z = np.array(heat.z, dtype=float)
    assert z[0, 0] == 3.0 and z[1, 1] == 0.5 and np.isnan(z[0, 1]) and np.isnan(z[1, 0])
    assert fig.layout.xaxis.title.text == "Cycle mean pressure [bar]"
    assert fig.layout.yaxis.title.text == "Cycle range [bar]"
    assert heat.colorbar.title.text == "cycles [-]"
    assert "No pressure cycles" in tc.cycle_matrix_figure(None).layout.annotations[0].text


def test_peaks_frame_merges_both_settings_in_time_order():
    row = dict(duration_s=1.0, peak_bar=430.0, peak_s=2.5, rise_rate_bar_per_s=50.0)
    frame = tc.trace_peaks_frame(
        {
            "relief": [{**row, "start_s": 2.0, "peak_bar": 450.0}],
            "cutoff": [{**row, "start_s": 1.0}, {**row, "start_s": 3.0}],
        }
    )
    assert list(frame.columns) == tc.PEAK_COLUMNS
    assert list(frame["setting"]) == ["cutoff", "relief", "cutoff"]
    assert list(frame["start_s"]) == [1.0, 2.0, 3.0]
    assert tc.trace_peaks_frame({"relief": [], "cutoff": None}).empty
    assert isinstance(tc.trace_peaks_frame(None), pd.DataFrame)
