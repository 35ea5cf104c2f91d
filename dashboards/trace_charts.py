"""Figure builders for stored pressure traces: summary document in, plotly Figure or
DataFrame out.

Pure functions, no Streamlit and no store, like :mod:`dashboards.charts` (whose style
helpers they share). The trace view plots the stored min-max envelope (at most a few
thousand buckets, however long the trace), so it stays fast with millions of samples.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import plotly.graph_objects as go

from dashboards.charts import LIMIT, SETTING, _empty, _hline, _style

_CHANNELS = (
    ("pressure_a_bar", "pressure A", "#2F6690"),
    ("pressure_b_bar", "pressure B", "#D98A1C"),
)
PEAK_COLUMNS = ["setting", "start_s", "duration_s", "peak_bar", "peak_s", "rise_rate_bar_per_s"]


def _broken(x: np.ndarray, y: np.ndarray, jumps: np.ndarray) -> tuple[list, list]:
    """x and y with a None after every index in ``jumps`` (plotly breaks the line there)."""
    xs, ys = x.astype(object), y.astype(object)
    at = jumps + 1
    return (np.insert(xs, at, None).tolist(), np.insert(ys, at, None).tolist())


def trace_envelope_figure(
    envelope: dict | None, relief_bar: float | None, cutoff_bar: float | None
) -> go.Figure:
    """Both loop pressures [bar] (min-max band per bucket) and the speed [rpm, right axis]
    against time since the first sample [s], relief and cut-off marked; the line breaks
    where buckets without samples (gaps) were left out.

    ``envelope``: ``bucket_s``, ``start_s`` and per channel ``minimum`` / ``maximum``
    lists, as stored with the trace.
    """
    fig = go.Figure()
    title = "Pressure trace (min-max per time bucket)"
    if not envelope or not envelope.get("start_s"):
        return _style(_empty(fig, "No trace stored"), title, "Time [s]", "Pressure [bar]")
    t = np.asarray(envelope["start_s"], dtype=float)
    jumps = np.flatnonzero(np.diff(t) > 1.5 * float(envelope["bucket_s"]))
    for key, label, colour in _CHANNELS:
        lo = np.asarray(envelope["minimum"][key], dtype=float)
        hi = np.asarray(envelope["maximum"][key], dtype=float)
        x, y_hi = _broken(t, hi, jumps)
        _, y_lo = _broken(t, lo, jumps)
        fig.add_scatter(x=x, y=y_hi, mode="lines", name=f"{label} max", legendgroup=key,
                        line={"color": colour, "width": 1})  # fmt: skip
        fig.add_scatter(x=x, y=y_lo, mode="lines", name=f"{label} min", legendgroup=key,
                        line={"color": colour, "width": 1}, fill="tonexty")  # fmt: skip
    if "speed_rpm" in envelope["maximum"]:
        x, y = _broken(t, np.asarray(envelope["maximum"]["speed_rpm"], dtype=float), jumps)
        fig.add_scatter(x=x, y=y, mode="lines", name="speed (max)", yaxis="y2",
                        line={"color": "#7A7A7A", "width": 1})  # fmt: skip
        fig.update_layout(
            yaxis2={"title": {"text": "Speed [rpm]"}, "overlaying": "y", "side": "right",
                    "showgrid": False, "rangemode": "tozero"}
        )  # fmt: skip
    end = float(t[-1] + envelope["bucket_s"])
    for value, name, colour, dash in (
        (relief_bar, "relief setting", LIMIT, "dash"),
        (cutoff_bar, "pressure cut-off", SETTING, "dot"),
    ):
        if value is not None and not pd.isna(value):
            fig.add_trace(_hline(0.0, end, value, f"{name} {value:.0f} bar", colour, dash))
    _style(fig, title, "Time since the first sample [s]", "Pressure [bar]", 420)
    if "speed_rpm" in envelope["maximum"]:
        fig.update_layout(yaxis2_title_text="Speed [rpm]", yaxis2_showgrid=False)
    return fig


def trace_histogram_frame(histogram: dict | None) -> pd.DataFrame:
    """The stored histogram of a trace as the spectrum frame of
    :func:`dashboards.charts.spectrum_figure` (pressure_low_bar, pressure_high_bar,
    hours [h]); bands without time are left out."""
    cols = ["pressure_low_bar", "pressure_high_bar", "hours"]
    if not histogram or not histogram.get("hours"):
        return pd.DataFrame(columns=cols)
    edges = np.asarray(histogram["pressure_edges_bar"], dtype=float)
    frame = pd.DataFrame(
        {"pressure_low_bar": edges[:-1], "pressure_high_bar": edges[1:],
         "hours": np.asarray(histogram["hours"], dtype=float)}
    )  # fmt: skip
    return frame[frame["hours"] > 0].reset_index(drop=True)


def cycle_matrix_figure(cycles: dict | None) -> go.Figure:
    """Rainflow cycles of the high side as a heatmap: range [bar] by mean [bar], colour
    the number of cycles [-] (half cycles count 0.5); empty rows and columns at the
    edges are trimmed."""
    fig = go.Figure()
    title = "Pressure cycles, range by mean (rainflow, ASTM E1049-85)"
    x_title, y_title = "Cycle mean pressure [bar]", "Cycle range [bar]"
    counts = np.asarray((cycles or {}).get("counts") or [[]], dtype=float)
    if counts.size == 0 or not np.any(counts > 0):
        return _style(_empty(fig, "No pressure cycles counted"), title, x_title, y_title)
    rows, cols = np.flatnonzero(counts.sum(axis=1)), np.flatnonzero(counts.sum(axis=0))
    r0, r1, c0, c1 = rows[0], rows[-1] + 1, cols[0], cols[-1] + 1
    r_edges = np.asarray(cycles["range_edges_bar"], dtype=float)[r0 : r1 + 1]
    m_edges = np.asarray(cycles["mean_edges_bar"], dtype=float)[c0 : c1 + 1]
    z = counts[r0:r1, c0:c1]
    fig.add_heatmap(
        x=(m_edges[:-1] + m_edges[1:]) / 2, y=(r_edges[:-1] + r_edges[1:]) / 2,
        z=np.where(z > 0, z, np.nan), colorscale="Blues",
        colorbar={"title": {"text": "cycles [-]"}},
        hovertemplate="mean %{x:.0f} bar, range %{y:.0f} bar: %{z:g} cycles<extra></extra>",
    )  # fmt: skip
    return _style(fig, title, x_title, y_title, 420)


def trace_peaks_frame(excursions: dict | None) -> pd.DataFrame:
    """Excursions above the relief and the cut-off settings, one row each, in time order:
    setting, start [s], duration [s], peak [bar], time of the peak [s], rise rate [bar/s]."""
    parts = []
    for setting, rows in (excursions or {}).items():
        if rows:
            part = pd.DataFrame(rows)
            part.insert(0, "setting", setting)
            parts.append(part)
    if not parts:
        return pd.DataFrame(columns=PEAK_COLUMNS)
    both = pd.concat(parts, ignore_index=True)[PEAK_COLUMNS]
    return both.sort_values(["start_s", "setting"], ignore_index=True)
