"""The dashboard's figure builders: pure DataFrame -> plotly Figure functions.

Each test builds small hand-made frames, so the expected traces, axis titles and
limit-line values are known without running any model.
"""

from __future__ import annotations

from datetime import date

import numpy as np
import pandas as pd
import plotly.graph_objects as go
import pytest
from scipy import stats

from dashboards import charts

AS_OF = date(2026, 3, 2)
ACT, DUE, PLAN, HEALTHY, NONE = charts.STATUS_ORDER


def trace(fig: go.Figure, name: str):
    found = [t for t in fig.data if t.name == name or (t.name or "").startswith(name)]
    assert found, f"no trace {name!r} in {[t.name for t in fig.data]}"
    return found[0]


def fleet_frame() -> pd.DataFrame:
    return pd.DataFrame(
        {
            "unit": ["A-1", "A-2", "B-1", "B-2", "C-1"],
            "position": ["left", "left", "drive", "drive", "left"],
            "remaining_h": [0.0, 40.0, 300.0, 2500.0, np.nan],
            "due_date": [None, date(2026, 3, 5), date(2026, 3, 20), date(2027, 1, 1), None],
            "status": list(charts.STATUS_ORDER),
        }
    )


def test_week_buckets_put_due_now_first_and_drop_far_and_undated():
    f = fleet_frame()
    # 2026-03-05 is 3 days after the as-of date (week 0); 2026-03-20 is 18 days (week 2)
    assert charts.week_buckets(f["due_date"], f["remaining_h"], AS_OF, 12) == [-1, 0, 2, None, None]


def test_due_weeks_figure_counts_each_component_once_in_its_week():
    fig = charts.due_weeks_figure(fleet_frame(), AS_OF, weeks=4)
    assert [t.name for t in fig.data] == [ACT, DUE, PLAN]  # most urgent first
    assert list(trace(fig, ACT).y) == [1, 0, 0, 0, 0]
    assert list(trace(fig, DUE).y) == [0, 1, 0, 0, 0]
    assert list(trace(fig, PLAN).y) == [0, 0, 0, 1, 0]
    assert trace(fig, PLAN).x[3] == "16 Mar 2026"  # week 2 starts 14 days after 2 Mar
    assert trace(fig, PLAN).x[0] == charts.ALREADY_DUE
    # status is never colour alone: each band has its own fill pattern and its name on the bar
    shapes = [t.marker.pattern.shape for t in fig.data]
    assert len(set(shapes)) == len(shapes)
    assert trace(fig, PLAN).text[3] == "1" and PLAN in trace(fig, PLAN).hovertemplate
    assert "count" in fig.layout.yaxis.title.text
    assert "date" in fig.layout.xaxis.title.text
    assert "B-1 drive" in trace(fig, PLAN).customdata[3]


def test_due_weeks_figure_says_so_when_nothing_is_due():
    f = fleet_frame().iloc[[3, 4]]
    fig = charts.due_weeks_figure(f, AS_OF, weeks=4)
    assert [t.name for t in fig.data] == ["(none)"]  # keeps the week axis
    assert list(fig.data[0].y) == [0] * 5
    assert "Nothing falls due" in fig.layout.annotations[0].text


def test_week_labels_carry_the_year_across_the_new_year():
    labels = charts.week_labels(date(2026, 12, 23), 3)  # a Wednesday
    assert labels == [charts.ALREADY_DUE, "21 Dec 2026", "28 Dec 2026", "04 Jan 2027"]


def test_relief_figure_without_a_cutoff_has_no_cutoff_bars():
    monthly = pd.DataFrame({"month": [date(2026, 1, 1)], "relief_hours": [1.0],
                            "cutoff_hours": [0.0], "relief_heat_kwh": [3.0]})  # fmt: skip
    names = [t.name for t in charts.relief_figure(monthly, has_cutoff=False).data]
    assert names == ["hours at relief", "heat dumped at relief"]
    colours = {t.marker.color for t in charts.relief_figure(monthly).data}
    assert not colours & set(charts.STATUS_COLOURS.values())  # not read as a status


def test_status_colours_differ_and_unknown_bands_get_grey():
    colours = {charts.status_colour(s) for s in charts.STATUS_ORDER}
    assert len(colours) == len(charts.STATUS_ORDER)
    assert charts.status_colour("something else") == "#9DA5AE"
    assert charts.status_key(None) == "no estimate"
    assert charts.status_key(" Due Soon") == "due soon"


def test_status_count_frame_orders_by_urgency():
    f = pd.concat([fleet_frame(), fleet_frame().iloc[[2]]])
    counts = charts.status_count_frame(f)
    assert list(counts["status"]) == list(charts.STATUS_ORDER)
    assert list(counts["count"]) == [1, 1, 2, 1, 1]


def test_spectrum_figure_marks_relief_and_cutoff_at_their_settings():
    spec = pd.DataFrame(
        {"pressure_low_bar": [0, 100, 300], "pressure_high_bar": [100, 300, 450],
         "hours": [2.0, 5.0, 1.0]}
    )  # fmt: skip
    fig = charts.spectrum_figure(spec, relief_bar=430.0, cutoff_bar=400.0)
    bars = trace(fig, "time at pressure")
    assert list(bars.x) == [50, 200, 375]  # band midpoints [bar]
    assert list(bars.width) == [100, 200, 150]
    assert list(trace(fig, "relief setting").x) == [430.0, 430.0]
    assert list(trace(fig, "pressure cut-off").x) == [400.0, 400.0]
    assert fig.layout.xaxis.title.text == "Pressure, high side [bar]"
    assert fig.layout.yaxis.title.text == "Time at pressure [h]"


def test_spectrum_figure_without_cutoff_has_no_cutoff_line():
    spec = pd.DataFrame({"pressure_low_bar": [0], "pressure_high_bar": [50], "hours": [1.0]})
    fig = charts.spectrum_figure(spec, relief_bar=420.0, cutoff_bar=None)
    assert not [t for t in fig.data if "cut-off" in (t.name or "")]


def test_life_figure_shows_logged_projection_and_end_of_life():
    life = pd.DataFrame({"hour_meter": [100.0, 200.0, 300.0], "consumed_fraction": [0.1, 0.2, 0.3]})
    proj = pd.DataFrame({"hour_meter": [300.0, 1000.0], "consumed_fraction": [0.3, 1.0]})
    fig = charts.life_figure(life, proj)
    assert list(trace(fig, "consumed").y) == [0.1, 0.2, 0.3]
    assert list(trace(fig, "projection").x) == [300.0, 1000.0]
    end = trace(fig, "end of rated life")
    assert list(end.y) == [1.0, 1.0] and list(end.x) == [100.0, 1000.0]
    assert fig.layout.xaxis.title.text == "Hour meter [h]"
    assert "[" in fig.layout.yaxis.title.text


def test_trend_frame_matches_scipy_theilslopes_band():
    x = np.array([100.0, 400.0, 700.0, 1000.0, 1300.0])
    y = np.array([1.2, 1.31, 1.38, 1.52, 1.60])
    res = stats.theilslopes(y, x)
    line = charts.trend_frame(
        res.slope, res.intercept, res.low_slope, res.high_slope,
        float(np.median(x)), float(np.median(y)), 100.0, 1300.0,
    )  # fmt: skip
    assert line["fitted_lpm"].iloc[0] == pytest.approx(res.intercept + res.slope * 100.0)
    # the band edges at x = 0 are scipy's documented intercept bounds
    # (median(y) - slope_bound * median(x)), scipy.stats.theilslopes docs
    at_zero = charts.trend_frame(res.slope, res.intercept, res.low_slope, res.high_slope,
                                 700.0, 1.38, 0.0, 1.0)  # fmt: skip
    edges = (1.38 - res.low_slope * 700, 1.38 - res.high_slope * 700)
    assert at_zero["low_lpm"].iloc[0] == pytest.approx(min(edges))
    assert (line["low_lpm"] <= line["high_lpm"]).all()


def test_case_drain_figure_draws_limit_trend_band_and_crossing():
    readings = pd.DataFrame(
        {"hour_meter": [50.0, 100.0, 400.0, 700.0], "normalised_lpm": [2.4, 1.2, 1.35, 1.5],
         "used": [False, True, True, True]}
    )  # fmt: skip
    line = charts.trend_frame(0.0005, 1.15, 0.0004, 0.0006, 400.0, 1.35, 100.0, 2700.0)
    fig = charts.case_drain_figure(readings, limit_lpm=2.8, line=line, crossing_h=3300.0)
    limit = trace(fig, "rebuild limit")
    assert list(limit.y) == [2.8, 2.8]
    assert list(trace(fig, "reading (this life)").x) == [100.0, 400.0, 700.0]
    assert list(trace(fig, "reading (before rebuild)").x) == [50.0]
    assert trace(fig, "Theil–Sen trend").y[0] == pytest.approx(1.15 + 0.0005 * 100.0)
    assert trace(fig, "95 % slope interval").fill == "toself"
    assert list(trace(fig, "projected crossing").x) == [3300.0]
    assert fig.layout.yaxis.title.text.endswith("[L/min]")


def test_case_drain_figure_marks_off_reference_readings_and_drops_an_empty_band():
    # a reading far from the test conditions is drawn on its own, not as a trended one;
    # a trend with no slope interval (too few readings) gets no band
    readings = pd.DataFrame(
        {"hour_meter": [100.0, 400.0, 500.0, 700.0], "normalised_lpm": [1.2, 1.35, 9.0, 1.5],
         "used": [True, True, True, True], "off_reference": [False, False, True, False]}
    )  # fmt: skip
    nan = float("nan")
    line = charts.trend_frame(0.0005, 1.15, nan, nan, 400.0, 1.35, 100.0, 2700.0)
    fig = charts.case_drain_figure(readings, limit_lpm=2.8, line=line)
    assert list(trace(fig, "reading (this life)").x) == [100.0, 400.0, 700.0]
    assert list(trace(fig, "reading off test conditions (not trended)").x) == [500.0]
    assert "95 % slope interval" not in [t.name for t in fig.data]


def test_case_drain_figure_without_trend_or_limit():
    readings = pd.DataFrame({"hour_meter": [1.0], "normalised_lpm": [1.0], "used": [True]})
    fig = charts.case_drain_figure(readings, limit_lpm=None)
    assert [t.name for t in fig.data] == ["reading (this life)"]


def test_relief_figure_has_hours_and_heat_with_units():
    monthly = pd.DataFrame(
        {"month": [date(2026, 1, 1), date(2026, 2, 1)], "relief_hours": [1.5, 0.0],
         "cutoff_hours": [0.0, 3.0], "relief_heat_kwh": [42.0, 0.0]}
    )  # fmt: skip
    fig = charts.relief_figure(monthly)
    assert list(trace(fig, "hours at relief").y) == [1.5, 0.0]
    assert list(trace(fig, "heat dumped").y) == [42.0, 0.0]
    assert fig.layout.yaxis.title.text == "Time [h]"
    assert fig.layout.yaxis2.title.text == "Heat [kWh]"


def test_oil_figure_plots_three_scale_numbers_with_gaps():
    samples = pd.DataFrame(
        {"taken_at": pd.to_datetime(["2026-01-05", "2026-02-05"], utc=True),
         "iso4406": ["19/17/12", "-/15/12"], "r4": [19, None], "r6": [17, 15], "r14": [12, 12]}
    )  # fmt: skip
    fig = charts.oil_figure(samples)
    assert len(fig.data) == 3
    assert np.isnan(trace(fig, "≥ 4").y[1])
    assert list(trace(fig, "≥ 14").y) == [12, 12]
    assert "ISO 4406" in fig.layout.yaxis.title.text


def test_plan_timeline_figure_counts_cells_and_marks_late():
    a = pd.DataFrame(
        {"week_start": [date(2026, 3, 2), date(2026, 3, 2), date(2026, 3, 9)],
         "site": ["North", "North", "South"], "unit": ["A-1", "A-2", "B-1"],
         "position": ["left", "left", "drive"], "late_days": [0, 0, 4]}
    )  # fmt: skip
    fig = charts.plan_timeline_figure(a, date(2026, 3, 2), 4)
    on_time, late = trace(fig, "on time"), trace(fig, "late")
    assert list(on_time.text) == [2] and list(on_time.y) == ["North"]
    assert list(late.text) == [1] and list(late.y) == ["South"]
    assert late.marker.symbol == "diamond"
    assert "[date]" in fig.layout.xaxis.title.text
    # the axis spans the 4-week horizon even when only two weeks hold rebuilds
    assert pd.Timestamp(fig.layout.xaxis.range[1]) == pd.Timestamp("2026-03-30")


def test_capacity_figure_flags_full_weeks():
    cap = pd.DataFrame(
        {"week_start": [date(2026, 3, 2), date(2026, 3, 9), date(2026, 3, 16)],
         "site": ["(all sites)"] * 3, "used": [2, 1, 0],
         "capacity": pd.array([2, 2, 2], dtype="Int64")}
    )  # fmt: skip
    fig = charts.capacity_figure(cap, "(all sites)")
    used = trace(fig, "slots used")
    assert list(used.text) == ["2 (full)", "1", ""]
    assert list(trace(fig, "capacity").y) == [2.0, 2.0, 2.0]
    assert fig.layout.yaxis.title.text == "Rebuilds per week [count]"
