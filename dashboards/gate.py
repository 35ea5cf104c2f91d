"""The optional dashboard password: asked for before any page is shown.

``drivespan dashboard --password-file FILE`` hands the server a salted hash of the
password in ``DRIVESPAN_DASHBOARD_PASSWORD_HASH`` (:mod:`dashboards.launch`). Without
it the dashboard opens directly, as on a loopback-only server.
"""

from __future__ import annotations

import os
import time

import streamlit as st

from monitor import usecases

WRONG_PASSWORD_DELAY_S = 1.0
"""Pause after a wrong password [s]: slows guessing from one browser session."""


def unlocked() -> bool:
    """True when no password is set or this session gave it; otherwise draw the password
    form and return False (the caller then stops the script)."""
    stored = os.environ.get(usecases.PASSWORD_HASH_ENV, "")
    if not stored or st.session_state.get("access_granted"):
        return True
    st.title("drivespan")
    st.write("This dashboard is protected by a password.")
    with st.form("access", border=True):
        password = st.text_input("Password", type="password", key="access_password")
        sent = st.form_submit_button("Open the dashboard", type="primary")
    if sent:
        if usecases.verify_password(password, stored):
            st.session_state["access_granted"] = True
            st.session_state.pop("access_password", None)
            st.rerun()
        time.sleep(WRONG_PASSWORD_DELAY_S)
        st.error("Wrong password.")
    return False
