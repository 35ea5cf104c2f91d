"""The calibration page: its pure probability-plot builder, and the page in AppTest
against a real SQLite store (the invented fleet of ``tests/test_calibration_e2e.py``),
including accepting a life factor after the confirmation."""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from streamlit.testing.v1 import AppTest

from dashboards import charts
from monitor import usecases
from monitor.store import db
from tests import test_calibration_e2e as fx

APP = Path(__file__).resolve().parent.parent / "dashboards" / "streamlit_app.py"


def test_weibull_scale_is_the_linearising_transform():
    # ln(-ln(1 - F)): F = 1 - 1/e gives 0 (hand-computed: -ln(1/e) = 1, ln 1 = 0)
    assert charts.weibull_scale([1 - math.exp(-1)])[0] == pytest.approx(0.0, abs=1e-12)
    assert charts.weibull_scale([0.1])[0] == pytest.approx(math.log(-math.log(0.9)))


def test_weibull_plot_figure_has_points_line_bounds_reference_and_units():
    points = pd.DataFrame({"value": [0.3, 0.6], "unreliability": [0.2, 0.6]})
    q = np.array([0.05, 0.5])
    line = pd.DataFrame({"unreliability": q, "value": [0.2, 0.5], "low": [0.1, 0.4],
                         "high": [0.3, 0.6]})  # fmt: skip
    fig = charts.weibull_plot_figure(points, line, "consumed life fraction [-]", "t", 1.0)
    names = [t.name for t in fig.data]
    assert names == [
        "lower bound", "upper bound", "fitted Weibull (maximum likelihood)",
        "failures (adjusted ranks)", "rating: B10 = 1",
    ]  # fmt: skip
    assert fig.layout.xaxis.type == "log"
    assert fig.layout.xaxis.title.text == "consumed life fraction [-]"
    assert "[%]" in fig.layout.yaxis.title.text
    assert list(fig.data[3].y) == pytest.approx(np.log(-np.log1p(-np.array([0.2, 0.6]))))
    assert list(fig.data[0].x) == [0.1, 0.4]


def test_weibull_plot_figure_without_failures_says_so():
    empty = pd.DataFrame({"value": [], "unreliability": []})
    fig = charts.weibull_plot_figure(empty, empty, "operating hours [h]", "t")
    assert not fig.data and "no failures" in fig.layout.annotations[0].text


@pytest.fixture
def store(tmp_path, monkeypatch) -> str:
    url = f"sqlite:///{tmp_path / 'cal.db'}"
    engine = usecases.init_db(url)
    usecases.import_registry(engine, fx.registry(), "bend.yaml")
    assert usecases.upload(engine, fx.histograms(), "days.csv").status == usecases.ACCEPTED
    engine.dispose()
    monkeypatch.setenv("DRIVESPAN_DB", url)
    return url


def test_calibration_page_renders_and_accepts_after_confirmation(store):
    at = AppTest.from_file(str(APP), default_timeout=90)
    at.run()
    at.switch_page("app_pages/calibration.py").run()
    assert not at.exception, [e.value for e in at.exception]
    table = at.dataframe[0].value
    assert set(table["component_model"]) == {"KV-60", "KW-90"}
    assert len(at.get("plotly_chart")) == 2
    assert any("Accepting changes **KV-60**" in m.value for m in at.markdown)
    accept = at.button(key="cal_accept")
    assert accept.disabled  # nothing happens before the confirmation
    at.checkbox(key="cal_sure").check().run()
    at.button(key="cal_accept").click().run()
    assert not at.exception, [e.value for e in at.exception]
    assert any("accepted" in s.value for s in at.success)
    history = usecases.rating_history(db.make_engine(store))
    assert history["component_model"].tolist() == ["KV-60"]
    assert history["proposed_by"].tolist() == ["dashboard calibration page"]
