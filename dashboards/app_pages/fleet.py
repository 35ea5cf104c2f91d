"""Fleet page: status counts, what falls due soon, and the ranked, filterable table."""

from __future__ import annotations

import streamlit as st

from dashboards import data, ui
from monitor.usecases import outputs

ctx = ui.context()
fleet = data.fleet(ctx.url, ctx.as_of, ctx.reliability_pct)

st.title("Fleet condition")
st.caption(
    f"As of {ctx.as_of.isoformat()} · planning reliability {ctx.reliability_pct:g} % · "
    f"{len(fleet)} components on {fleet['unit'].nunique()} units. Most urgent first."
)
if fleet.empty:
    st.info("The store holds no units yet. Import a fleet registry and telemetry on the "
            "Upload page.")  # fmt: skip
    st.stop()

st.html(ui.attention_html(fleet))
st.caption("Whole fleet, by status:")
st.html(ui.status_chips(fleet))
weeks = st.segmented_control(
    "Look ahead [weeks]", [4, 12, 26, 52], default=12, key="f_weeks", required=True
)
st.plotly_chart(data.due_weeks_figure(fleet, ctx.as_of, weeks or 12), key="due_weeks")

st.subheader("Ranking")
f1, f2, f3, f4, f5 = st.columns([1.2, 1, 1, 1, 1.2])
sites = f1.multiselect("Site", ui.options(fleet, "site"), key="f_site", placeholder="all")
bands = f2.multiselect("Status", ui.status_options(fleet), key="f_status", placeholder="all")
types = f3.multiselect("Machine type", ui.options(fleet, "machine_type"), key="f_type",
                       placeholder="all")  # fmt: skip
models = f4.multiselect("Component model", ui.options(fleet, "component_model"), key="f_model",
                        placeholder="all")  # fmt: skip
search = f5.text_input("Search tag", key="f_search", placeholder="e.g. part of a unit tag")

shown = ui.filter_fleet(fleet, sites, bands, types, models, search)
st.caption(f"{len(shown)} of {len(fleet)} components shown (the filters apply to this table "
           "and its download; the list and figures above are of the whole fleet).")  # fmt: skip
event = st.dataframe(
    ui.table_frame(shown),
    column_config=ui.column_config(),
    hide_index=True,
    on_select="rerun",
    selection_mode="single-row",
    key="fleet_table",
    height=min(38 + 35 * max(len(shown), 1), 560),
)
if event.selection.rows:
    tag = shown.iloc[event.selection.rows[0]]["unit"]
    st.switch_page("app_pages/unit.py", query_params={"unit": tag})

c1, c2, c3 = st.columns([2, 1, 2], vertical_alignment="bottom")
tags = list(dict.fromkeys(shown["unit"]))
pick = c1.selectbox("Open the unit page of", tags, key="f_open", disabled=not tags)
if c2.button("Open unit", key="f_open_go", disabled=not tags):
    st.switch_page("app_pages/unit.py", query_params={"unit": pick})
c3.download_button(
    "Download this table (CSV)",
    # made when clicked, not in every run of the page (and not sent to every session)
    data=lambda shown=shown: outputs.frame_to_csv_bytes(ui.export_frame(shown)),
    file_name=f"drivespan-fleet-{ctx.as_of.isoformat()}.csv",
    mime="text/csv",
    key="f_csv",
)
st.caption("Select a row (or use the box above) to see why a unit stands where it does.")
