"""Timing of the fleet page for the benchmark scripts (not used by the app itself).

The page runs in Streamlit's AppTest (the same script runner the server uses, without
the browser): the first run opens the store and ranks the fleet; the runs after it
reuse the cached engine and the cached fleet frame, which is what a planner sees
when moving between pages or changing a filter.
"""

from __future__ import annotations

import os
import time
from datetime import date
from pathlib import Path

APP = Path(__file__).resolve().parents[2] / "dashboards" / "streamlit_app.py"


def time_fleet_page(
    db_url: str, as_of: date | None = None, repeats: int = 3, timeout_s: float = 600.0
) -> dict:
    """Seconds for the first (cold) and later (cached) runs of the fleet page.

    Returns ``{"components", "first_s", "cached_s" (best later run), "cached_all_s"}``;
    raises RuntimeError if the page raised an exception.
    """
    from streamlit.testing.v1 import AppTest

    old = os.environ.get("DRIVESPAN_DB")
    os.environ["DRIVESPAN_DB"] = db_url
    try:
        at = AppTest.from_file(str(APP), default_timeout=timeout_s)
        if as_of is not None:
            at.session_state["as_of"] = as_of
        t = time.perf_counter()
        at.run()
        first = time.perf_counter() - t
        later = []
        for _ in range(max(1, repeats)):
            t = time.perf_counter()
            at.run()
            later.append(time.perf_counter() - t)
    finally:
        if old is None:
            os.environ.pop("DRIVESPAN_DB", None)
        else:
            os.environ["DRIVESPAN_DB"] = old
    if at.exception:
        raise RuntimeError(f"fleet page failed: {at.exception[0].value}")
    rows = len(at.dataframe[0].value) if at.dataframe else 0
    return {"components": rows, "first_s": first, "cached_s": min(later), "cached_all_s": later}


def render_fleet_page(engine: object, as_of: date | None = None) -> dict:
    """Hook for ``tests/bench.py``: time the fleet page on the engine's database."""
    url = engine.url.render_as_string(hide_password=False)  # type: ignore[attr-defined]
    return time_fleet_page(url, as_of)
