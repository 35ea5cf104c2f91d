"""Plan page: rebuild weeks within the shop's capacity and exchange stock."""

from __future__ import annotations

import streamlit as st

from dashboards import charts, data, plan_view, ui
from monitor import usecases
from monitor.usecases import outputs

ctx = ui.context()
fleet = data.fleet(ctx.url, ctx.as_of, ctx.reliability_pct)
if "plan_options" not in st.session_state:
    st.session_state.plan_options = data.plan_options(ctx.url)
opts: data.PlanOptions = st.session_state.plan_options

st.title("Rebuild plan")
if fleet.empty:
    st.info("The store holds no units yet. Import a fleet registry on the Upload page.")
    st.stop()

with st.expander("Shop capacity, exchange stock and pairing", expanded=False):
    with st.form("plan_form"):
        c1, c2, c3, c4 = st.columns(4)
        horizon = c1.number_input("Horizon [weeks]", 1, 104, opts.horizon_weeks)
        capacity = c2.number_input("Rebuild slots per week, fleet-wide", 0, 500,
                                   opts.capacity_per_week)  # fmt: skip
        pair = c3.toggle("Pair loops of one unit", value=opts.pair_within_h is not None)
        pair_h = c4.number_input("Pair when remaining hours within [h]", 0.0, 10000.0,
                                 opts.pair_within_h or 500.0, step=50.0)  # fmt: skip
        sites = st.data_editor(
            plan_view.site_table(ui.options(fleet, "site"), opts), hide_index=True,
            column_config=plan_view.SITE_COLUMNS, disabled=["site"], key="plan_sites",
        )  # fmt: skip
        stock = st.data_editor(
            plan_view.stock_table(ui.options(fleet, "component_model"), opts), hide_index=True,
            column_config=plan_view.STOCK_COLUMNS, disabled=["model"], key="plan_stock",
        )  # fmt: skip
        if st.form_submit_button("Make plan", type="primary"):
            try:
                new = plan_view.options_from(horizon, capacity, sites, stock, pair, pair_h)
            except ValueError as err:
                st.error(f"Not planned: {err}")
            else:
                st.session_state.plan_options = opts = new
                try:
                    data.save_plan_options(ctx.url, new)
                    st.success("Saved as the shop's plan settings (also used by drivespan plan).")
                except usecases.DomainError as err:
                    st.error(f"Not saved: {err}")

try:
    plan = data.plan(ctx.url, ctx.as_of, ctx.reliability_pct, opts)
except ValueError as err:
    st.error(f"The plan could not be made: {err}")
    st.stop()

lines = outputs.plan_summary(plan)
st.markdown("\n".join(f"- {line}" for line in lines[:-1]))
a = plan.assignments
m1, m2, m3, m4 = st.columns(4)
m1.metric("Rebuilds planned", len(a))
m2.metric("Late", len(plan.late), help="Planned after their due date")
m3.metric("Not placed", len(outputs.not_placed_frame(plan)),
          help="No room in the horizon, or no due date")  # fmt: skip
m4.metric("Largest lateness [days]", plan.max_late_days)

st.plotly_chart(
    charts.plan_timeline_figure(a, ctx.as_of, plan.settings.horizon_weeks), key="plan_timeline"
)
site_rows = [outputs.ALL_SITES, *ui.options(fleet, "site")]
which = st.selectbox("Capacity use of", site_rows, key="plan_cap_site")
st.plotly_chart(charts.capacity_figure(plan.capacity, which), key="plan_capacity")

st.subheader("Planned rebuilds")
st.caption("Late rebuilds (after their due date) are shaded and marked LATE.")
st.dataframe(plan_view.late_style(a), hide_index=True, key="plan_table",
             column_config=plan_view.PLAN_LABELS)  # fmt: skip
rest = outputs.not_placed_frame(plan)
if len(rest):
    st.subheader(f"Not placed ({len(rest)})")
    st.dataframe(ui.readable(rest), hide_index=True, key="plan_unplanned",
                 column_config=plan_view.PLAN_LABELS)  # fmt: skip
with st.expander("Why each rebuild is in its week (full text)"):
    for r in a.itertuples():
        st.markdown(f"- **{r.unit} {r.position}**, week {plan_view.week_text(r.week_start)}: "
                    f"{r.reason}")  # fmt: skip
    for r in rest.itertuples():
        st.markdown(f"- **{r.unit} {r.position}**, not placed ({r.not_placed}): {r.reason}")

d1, d2, d3 = st.columns(3)
stem = f"drivespan-plan-{ctx.as_of.isoformat()}"
d1.download_button("Plan as CSV", outputs.plan_to_csv_bytes(plan), f"{stem}.csv", "text/csv",
                   key="plan_csv")  # fmt: skip
d2.download_button("Plan as Excel workbook", outputs.plan_to_xlsx_bytes(plan), f"{stem}.xlsx",
                   "application/vnd.openxmlformats-officedocument.spreadsheetml.sheet",
                   key="plan_xlsx")  # fmt: skip
d3.download_button("Plan as calendar (iCalendar)", outputs.plan_to_ics_bytes(plan), f"{stem}.ics",
                   "text/calendar", key="plan_ics")  # fmt: skip
