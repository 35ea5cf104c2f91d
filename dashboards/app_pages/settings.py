"""Settings page: the status settings stored with the data, and the fleet registry."""

from __future__ import annotations

import streamlit as st

from dashboards import data, ui
from monitor import usecases
from monitor.domain.vocabulary import STATUS_BANDS

ctx = ui.context()
current = data.settings(ctx.url)
limits = current["status_limits"]

st.title("Settings")
st.markdown(
    "These settings are stored with the data and apply to everyone using this store. "
    "The sidebar's reliability changes only your own view."
)
with st.form("settings_form"):
    c1, c2 = st.columns(2)
    reliability = c1.number_input(
        "Planning reliability [%]", min_value=90.0, max_value=99.95, step=0.5,
        value=float(current["reliability_pct"]), format="%.2f",
        help="ISO 281 factor a1 is defined from 90 to 99.95 %.",
    )  # fmt: skip
    window = c2.number_input(
        "Rate window [operating hours]", min_value=1.0, step=50.0,
        value=float(current["rate_window_h"]),
        help="The damage rate is taken over the most recent uploads adding up to this.",
    )  # fmt: skip
    st.markdown(
        "**Status bands** — a drive is in a band when its remaining hours are at or below "
        f"the band's limit; above the last it is {STATUS_BANDS[3]}"
    )
    b1, b2, b3 = st.columns(3)
    overdue = b1.number_input(
        f"{STATUS_BANDS[0]} at or below [h]",
        value=float(limits["overdue_h"]),
        step=10.0,
        format="%.0f",
    )
    due = b2.number_input(
        f"{STATUS_BANDS[1]} at or below [h]", value=float(limits["due_h"]), step=50.0, format="%.0f"
    )
    plan = b3.number_input(
        f"{STATUS_BANDS[2]} at or below [h]",
        value=float(limits["plan_h"]),
        step=100.0,
        format="%.0f",
    )
    d1, d2 = st.columns(2)
    stale = d1.number_input("Stale data after [days]", min_value=1, step=1,
                            value=int(current["stale_days"]))  # fmt: skip
    util = d2.number_input("Utilisation window [days]", min_value=1, step=1,
                           value=int(current["utilisation_days"]))  # fmt: skip
    with st.expander("Flags"):
        e1, e2, e3 = st.columns(3)
        step = e1.number_input("Case-drain step factor [×]", min_value=1.01, step=0.1,
                               value=float(current["case_drain_step_factor"]))  # fmt: skip
        relief = e2.number_input("Heavy relief share [fraction of hours]", min_value=0.0001,
                                 max_value=0.99, step=0.005, format="%.4f",
                                 value=float(current["heavy_relief_fraction"]))  # fmt: skip
        readings = e3.number_input("Fewest readings for a wear trend", min_value=3, step=1,
                                   value=int(current["min_wear_readings"]))  # fmt: skip
        before = e1.number_input("Readings before a step", min_value=3, step=1,
                                 value=int(current["case_drain_step_min_before"]),
                                 help="The step flag compares the latest case-drain reading "
                                 "with the trend of at least this many earlier ones.")  # fmt: skip
    with st.expander("Case-drain readings off the test conditions"):
        st.caption(
            "Readings further than this from the model's test temperature, or at a "
            "test pressure outside this share of it, are shown but not trended."
        )
        f1, f2, f3 = st.columns(3)
        distance = f1.number_input("Temperature distance [K]", min_value=0.5, step=5.0,
                                   value=float(current["case_drain_temp_distance_k"]))  # fmt: skip
        ratio_lo = f2.number_input("Pressure ratio from [×]", min_value=0.01, max_value=1.0,
                                   step=0.05,
                                   value=float(current["case_drain_dp_ratio_min"]))  # fmt: skip
        ratio_hi = f3.number_input("Pressure ratio to [×]", min_value=1.0, step=0.25,
                                   value=float(current["case_drain_dp_ratio_max"]))  # fmt: skip
    with st.expander("Life model"):
        st.caption(
            "The pressure a histogram band stands for: its midpoint, or its upper edge (more "
            "cautious; about 70 % more damage on a typical spectrum, docs/life-model.md). "
            "The damage ledger is computed with it: after a change, recompute the ledger."
        )
        rules = list(usecases.BAND_PRESSURE_CHOICES)
        band_rule = st.radio("Band pressure", rules, horizontal=True,
                             index=rules.index(current["band_pressure"]))  # fmt: skip
        first_h = st.number_input(
            "Life before the first upload unknown above [h on the hour meter]", min_value=1.0,
            step=10.0, value=float(current["life_before_data_h"]),
            help="A drive without a recorded rebuild whose first upload starts above this "
            "hour meter is flagged life_before_data_unknown.",
        )  # fmt: skip
    submitted = st.form_submit_button("Save settings", type="primary")

if submitted:
    values = {
        "reliability_pct": reliability, "rate_window_h": window, "stale_days": int(stale),
        "utilisation_days": int(util), "case_drain_step_factor": step,
        "heavy_relief_fraction": relief, "min_wear_readings": int(readings),
        "case_drain_step_min_before": int(before), "case_drain_temp_distance_k": distance,
        "case_drain_dp_ratio_min": ratio_lo, "case_drain_dp_ratio_max": ratio_hi,
        "band_pressure": band_rule, "life_before_data_h": first_h,
        "status_limits": {"overdue_h": overdue, "due_h": due, "plan_h": plan},
    }  # fmt: skip
    try:
        data.save_settings(ctx.url, values)
    except usecases.DomainError as err:
        ui.show_error(f"Not saved: {ui.setting_words(str(err))}", err.problems)
    else:
        st.success("Settings saved; the ranking uses them from now on.")

if data.ledger_stale(ctx.url):
    st.warning(usecases.RECOMPUTE_NEEDED)
    if st.button("Recompute the ledger now", key="recompute"):
        with st.spinner("Recomputing the damage ledger ..."):
            n = data.recompute(ctx.url)
        st.success(f"Ledger rebuilt: {n:,} rows, computed with the settings in force.")

st.subheader("Fleet registry")
text = data.registry_text(ctx.url)
if text:
    st.caption("The last imported registry (read-only; upload a new one on the Upload page).")
    st.code(text, language="yaml", height=420)
else:
    st.info("No fleet registry imported yet. Upload one (YAML) on the Upload page.")
