"""Figure builders for the dashboard: pandas DataFrame in, plotly Figure out.

Pure functions: no Streamlit, no store, no engineering. Every axis title carries its
unit in brackets. Status is always shown with text and a fill pattern as well as colour
(:data:`STATUS_PATTERNS`); every status colour (:data:`STATUS_COLOURS`) has a contrast
ratio of at least 4.5:1 against white and carries white text at 4.5:1 (WCAG 2.1 AA,
success criteria 1.4.3 and 1.4.11), and the hues differ (wine, brown, blue, slate, grey)
so they stay apart for the common colour-vision deficiencies.
"""

from __future__ import annotations

import math
from collections.abc import Iterable
from datetime import date, timedelta

import numpy as np
import pandas as pd
import plotly.graph_objects as go
from plotly.subplots import make_subplots

from monitor.domain import vocabulary as lifecycle

FONT = "Source Sans Pro, Segoe UI, Helvetica, Arial, sans-serif"
INK = "#1F2933"
GRID = "#E3E7EB"
LIMIT = "#8E1B3A"  # limit lines share the most urgent colour
SETTING = "#4A4A4A"
TREND = "#2F6690"
BAND = "rgba(47, 102, 144, 0.30)"
RELIEF = "#5E4B8B"  # relief and heat bars: hues apart from every status colour
CUTOFF = "#8C8C8C"
HEAT = "#3B6E6E"

STATUS_ORDER = (*lifecycle.STATUS_BANDS, lifecycle.NO_ESTIMATE)
"""Status band names, most urgent first (from monitor.lifecycle)."""

_PALETTE = ("#8E1B3A", "#8A4B00", "#2A5D8F", "#4B5D6B", "#636363")
STATUS_COLOURS = dict(zip(STATUS_ORDER, _PALETTE, strict=True))
"""Colour of each status band (own palette; each at least 4.5:1 against white)."""

STATUS_PATTERNS = dict(zip(STATUS_ORDER, ("x", "/", ".", "", "-"), strict=True))
"""Fill pattern of each status band's bars, so that status never rests on colour alone."""

ALREADY_DUE = "already due"
"""Label of the due-weeks chart's first bar: no hours left, or the due date has passed."""


def status_key(status: object) -> str:
    """The band name of a status value in lower case; missing values are "no estimate"."""
    if status is None or (isinstance(status, float) and math.isnan(status)):
        return lifecycle.NO_ESTIMATE
    return str(status).strip().lower()


def status_colour(status: object) -> str:
    """Colour for a band name; unknown bands are drawn in neutral grey."""
    return STATUS_COLOURS.get(status_key(status), "#9DA5AE")


def status_rank(status: object) -> int:
    """Sort position of a band name (most urgent first)."""
    key = status_key(status)
    return STATUS_ORDER.index(key) if key in STATUS_ORDER else len(STATUS_ORDER)


def _style(fig: go.Figure, title: str, x_title: str, y_title: str, height: int = 430) -> go.Figure:
    """Common look: the title at the very top, the legend between title and plot (it may
    wrap to several rows on a phone without reaching the axis titles), dark axis text."""
    fig.update_layout(
        title={"text": title, "x": 0.0, "xanchor": "left", "font": {"size": 15},
               "y": 0.995, "yref": "container", "yanchor": "top"},
        template="plotly_white",
        font={"family": FONT, "color": INK, "size": 13},
        height=height,
        margin={"l": 64, "r": 24, "t": 48, "b": 120},
        legend={"orientation": "h", "yanchor": "bottom", "y": 1.02, "xanchor": "left", "x": 0.0,
                "font": {"color": INK}},
        hoverlabel={"font": {"family": FONT}},
    )  # fmt: skip
    fig.update_layout(margin={"l": 64, "r": 24, "t": 40 + 22 * _legend_rows(fig), "b": 64})
    axis = {"gridcolor": GRID, "zeroline": False, "tickfont": {"color": INK},
            "title_font": {"color": INK}, "linecolor": "#5B6670"}  # fmt: skip
    fig.update_xaxes(title_text=x_title, **axis)
    fig.update_yaxes(title_text=y_title, **axis)
    return fig


def _legend_rows(fig: go.Figure, per_row: int = 2) -> int:
    """Rows the legend may need at phone width (about two entries a row) [-]."""
    shown = sum(1 for t in fig.data if t.showlegend is not False and t.name)
    return max(1, -(-shown // per_row))


def _empty(fig: go.Figure, message: str) -> go.Figure:
    fig.add_annotation(
        text=message, showarrow=False, xref="paper", yref="paper", x=0.5, y=0.5,
        font={"size": 14, "color": "#6B7480"},
    )  # fmt: skip
    return fig


def _hline(x0: float, x1: float, y: float, name: str, colour: str, dash: str) -> go.Scatter:
    return go.Scatter(
        x=[x0, x1], y=[y, y], mode="lines", name=name,
        line={"color": colour, "dash": dash, "width": 2}, hoverinfo="name",
    )  # fmt: skip


def _vline(x: float, y1: float, name: str, colour: str, dash: str) -> go.Scatter:
    return go.Scatter(
        x=[x, x], y=[0, y1], mode="lines", name=name,
        line={"color": colour, "dash": dash, "width": 2}, hoverinfo="name",
    )  # fmt: skip


# --- fleet ---------------------------------------------------------------------------


def week_buckets(due: Iterable[object], remaining_h: Iterable[float], as_of: date, weeks: int
                 ) -> list[int | None]:  # fmt: skip
    """Calendar week (Monday to Sunday) of each due date counted from the week of ``as_of``
    (-1: already due: no hours left or the due date has passed).

    ``None`` for components with no due date or one after ``weeks`` weeks.
    """
    monday = as_of - timedelta(days=as_of.weekday())
    out: list[int | None] = []
    for d, rem in zip(due, remaining_h, strict=True):
        if rem is not None and not pd.isna(rem) and float(rem) <= 0:
            out.append(-1)
        elif d is None or pd.isna(d):
            out.append(None)
        else:
            day = pd.Timestamp(d).date()
            k = (day - monday).days // 7
            out.append(-1 if day < as_of else (k if k < weeks else None))
    return out


def week_labels(as_of: date, weeks: int) -> list[str]:
    """The due-weeks chart's bar labels: "already due", then each week's Monday with
    its year (``"30 Nov 2026"``)."""
    monday = as_of - timedelta(days=as_of.weekday())
    days = [monday + timedelta(days=7 * k) for k in range(weeks)]
    return [ALREADY_DUE] + [f"{d:%d %b %Y}" for d in days]


DUE_WEEKS_COLUMNS = ("unit", "position", "due_date", "remaining_h", "status")
"""The only columns of the fleet frame that :func:`due_weeks_figure` reads."""


def due_weeks_figure(fleet: pd.DataFrame, as_of: date, weeks: int = 12) -> go.Figure:
    """Components falling due per week over the next ``weeks`` weeks, stacked by status.

    ``fleet`` needs the columns :data:`DUE_WEEKS_COLUMNS` (and reads no other). The
    first bar collects everything already due (no hours left or due date passed); each
    status has its own colour, fill pattern and name in the hover text and legend.
    """
    labels = week_labels(as_of, weeks)
    fig = go.Figure()
    buckets = week_buckets(fleet["due_date"], fleet["remaining_h"], as_of, weeks)
    frame = fleet.assign(bucket=buckets).dropna(subset=["bucket"])
    if frame.empty:
        _empty(fig, f"Nothing falls due in the {weeks} weeks from {as_of.isoformat()}")
        fig.add_bar(x=labels, y=[0] * len(labels), showlegend=False, hoverinfo="skip",
                    name="(none)")  # fmt: skip
        fig.update_yaxes(range=[0, 1])
    bands = sorted(frame["status"].map(status_key).unique(), key=status_rank)
    for band in bands:
        part = frame[frame["status"].map(status_key) == band]
        counts = part.groupby("bucket").size().reindex(range(-1, weeks), fill_value=0)
        names = part.groupby("bucket").apply(_unit_list, include_groups=False)
        names = names.reindex(range(-1, weeks), fill_value="")
        fig.add_bar(
            x=labels, y=counts.to_numpy(), name=band, customdata=names.to_numpy(),
            marker={"color": status_colour(band), "pattern": {
                "shape": STATUS_PATTERNS.get(band, ""), "fgcolor": "#FFFFFF", "size": 7,
                "solidity": 0.25}},
            text=[str(c) if c else "" for c in counts], textposition="inside", textangle=0,
            insidetextanchor="middle", textfont={"color": "#FFFFFF"},
            hovertemplate="%{x}: %{y} " + band + "<br>%{customdata}<extra></extra>",
        )  # fmt: skip
    fig.update_layout(barmode="stack", bargap=0.25, legend_traceorder="normal")
    fig.update_xaxes(categoryorder="array", categoryarray=labels)
    return _style(
        fig,
        f"What falls due in the next {weeks} weeks (whole fleet)",
        "Week starting Monday [date] (first bar: already due)",
        "Components falling due (count)",
    )


def _unit_list(part: pd.DataFrame, limit: int = 8) -> str:
    names = [f"{u} {p}" for u, p in zip(part["unit"], part["position"], strict=True)]
    more = f"<br>… and {len(names) - limit} more" if len(names) > limit else ""
    return "<br>".join(names[:limit]) + more


def status_count_frame(fleet: pd.DataFrame) -> pd.DataFrame:
    """Components per status band, most urgent band first (columns status, count)."""
    counts = fleet["status"].map(status_key).value_counts()
    frame = pd.DataFrame({"status": counts.index, "count": counts.to_numpy()})
    order = frame["status"].map(status_rank)
    return (
        frame.assign(_o=order)
        .sort_values(["_o", "status"])
        .drop(columns="_o")
        .reset_index(drop=True)
    )


# --- unit detail ------------------------------------------------------------------------


_BAND_HOVER = "%{customdata[0]:.0f}–%{customdata[1]:.0f} bar: %{y:.1f} h<extra></extra>"


def spectrum_figure(
    spectrum: pd.DataFrame, relief_bar: float | None, cutoff_bar: float | None
) -> go.Figure:
    """Time at pressure per band [h] against pressure [bar], relief and cut-off marked.

    ``spectrum`` has the columns pressure_low_bar, pressure_high_bar, hours.
    """
    fig = go.Figure()
    lo, hi = (
        spectrum["pressure_low_bar"].to_numpy(float),
        spectrum["pressure_high_bar"].to_numpy(float),
    )
    hours = spectrum["hours"].to_numpy(float)
    if len(hours):
        fig.add_bar(
            x=(lo + hi) / 2, y=hours, width=hi - lo, name="time at pressure",
            marker={"color": "#7D98B3", "line": {"color": "#FFFFFF", "width": 1}},
            customdata=np.column_stack([lo, hi]),
            hovertemplate=_BAND_HOVER,
        )  # fmt: skip
    else:
        _empty(fig, "No logged spectrum in the rate window")
    top = float(hours.max()) * 1.1 if len(hours) and hours.max() > 0 else 1.0
    if relief_bar is not None and not pd.isna(relief_bar):
        fig.add_trace(
            _vline(relief_bar, top, f"relief setting {relief_bar:.0f} bar", LIMIT, "dash")
        )
    if cutoff_bar is not None and not pd.isna(cutoff_bar):
        fig.add_trace(
            _vline(cutoff_bar, top, f"pressure cut-off {cutoff_bar:.0f} bar", SETTING, "dot")
        )
    fig.update_layout(bargap=0)
    return _style(fig, "Recent load spectrum", "Pressure, high side [bar]", "Time at pressure [h]")


def life_figure(life: pd.DataFrame, projection: pd.DataFrame | None) -> go.Figure:
    """Consumed bearing life [-] against hour meter [h] since the last rebuild.

    ``life``: hour_meter, consumed_fraction per upload; ``projection``: the same
    columns, two rows from now to the end of life at the current rate (or None).
    """
    fig = go.Figure()
    if life.empty:
        _empty(fig, "No uploads since the last rebuild")
    fig.add_scatter(
        x=life["hour_meter"], y=life["consumed_fraction"], mode="lines+markers",
        name="consumed (logged)", line={"color": TREND, "width": 2}, marker={"size": 4},
        hovertemplate="%{x:,.0f} h: %{y:.1%} consumed<extra></extra>",
    )  # fmt: skip
    xs = list(life["hour_meter"])
    if projection is not None and not projection.empty:
        fig.add_scatter(
            x=projection["hour_meter"], y=projection["consumed_fraction"], mode="lines",
            name="projection at current rate", line={"color": TREND, "dash": "dash", "width": 2},
            hovertemplate="%{x:,.0f} h: %{y:.1%} (projected)<extra></extra>",
        )  # fmt: skip
        xs += list(projection["hour_meter"])
    if xs:
        fig.add_trace(_hline(min(xs), max(xs), 1.0, "end of rated life (100 %)", LIMIT, "dash"))
    fig.update_yaxes(tickformat=".0%")
    return _style(
        fig,
        "Bearing life consumed since the last rebuild",
        "Hour meter [h]",
        "Consumed life [% of rated L10]",
    )


def trend_frame(
    slope: float, intercept: float, low_slope: float, high_slope: float,
    x_median: float, y_median: float, x_from: float, x_to: float,
) -> pd.DataFrame:  # fmt: skip
    """Points of a Theil–Sen line and its slope-interval band between two hour meters.

    The band lines pivot on the median point, as scipy.stats.theilslopes computes the
    intercepts of its slope bounds. Columns hour_meter, fitted_lpm, low_lpm, high_lpm.
    """
    x = np.linspace(x_from, x_to, 25)
    a = y_median + low_slope * (x - x_median)
    b = y_median + high_slope * (x - x_median)
    return pd.DataFrame(
        {
            "hour_meter": x,
            "fitted_lpm": intercept + slope * x,
            "low_lpm": np.minimum(a, b),
            "high_lpm": np.maximum(a, b),
        }
    )


def _reading_traces(fig: go.Figure, readings: pd.DataFrame) -> None:
    used = readings["used"].astype(bool) if "used" in readings else pd.Series(True, readings.index)
    off = (
        readings["off_reference"].astype(bool)
        if "off_reference" in readings
        else pd.Series(False, readings.index)
    )
    for mask, name, style in (
        (used & ~off, "reading (this life)", {"color": TREND, "size": 8}),
        (used & off, "reading off test conditions (not trended)",
         {"color": "#D98A1C", "symbol": "diamond-open", "size": 9}),
        (~used, "reading (before rebuild)", {"color": "#B8C2CC", "symbol": "circle-open"}),
    ):  # fmt: skip
        part = readings[mask]
        if len(part):
            fig.add_scatter(
                x=part["hour_meter"], y=part["normalised_lpm"], mode="markers", name=name,
                marker=style, hovertemplate="%{x:,.0f} h: %{y:.2f} L/min<extra></extra>",
            )  # fmt: skip


def _trend_traces(fig: go.Figure, line: pd.DataFrame) -> None:
    if line["low_lpm"].notna().any():  # no band when the readings are too few for one
        fig.add_scatter(
            x=list(line["hour_meter"]) + list(line["hour_meter"][::-1]),
            y=list(line["high_lpm"]) + list(line["low_lpm"][::-1]),
            fill="toself", fillcolor=BAND, line={"width": 1, "color": TREND, "dash": "dot"},
            hoverinfo="skip", name="95 % slope interval",
        )  # fmt: skip
    fig.add_scatter(
        x=line["hour_meter"], y=line["fitted_lpm"], mode="lines", name="Theil–Sen trend",
        line={"color": TREND, "width": 2},
    )  # fmt: skip


def case_drain_figure(
    readings: pd.DataFrame,
    limit_lpm: float | None,
    line: pd.DataFrame | None = None,
    crossing_h: float | None = None,
) -> go.Figure:
    """Normalised case-drain flow [L/min] against hour meter [h] with trend and limit.

    ``readings``: hour_meter, normalised_lpm, used (False: before the last rebuild),
    optionally off_reference (True: taken far from the test conditions, not trended);
    ``line``: a :func:`trend_frame`; ``crossing_h``: projected hour meter at the limit.
    """
    fig = go.Figure()
    if readings.empty:
        _empty(fig, "No case-drain readings")
    _reading_traces(fig, readings)
    xs = list(readings["hour_meter"])
    if line is not None and not line.empty:
        _trend_traces(fig, line)
        xs += list(line["hour_meter"])
    if limit_lpm is not None and not pd.isna(limit_lpm) and xs:
        fig.add_trace(
            _hline(
                min(xs), max(xs), limit_lpm, f"rebuild limit {limit_lpm:.2f} L/min", LIMIT, "dash"
            )
        )
        if crossing_h is not None and not pd.isna(crossing_h):
            fig.add_scatter(
                x=[crossing_h], y=[limit_lpm], mode="markers", name="projected crossing",
                marker={"symbol": "x", "size": 12, "color": LIMIT},
                hovertemplate="limit reached at %{x:,.0f} h (projected)<extra></extra>",
            )  # fmt: skip
    return _style(
        fig,
        "Case-drain flow (normalised)",
        "Hour meter [h]",
        "Case-drain flow at reference [L/min]",
    )


def relief_figure(monthly: pd.DataFrame, has_cutoff: bool = True) -> go.Figure:
    """Hours at relief (and at cut-off, where the model has one) [h] and relief heat
    [kWh] per month.

    ``monthly``: month (first day), relief_hours, cutoff_hours, relief_heat_kwh.
    """
    fig = make_subplots(rows=2, cols=1, shared_xaxes=True, vertical_spacing=0.12)
    if monthly.empty:
        _empty(fig, "No logged hours at relief or cut-off")
    months = pd.to_datetime(monthly["month"])
    fig.add_bar(x=months, y=monthly["relief_hours"], name="hours at relief",
                marker_color=RELIEF, row=1, col=1)  # fmt: skip
    if has_cutoff:
        fig.add_bar(x=months, y=monthly["cutoff_hours"], name="hours at cut-off",
                    marker_color=CUTOFF, marker_pattern_shape="/", row=1, col=1)  # fmt: skip
    fig.add_bar(x=months, y=monthly["relief_heat_kwh"], name="heat dumped at relief",
                marker_color=HEAT, row=2, col=1)  # fmt: skip
    _style(fig, "Hours and heat at relief per month", "", "", height=420)
    fig.update_xaxes(title_text="Month [calendar month]", row=2, col=1)
    fig.update_yaxes(title_text="Time [h]", row=1, col=1)
    fig.update_yaxes(title_text="Heat [kWh]", row=2, col=1)
    fig.update_layout(barmode="group")
    return fig


def oil_figure(samples: pd.DataFrame) -> go.Figure:
    """ISO 4406 scale numbers [-] of each oil sample over time (>= 4, 6, 14 µm(c))."""
    fig = go.Figure()
    if samples.empty:
        _empty(fig, "No oil samples")
    taken = pd.to_datetime(samples["taken_at"], utc=True)
    for col, name, colour, symbol in (
        ("r4", "≥ 4 µm(c)", "#A9B8C4", "circle"),
        ("r6", "≥ 6 µm(c)", "#5B8DB8", "square"),
        ("r14", "≥ 14 µm(c)", "#2B3440", "diamond"),
    ):
        fig.add_scatter(
            x=taken, y=pd.to_numeric(samples[col], errors="coerce"), mode="lines+markers",
            name=name, line={"color": colour}, marker={"symbol": symbol, "size": 8},
            customdata=samples["iso4406"], connectgaps=False,
            hovertemplate="%{x|%Y-%m-%d}: code %{customdata}<extra></extra>",
        )  # fmt: skip
    return _style(fig, "Oil cleanliness (ISO 4406)", "Sample date", "ISO 4406 scale number [-]")


# --- plan -------------------------------------------------------------------------------


def plan_timeline_figure(
    assignments: pd.DataFrame, as_of: date | None = None, horizon_weeks: int | None = None
) -> go.Figure:
    """Planned rebuilds per week and site: number in each cell, late ones marked.

    ``assignments``: week_start, site, unit, position, late_days (planning output);
    ``as_of`` and ``horizon_weeks`` fix the date axis to the planning horizon.
    """
    fig = go.Figure()
    if assignments.empty:
        _empty(fig, "No rebuilds planned in the horizon")
    frame = assignments.assign(
        week_start=pd.to_datetime(assignments["week_start"]),
        late=assignments["late_days"].astype(float) > 0,
        label=assignments["unit"].astype(str) + " " + assignments["position"].astype(str),
    )
    for late, name, colour, symbol in (
        (False, "on time", "#5B8DB8", "circle"),
        (True, "late (after due date)", LIMIT, "diamond"),
    ):
        part = frame[frame["late"] == late]
        cells = part.groupby(["week_start", "site"]).agg(
            n=("label", "size"), names=("label", lambda s: "<br>".join(s))
        )
        cells = cells.reset_index()
        if cells.empty:
            continue
        offset = pd.Timedelta(hours=30) if late else pd.Timedelta(0)
        fig.add_scatter(
            x=cells["week_start"] + offset, y=cells["site"], mode="markers+text", name=name,
            text=cells["n"], textposition="middle center",
            textfont={"color": "#FFFFFF", "size": 12},
            marker={"size": 14 + 5 * np.sqrt(cells["n"]), "color": colour, "symbol": symbol},
            customdata=cells["names"],
            hovertemplate="week of %{x|%d %b}, %{y}: %{text} " + name
            + "<br>%{customdata}<extra></extra>",
        )  # fmt: skip
    fig.update_yaxes(type="category")
    if as_of is not None and horizon_weeks is not None:
        _week_axis(fig, as_of, horizon_weeks)
    return _style(fig, "Rebuild plan by week and site", "Week starting [date]", "Site", height=360)


def _week_axis(fig: go.Figure, as_of: date, horizon_weeks: int) -> None:
    """Date axis over the planning horizon, one tick per week start (Monday)."""
    start = pd.Timestamp(as_of - timedelta(days=as_of.weekday()))
    end = start + pd.Timedelta(weeks=horizon_weeks)
    fig.update_xaxes(
        type="date", range=[start - pd.Timedelta(days=4), end],
        tick0=start, dtick=7 * 86_400_000 * max(1, horizon_weeks // 12),
        tickformat="%d %b<br>%Y",
    )  # fmt: skip


def _used_text(used: int, full: bool) -> str:
    if full:
        return f"{used} (full)"
    return str(used) if used else ""


def capacity_figure(capacity: pd.DataFrame, site: str) -> go.Figure:
    """Rebuild slots used per week against the capacity [rebuilds/week] for one site row.

    ``capacity``: week_start, site, used, capacity (planning output); ``site`` picks the
    rows (the planner's fleet-wide label for the whole fleet).
    """
    rows = capacity[capacity["site"] == site]
    weeks = pd.to_datetime(rows["week_start"])
    cap = pd.to_numeric(rows["capacity"], errors="coerce").astype(float)
    full = rows["used"].to_numpy() >= cap.to_numpy()
    colours = np.where(full, "#5E4B8B", "#7D98B3")
    fig = go.Figure()
    fig.add_bar(
        x=weeks, y=rows["used"], name="slots used", marker_color=colours,
        text=[_used_text(u, f) for u, f in zip(rows["used"], full, strict=True)],
        textposition="outside", hovertemplate="week of %{x|%d %b}: %{y} used<extra></extra>",
    )  # fmt: skip
    if cap.notna().any():
        fig.add_scatter(
            x=weeks, y=cap, mode="lines", name="capacity", line={"color": INK, "dash": "dash",
            "shape": "hvh"},
        )  # fmt: skip
    if len(rows):
        weeks_n = len(rows)
        _week_axis(fig, pd.Timestamp(rows["week_start"].iloc[0]).date(), weeks_n)
    return _style(fig, f"Shop capacity use — {site}", "Week starting [date]",
                  "Rebuilds per week [count]", height=340)  # fmt: skip


# --- calibration ------------------------------------------------------------------------

WEIBULL_TICKS = (0.01, 0.02, 0.05, 0.1, 0.2, 0.3, 0.5, 0.7, 0.9, 0.99)
"""Fractions failed labelled on the probability axis [-]."""


def weibull_scale(unreliability: Iterable[float]) -> np.ndarray:
    """The Weibull probability axis: ln(-ln(1 - F)) of fractions failed F [-]."""
    f = np.asarray(list(unreliability), dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.log(-np.log1p(-f))


def weibull_plot_figure(
    points: pd.DataFrame,
    line: pd.DataFrame,
    x_title: str,
    title: str,
    reference: float | None = None,
) -> go.Figure:
    """Weibull probability plot: failures at their plotting positions, the fitted line
    and its two-sided bounds, on log(value) against ln(-ln(1 - F)).

    ``points``: ``value``, ``unreliability``; ``line``: ``unreliability``, ``value``,
    ``low``, ``high`` (either may be empty). ``x_title`` names the basis with its unit;
    ``reference`` draws a vertical line (for example the rated B10 = 1 consumed fraction).
    """
    fig = _style(go.Figure(), title, x_title, "fraction failed [%] (Weibull scale)", 420)
    if points.empty:
        return _empty(fig, "no failures of this kind recorded yet")
    if not line.empty:
        y = weibull_scale(line["unreliability"])
        for col, name, dash in (("low", "lower bound", "dot"), ("high", "upper bound", "dot")):
            fig.add_trace(go.Scatter(
                x=line[col], y=y, mode="lines", name=name,
                line={"color": TREND, "dash": dash, "width": 1.5},
            ))  # fmt: skip
        fig.add_trace(go.Scatter(
            x=line["value"], y=y, mode="lines", name="fitted Weibull (maximum likelihood)",
            line={"color": TREND, "width": 2.5},
        ))  # fmt: skip
    fig.add_trace(go.Scatter(
        x=points["value"], y=weibull_scale(points["unreliability"]), mode="markers",
        name="failures (adjusted ranks)", marker={"color": INK, "size": 9, "symbol": "circle"},
        customdata=100 * points["unreliability"],
        hovertemplate="%{x:.4g}, %{customdata:.1f} % failed<extra></extra>",
    ))  # fmt: skip
    ticks = np.array(WEIBULL_TICKS)
    fig.update_yaxes(
        tickvals=weibull_scale(ticks), ticktext=[f"{100 * t:g}" for t in ticks],
        range=[weibull_scale([0.005])[0], weibull_scale([0.995])[0]],
    )  # fmt: skip
    fig.update_xaxes(type="log")
    if reference is not None:
        y = weibull_scale([0.005, 0.995])
        fig.add_trace(go.Scatter(
            x=[reference, reference], y=list(y), mode="lines", name="rating: B10 = 1",
            line={"color": LIMIT, "dash": "dash", "width": 2}, hoverinfo="name",
        ))  # fmt: skip
    fig.update_layout(margin={"t": 40 + 22 * _legend_rows(fig)})
    return fig
