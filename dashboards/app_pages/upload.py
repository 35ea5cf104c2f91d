"""Upload page: telemetry exports (CSV, JSON) and fleet registries (YAML).

Each file is checked and stored whole or not at all (service.upload, the same path
as ``drivespan ingest``); the result of every file is listed with its problems.
"""

from __future__ import annotations

import streamlit as st

from dashboards import data, ui

ctx = ui.context()
st.title("Upload data")
st.markdown(
    "Telemetry exports (time-at-pressure histograms, case-drain and oil-sample readings) "
    "as **CSV or JSON**, or a fleet registry as **YAML**. A file with any problem is "
    f"rejected whole and nothing of it is stored; a file already stored counts once. "
    f"Largest file: {data.MAX_UPLOAD_MB} MB."
)

if "upload_round" not in st.session_state:
    st.session_state.upload_round = 0
files = st.file_uploader(
    "Files to upload",
    type=["csv", "json", "txt", "yaml", "yml"],
    accept_multiple_files=True,
    key=f"uploader_{st.session_state.upload_round}",
)
registry_first = sorted(files or [], key=lambda f: not f.name.lower().endswith((".yaml", ".yml")))
if registry_first and st.button("Check and store", type="primary", key="upload_go"):
    results = [data.upload(ctx.url, f.getvalue(), f.name) for f in registry_first]
    st.session_state.upload_results = results
    st.session_state.upload_round += 1  # a fresh, empty uploader for the next files
    st.rerun()

results = st.session_state.get("upload_results", [])
if results:
    st.subheader("Result per file")
    st.dataframe(
        ui.results_frame(results),
        hide_index=True,
        key="upload_summary",
        column_config={"Summary": st.column_config.TextColumn("Summary", width="large")},
    )
    for r in results:  # the summaries in full, as a table cell may cut them
        st.markdown(f"- {r.summary}")
for r in results:
    if r.status == "rejected":
        with st.container(border=True):
            st.error(f"**{r.name}** was rejected; nothing from it was stored. "
                     "Fix these problems and upload it again:")  # fmt: skip
            problems = ui.problems_frame(r.problems)
            if len(problems) <= 50:  # a table wraps long messages
                st.table(problems, hide_index=True, border="horizontal")
            else:
                st.dataframe(problems, hide_index=True, key=f"p_{r.name}")
if any(r.status == "accepted" for r in results):
    st.success("The fleet ranking now includes the accepted files.")
