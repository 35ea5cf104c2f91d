"""drivespan dashboard entry point: page navigation and the shared sidebar.

Run with ``python -m dashboards.launch`` helpers or
``python -m streamlit run dashboards/streamlit_app.py`` with ``DRIVESPAN_DB`` set.
"""

from __future__ import annotations

import sys
from pathlib import Path

import streamlit as st

ROOT = Path(__file__).resolve().parent.parent
if str(ROOT) not in sys.path:  # `streamlit run` puts only this folder on the path
    sys.path.insert(0, str(ROOT))

from dashboards import gate, ui  # noqa: E402

st.set_page_config(page_title="drivespan", page_icon=":material/build:", layout="wide")

if not gate.unlocked():  # an optional password, asked for before any page
    st.stop()

FLEET = st.Page("app_pages/fleet.py", title="Fleet", icon=":material/list:", url_path="fleet")


def _start() -> None:
    """The app's root address opens the fleet page under its own address (/fleet), so that
    every page, the fleet page too, has an address a bookmark can hold."""
    st.switch_page(FLEET)


PAGES = [
    st.Page(_start, title="drivespan", url_path="start", default=True, visibility="hidden"),
    FLEET,
    st.Page("app_pages/unit.py", title="Unit", icon=":material/search:", url_path="unit"),
    st.Page("app_pages/plan.py", title="Plan", icon=":material/event:", url_path="plan"),
    st.Page("app_pages/calibration.py", title="Calibration", icon=":material/query_stats:",
            url_path="calibration"),
    st.Page("app_pages/upload.py", title="Upload", icon=":material/upload:", url_path="upload"),
    st.Page("app_pages/settings.py", title="Settings", icon=":material/tune:",
            url_path="settings"),
]  # fmt: skip

page = st.navigation(PAGES)
ui.sidebar()
ui.caution_banner()
page.run()
