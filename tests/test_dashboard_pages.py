"""Every dashboard page runs in Streamlit's AppTest against a real SQLite store.

The store is the hand-checked fleet of ``tests/dashboard_fleet.py`` loaded through
the service, so the most urgent unit (AA-HOT) is known without the ranking code.
"""

from __future__ import annotations

from datetime import timedelta
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from streamlit.testing.v1 import AppTest

from monitor import usecases
from monitor.store import queries
from tests import dashboard_fleet as fx

APP = Path(__file__).resolve().parent.parent / "dashboards" / "streamlit_app.py"


@pytest.fixture
def store(tmp_path, monkeypatch) -> str:
    url = f"sqlite:///{tmp_path / 'dash.db'}"
    fx.build_store(url, tmp_path / "files")
    monkeypatch.setenv("DRIVESPAN_DB", url)
    return url


def start(page: str | None = None, unit: str | None = None) -> AppTest:
    """The app at the fixture's as-of date, optionally switched to a page."""
    at = AppTest.from_file(str(APP), default_timeout=90)
    at.run()
    at.date_input(key="as_of").set_value(fx.AS_OF).run()
    if unit is not None:
        at.query_params["unit"] = unit
    if page is not None:
        at.switch_page(f"app_pages/{page}.py").run()
    assert not at.exception, [e.value for e in at.exception]
    return at


def counts(url: str) -> dict[str, int]:
    engine = usecases.init_db(url)
    try:
        with engine.connect() as conn:
            return queries.table_counts(conn)
    finally:
        engine.dispose()


def ranking(at: AppTest):
    return at.dataframe[0].value


def data_age(at: AppTest, unit: str) -> float:
    table = ranking(at)
    return float(table.loc[table["unit"] == unit, "data_age_days"].iloc[0])


def test_sidebar_carries_the_cautions_on_every_page(store):
    at = start()
    for page in ("fleet", "unit", "plan", "upload", "settings"):
        at.switch_page(f"app_pages/{page}.py").run()
        assert not at.exception
        text = " ".join(w.value for w in at.sidebar.warning)
        assert "estimates" in text and "qualified technicians" in text, page
        assert "accumulators" in text and "lock out and tag out" in text, page
        main = " ".join(c.value for c in at.main.caption)
        assert "accumulators" in main and "lock out and tag out" in main, page  # no sidebar


def test_fleet_page_ranks_the_hand_made_most_urgent_unit_first(store):
    at = start()
    table = ranking(at)
    assert table["unit"].iloc[0] == fx.MOST_URGENT
    assert table["status"].iloc[0].endswith("act now")
    assert list(table["unit"]) == ["AA-HOT", "AA-HOT", "AB-CONV", "AA-MILD", "AA-MILD"]
    assert "5 of 5 components shown" in " ".join(c.value for c in at.caption)
    assert len(at.get("plotly_chart")) == 1


def test_fleet_filters_change_the_rows(store):
    at = start()
    at.multiselect(key="f_site").set_value(["South Mill"]).run()
    assert list(ranking(at)["unit"]) == ["AB-CONV"]
    at.multiselect(key="f_site").set_value([]).run()
    at.multiselect(key="f_status").set_value(["healthy"]).run()
    assert set(ranking(at)["unit"]) == {"AA-MILD"}
    at.multiselect(key="f_status").set_value([]).run()
    at.text_input(key="f_search").input("hot").run()
    assert list(ranking(at)["unit"]) == ["AA-HOT", "AA-HOT"]
    at.multiselect(key="f_type").set_value(["chain conveyor"]).run()
    assert ranking(at).empty


def test_fleet_csv_download_is_offered(store):
    at = start()
    assert at.get("download_button"), "no download button on the fleet page"


def test_unit_page_by_query_parameter_shows_every_chart(store):
    at = start("unit", unit=fx.MOST_URGENT)
    assert at.title[0].value == f"Unit {fx.MOST_URGENT}"
    assert at.selectbox[0].value == fx.MOST_URGENT
    # two loops x (spectrum, life, case drain, relief, oil)
    assert len(at.get("plotly_chart")) == 10
    summary = " ".join(m.value for m in at.markdown)
    # 880 h in a band of life 809 h: 109 % used (hand-computed, tests/dashboard_fleet.py)
    assert "109 % of bearing life used" in summary
    assert "relief" in summary


def test_unit_page_selectbox_picks_another_unit(store):
    at = start("unit", unit=fx.MOST_URGENT)
    at.selectbox[0].set_value("AB-CONV").run()
    assert not at.exception
    assert at.title[0].value == "Unit AB-CONV"
    assert len(at.get("plotly_chart")) == 5


def test_unit_page_shows_a_stored_trace(store):
    """A two-minute trace of AA-MILD's left loop (TP-50, relief 420 bar, no cut-off):
    a climb to a stall at 415 bar, one spike to 470 bar (over 10 % above the relief)."""
    t = np.arange(0.0, 120.0, 0.05)
    high = np.clip(100.0 + 10.0 * t, 100.0, 415.0)
    high[(t >= 60.0) & (t < 60.2)] = 470.0
    speed = np.where(high >= 400.0, 0.0, 1800.0)
    csv = pd.DataFrame(
        {"time_s": t, "pressure_a_bar": high, "pressure_b_bar": 20.0, "speed_rpm": speed}
    ).to_csv(index=False)
    engine = usecases.init_db(store)
    res = usecases.ingest_trace(
        engine, csv.encode(), "mild_left.csv", "AA-MILD", "left", 800.0,
        started_at="2026-03-08T10:00:00Z",
    )  # fmt: skip
    engine.dispose()
    assert res.status == usecases.ACCEPTED, res.problems
    at = start("unit", unit="AA-MILD")
    # two loops x 5 charts, plus the trace view, its histogram and its cycle matrix
    assert len(at.get("plotly_chart")) == 13
    assert any("exceeded the relief setting of 420 bar" in w.value for w in at.warning)
    peaks = next(d.value for d in at.dataframe if "rise_rate_bar_per_s" in d.value.columns)
    assert list(peaks["setting"]) == ["relief"] and peaks["peak_bar"].iloc[0] == 470.0


def test_unit_page_unknown_tag_says_so(store):
    at = start("unit", unit="NO-SUCH")
    assert "no unit with the tag 'NO-SUCH'" in at.error[0].value


def test_upload_good_file_is_stored_and_refreshes_the_ranking(store):
    at = start()
    age_before = data_age(at, "AA-MILD")
    before = counts(store)
    at.switch_page("app_pages/upload.py").run()
    at.file_uploader[0].set_value(("qa-mild-next.csv", fx.good_upload(), "text/csv")).run()
    at.button(key="upload_go").click().run()
    assert not at.exception
    result = at.dataframe[0].value
    assert list(result["Result"]) == ["accepted"]
    after = counts(store)
    assert after["upload_file"] == before["upload_file"] + 1
    assert after != before
    at.switch_page("app_pages/fleet.py").run()
    age_after = data_age(at, "AA-MILD")
    assert age_after < age_before  # the cached ranking was cleared


def test_upload_same_file_twice_counts_once(store):
    at = start("upload")
    for _ in range(2):
        at.file_uploader[0].set_value(("again.csv", fx.good_upload(), "text/csv")).run()
        at.button(key="upload_go").click().run()
    assert list(at.dataframe[0].value["Result"]) == ["duplicate"]


def test_upload_broken_file_is_rejected_with_its_line_and_stores_nothing(store):
    before = counts(store)
    at = start("upload")
    at.file_uploader[0].set_value(("broken.csv", fx.broken_upload(), "text/csv")).run()
    at.button(key="upload_go").click().run()
    assert not at.exception
    assert list(at.dataframe[0].value["Result"]) == ["rejected"]
    assert "broken.csv" in at.error[0].value and "nothing from it was stored" in at.error[0].value
    problems = at.table[0].value
    assert 3 in list(problems["Line"])
    assert any("hours" in p and ">= 0" in p for p in problems["Problem"])
    assert counts(store) == before


def test_upload_internal_error_is_that_files_refusal_and_the_next_is_stored(store, monkeypatch):
    from monitor.ingest import parse

    real = parse.parse_file

    def fails_for_one(data, name):  # noqa: ANN001, ANN202 - a parser fault, simulated
        if name == "trips.csv":
            raise RecursionError("maximum recursion depth exceeded")
        return real(data, name)

    monkeypatch.setattr(parse, "parse_file", fails_for_one)
    before = counts(store)
    at = start("upload")
    at.file_uploader[0].set_value(
        [("trips.csv", fx.good_upload(), "text/csv"), ("next.csv", fx.good_upload(), "text/csv")]
    ).run()
    at.button(key="upload_go").click().run()
    assert not at.exception
    assert list(at.dataframe[0].value["Result"]) == ["rejected", "accepted"]
    problem = " ".join(str(v) for v in at.table[0].value["Problem"])
    assert "internal error" in problem and "store is unchanged" in problem
    assert "Traceback" not in problem
    assert counts(store)["upload_file"] == before["upload_file"] + 1


def test_upload_too_large_is_rejected_in_code(store, monkeypatch):
    from dashboards import data

    monkeypatch.setattr(data, "MAX_UPLOAD_BYTES", 100)
    before = counts(store)
    at = start("upload")
    at.file_uploader[0].set_value(("big.csv", fx.good_upload(), "text/csv")).run()
    at.button(key="upload_go").click().run()
    problems = " ".join(str(v) for v in at.table[0].value["Problem"])
    assert "larger than the 50 MB limit" in problems
    assert counts(store) == before


def test_settings_page_saves_and_refuses_unordered_bands(store):
    at = start("settings")
    assert "AA-HOT" in at.code[0].value  # the registry, read-only
    inputs = {n.label: n for n in at.number_input}
    inputs["due soon at or below [h]"].set_value(2000.0)  # above plan (1000): refused
    at.button[0].click().run()  # the form's submit button
    assert "Not saved" in at.error[0].value and "plan ahead" in at.error[0].value
    assert "plan_h" not in at.error[0].value  # the words on the page, not internal names
    assert usecases.get_settings(usecases.init_db(store))["status_limits"]["due_h"] == 250.0
    inputs = {n.label: n for n in at.number_input}
    inputs["due soon at or below [h]"].set_value(500.0)
    at.button[0].click().run()
    assert at.success, [e.value for e in at.error]
    assert usecases.get_settings(usecases.init_db(store))["status_limits"]["due_h"] == 500.0
    at.switch_page("app_pages/fleet.py").run()  # AB-CONV (455 h) is now "due soon"
    table = ranking(at)
    assert table.loc[table["unit"] == "AB-CONV", "status"].iloc[0].endswith("due soon")


def test_plan_page_plans_the_urgent_unit_in_week_zero(store):
    at = start("plan")
    metrics = {m.label: m.value for m in at.metric}
    assert int(metrics["Rebuilds planned"]) >= 3
    assert len(at.get("plotly_chart")) == 2
    assert len(at.get("download_button")) == 3
    planned = next(d.value for d in at.dataframe if "on_time" in d.value.columns)
    assert list(planned["unit"].iloc[:2]) == ["AA-HOT", "AA-HOT"]
    monday = fx.AS_OF - timedelta(days=fx.AS_OF.weekday())  # week 0: the as-of's ISO week
    assert set(planned["week_start"].iloc[:2]) == {f"{monday:%G-W%V} (Mon {monday})"}


def test_launch_command_sets_address_port_upload_limit_and_no_usage_stats():
    from dashboards import launch

    cmd = launch.command("sqlite:///x.db", port=8765, host="0.0.0.0")
    flags = dict(zip(cmd[5::2], cmd[6::2], strict=True))
    assert cmd[1:5] == ["-m", "streamlit", "run", str(launch.APP)]
    assert flags["--server.port"] == "8765" and flags["--server.address"] == "0.0.0.0"
    assert flags["--server.maxUploadSize"] == "50" and flags["--server.headless"] == "true"
    assert flags["--browser.gatherUsageStats"] == "false"
    assert "sqlite:///x.db" not in cmd  # the URL travels in the environment
    assert launch.environment("sqlite:///x.db")["DRIVESPAN_DB"] == "sqlite:///x.db"
    with pytest.raises(ValueError, match="port must be between"):
        launch.command(port=0)


def test_due_weeks_figure_is_built_once_per_fleet_content():
    # shared by every session showing the same fleet, rebuilt when what it shows changes
    from dashboards import charts, data
    from tests.test_charts import AS_OF, fleet_frame

    data._due_weeks_figure.clear()
    f = fleet_frame()
    first = data.due_weeks_figure(f, AS_OF, 4)
    assert first.to_json() == charts.due_weeks_figure(f, AS_OF, weeks=4).to_json()
    assert data.due_weeks_figure(f.copy(), AS_OF, 4) is first  # another session's copy
    assert data.due_weeks_figure(f.assign(site="x"), AS_OF, 4) is first  # a column it ignores
    moved = f.assign(status=f["status"].iloc[::-1].to_numpy())  # new data, e.g. an upload
    other = data.due_weeks_figure(moved, AS_OF, 4)
    assert other is not first
    assert other.to_json() == charts.due_weeks_figure(moved, AS_OF, weeks=4).to_json()
    assert data.due_weeks_figure(f, AS_OF, 12) is not first
    assert data.due_weeks_figure(f.iloc[:3], AS_OF, 4) is not first
