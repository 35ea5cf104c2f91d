"""Unit page: why one unit stands where it does, component by component."""

from __future__ import annotations

import streamlit as st

from dashboards import charts, data, trace_charts, ui
from monitor import usecases

ctx = ui.context()
fleet = data.fleet(ctx.url, ctx.as_of, ctx.reliability_pct)
tags = list(dict.fromkeys(fleet["unit"])) if not fleet.empty else []
if not tags:
    st.title("Unit")
    st.info("The store holds no units yet. Import a fleet registry on the Upload page.")
    st.stop()

head = st.container()
wanted = st.query_params.get("unit")
if wanted and wanted not in tags:
    st.error(f"There is no unit with the tag {wanted!r}. Pick one from the list below.")
index = tags.index(wanted) if wanted in tags else 0
tag = st.selectbox("Unit (most urgent first)", tags, index=index, key=f"u_pick_{wanted}")
if tag != wanted:
    st.query_params["unit"] = tag

try:
    report = data.unit_report(ctx.url, tag, ctx.as_of, ctx.reliability_pct)
except usecases.DomainError as err:
    ui.show_error(str(err), err.problems)
    st.stop()

info = report.unit
head.title(f"Unit {info['tag']}")
head.caption(f"{info.get('site', '')} · {info.get('machine_type', '')} · oil {info.get('oil', '')}"
             f" · as of {ctx.as_of.isoformat()}")  # fmt: skip

with st.container(border=True):
    st.markdown("**Why this unit stands where it does**")
    st.markdown(ui.summary_markdown(report.summary))
st.dataframe(ui.table_frame(report.status).drop(columns=["site", "machine_type"]),
             column_config=ui.column_config(), hide_index=True, key="u_status")  # fmt: skip
st.markdown(
    "**Model assumptions used** — band pressure rule, oil temperature of the ISO 281 "
    "oil factor and its source, contamination level in force (eC) next to the level "
    "the latest oil sample suggests, hours at the aISO floor (kappa < 0.1), life "
    "before the first upload (docs/life-model.md)"
)
st.dataframe(report.assumptions, hide_index=True, key="u_assumptions",
             column_config=ui.labels(report.assumptions))  # fmt: skip
if data.ledger_stale(ctx.url):
    st.warning(usecases.RECOMPUTE_NEEDED)

settings = data.settings(ctx.url)
drain_note = (
    "Readings taken more than {:g} K from the model's test temperature, or at a test "
    "pressure outside {:g}–{:g} times the model's test pressure, are shown (open diamonds) "
    "but left out of the trend and the step check (Settings page). The 95 % range needs "
    "at least 5 readings at distinct hour meters; with fewer, no range is shown."
).format(settings["case_drain_temp_distance_k"], settings["case_drain_dp_ratio_min"],
         settings["case_drain_dp_ratio_max"])  # fmt: skip
relief_note = (
    "Relief heat is an upper bound: it assumes full stall flow across the relief in every "
    "band at or above 95 % of the relief setting. With a pressure cut-off it is taken as nil."
)


def show_trace(pos: str, detail) -> None:  # noqa: ANN001 - usecases.ComponentDetail
    """One stored pressure trace of the drive: envelope, histogram, cycles, peaks, notes."""
    st.markdown("**Pressure traces**")
    labels = [f"{d['period_start']} · {d['file']}" for d in detail.traces]
    pick = st.selectbox("Trace", range(len(labels)), index=len(labels) - 1,
                        format_func=labels.__getitem__, key=f"trace_pick_{pos}")  # fmt: skip
    doc = detail.traces[pick]
    relief, cutoff = detail.model.relief_bar, detail.model.cutoff_bar
    for note in doc.get("notes") or []:
        st.warning(note)
    st.plotly_chart(trace_charts.trace_envelope_figure(doc.get("envelope"), relief, cutoff),
                    key=f"trace_env_{pos}")  # fmt: skip
    left, right = st.columns(2)
    hist = trace_charts.trace_histogram_frame(doc.get("histogram"))
    fig = charts.spectrum_figure(hist, relief, cutoff)
    fig.update_layout(title_text="Time at pressure in this trace")
    left.plotly_chart(fig, key=f"trace_hist_{pos}")
    right.plotly_chart(trace_charts.cycle_matrix_figure(doc.get("cycles")),
                       key=f"trace_cycles_{pos}")  # fmt: skip
    peaks = trace_charts.trace_peaks_frame(doc.get("excursions"))
    st.caption(f"Excursions above the relief and cut-off settings: {len(peaks)} listed")
    st.dataframe(peaks, hide_index=True, key=f"trace_peaks_{pos}",
                 column_config=ui.labels(peaks))  # fmt: skip


positions = list(report.components)
for pos, tab in zip(positions, st.tabs([f"{p} loop" for p in positions]), strict=True):
    detail = report.components[pos]
    row = ui.status_row(report.status, pos)
    with tab:
        st.caption(ui.model_caption(detail.model))
        # one row of two per pair, so that on a phone the charts stack in reading order
        left, right = st.columns(2)
        left.plotly_chart(
            charts.spectrum_figure(detail.spectrum, detail.model.relief_bar,
                                   detail.model.cutoff_bar), key=f"spec_{pos}")  # fmt: skip
        right.plotly_chart(charts.life_figure(detail.life, detail.projection), key=f"life_{pos}")
        line, crossing = ui.trend_line(detail, row)
        left, right = st.columns(2)
        left.plotly_chart(
            charts.case_drain_figure(
                detail.case_drain, detail.case_drain_limit_lpm, line, crossing
            ),
            key=f"drain_{pos}",
        )
        left.caption(drain_note)
        has_cutoff = detail.model.cutoff_bar is not None
        right.plotly_chart(charts.relief_figure(detail.relief_monthly, has_cutoff),
                           key=f"relief_{pos}")  # fmt: skip
        right.caption(relief_note)
        left, right = st.columns(2)
        left.plotly_chart(charts.oil_figure(detail.oil_samples), key=f"oil_{pos}")
        right.markdown("**Oil samples**")
        right.dataframe(ui.readable(detail.oil_samples), hide_index=True, key=f"oil_t_{pos}",
                        column_config=ui.labels(detail.oil_samples))  # fmt: skip
        if detail.traces:
            show_trace(pos, detail)

st.subheader("Service history")
if report.service_history.empty:
    st.caption("No rebuilds, replacements or hour-meter changes recorded.")
else:
    st.dataframe(ui.readable(report.service_history), hide_index=True, key="u_history",
                 column_config=ui.labels(report.service_history))  # fmt: skip
st.subheader("Recent uploads")
st.dataframe(ui.readable(report.uploads), hide_index=True, key="u_uploads",
             column_config=ui.labels(report.uploads))  # fmt: skip
