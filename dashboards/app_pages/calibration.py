"""Calibration page: the fleet's own lives against each component model's rating.

Weibull probability plots of the lives between rebuilds and replacements (bearing mode
in consumed life fraction, wear mode in operating hours), the model-against-field table,
and accepting or undoing a suggested life factor with a confirmation of what changes.
"""

from __future__ import annotations

import streamlit as st

from dashboards import charts, data, ui
from monitor import usecases

ctx = ui.context()
st.title("Calibration")
st.markdown(
    "Each drive's life runs from one rebuild or replacement to the next; its **reason** "
    "decides what it counts as. Lives ended by a *failure* are failures of the bearing "
    "mode (basis: consumed life fraction, 1.0 = the rated L10 reached); lives ended at the "
    "*wear limit* are failures of the wear mode (basis: operating hours); every other life, "
    "running or ended for another reason, is a suspension. For a model whose rating matches "
    "the field, the bearing-mode B10 is 1.0; the observed B10 is the suggested life factor. "
    "A factor is an estimate: the maker's ratings and a qualified engineer decide."
)
confidence = st.select_slider(
    "Confidence of the bounds (two-sided, likelihood ratio)",
    options=[0.80, 0.90, 0.95], value=0.90, key="cal_confidence",
)  # fmt: skip
table = data.calibration(ctx.url, confidence)
if table.empty:
    st.info("No lives yet: import a registry with service history and ingest telemetry.")
    st.stop()

st.subheader("Model against field")
st.dataframe(ui.readable(table), hide_index=True, key="cal_table", column_config=ui.labels(table))
factors = data.life_factors(ctx.url)
if not factors.empty:
    st.caption(
        "Life factors in force (on top of the registry's rated L10; a registry import does "
        "not change them): "
        + "; ".join(f"{r.component_model} x {r.factor:.3g}" for r in factors.itertuples())
    )

models = sorted(table["component_model"].unique())
model = st.selectbox("Component model", models, key="cal_model")
basis_titles = {
    "bearing": "consumed life fraction at end of life [-]",
    "wear_limit": "operating hours at end of life [h]",
}
cols = st.columns(2)
for col, mode in zip(cols, usecases.CALIBRATION_MODES, strict=True):
    points, line = data.probability_plot(ctx.url, model, mode, confidence)
    fig = charts.weibull_plot_figure(
        points, line, basis_titles[mode], f"{model}: {mode.replace('_', ' ')} mode",
        reference=1.0 if mode == "bearing" else None,
    )  # fmt: skip
    col.plotly_chart(fig, key=f"cal_plot_{mode}")

st.subheader("Accept a life factor")
try:
    change = data.proposed_change(ctx.url, model, confidence)
except usecases.DomainError as err:
    st.info(str(err))
else:
    st.markdown(
        f"Accepting changes **{model}**'s rating from {change['rated_l10_h']:g} h x "
        f"{change['factor_now']:.3g} = {change['effective_l10_h_now']:.4g} h to "
        f"{change['rated_l10_h']:g} h x {change['factor_new']:.3g} = "
        f"**{change['effective_l10_h_new']:.4g} h** (suggested factor "
        f"{change['suggested']:.3g}, {100 * confidence:g} % bounds "
        f"{change['suggested_low']:.3g}–{change['suggested_high']:.3g}, from "
        f"{change['failures']} failures and {change['suspensions']} suspensions). The damage "
        "ledger is recomputed, so every remaining-hours figure of this model changes; the "
        "change is recorded with its date and can be undone."
    )
    sure = st.checkbox(f"I have checked this and accept the factor for {model}", key="cal_sure")
    if st.button("Accept life factor", disabled=not sure, key="cal_accept"):
        done = data.accept_life_factor(ctx.url, model, confidence)
        st.success(f"{model}: life factor {done['factor_new']:.3g} accepted; ledger recomputed.")
if not factors.empty and model in set(factors["component_model"]):
    if st.button(f"Undo the newest life factor of {model}", key="cal_undo"):
        done = data.undo_life_factor(ctx.url, model)
        st.success(
            f"{model}: factor {done['undone_factor']:.3g} undone; now x {done['factor_now']:.3g}."
        )
