"""End to end in headless Chromium: the real dashboard server on a temporary demo store.

Starts the app with ``dashboards.launch.run`` on a free port, drives it with
playwright's sync API in Debian's chromium, and saves a screenshot of every page
under ``test-output/`` (git-ignored).
"""

from __future__ import annotations

import re
from datetime import date, timedelta
from pathlib import Path

import pytest

from dashboards import launch
from monitor import usecases
from monitor.store import queries
from tests import dashboard_fleet as fx
from tests.browser_support import CHROMIUM, FLAGS, free_port, wait_healthy

pytestmark = pytest.mark.browser

ROOT = Path(__file__).resolve().parent.parent
SHOTS = ROOT / "test-output"


@pytest.fixture(scope="module")
def demo_store(tmp_path_factory) -> str:
    """The invented demo fleet (a small slice) plus the hand-checked fleet, up to today."""
    from demo_fleet.generate import generate

    folder = tmp_path_factory.mktemp("demo")
    url = f"sqlite:///{folder / 'demo.db'}"
    today = date.today()
    fx.build_store(url, folder / "checked", as_of=today)
    demo = generate(folder / "demo", seed=7, end_date=today - timedelta(days=1), years=1.0,
                    units_scale=0.1)  # fmt: skip
    engine = usecases.init_db(url)
    try:
        usecases.import_registry(engine, demo.registry_path.read_bytes(), "registry.yaml")
        results = usecases.ingest_paths(engine, demo.export_paths)
        assert {r.status for r in results} <= {"accepted"}, [r.summary for r in results]
        first = usecases.fleet_status(engine, today).iloc[0]
        # the checked fleet's AA-HOT has used 109 % of its life: no hours left, the
        # most urgent there is; among components with none left the contract breaks
        # ties by due date (all: the as-of date) then tag, and "AA-" sorts first
        assert first["unit"] == fx.MOST_URGENT and first["remaining_h"] == 0
    finally:
        engine.dispose()
    return url


@pytest.fixture(scope="module")
def server(demo_store):
    port = free_port()
    proc = launch.run(demo_store, port=port)
    try:
        wait_healthy(port, proc)
        yield f"http://127.0.0.1:{port}"
    finally:
        proc.terminate()
        try:
            proc.wait(timeout=15)
        except Exception:  # noqa: BLE001 - make sure the server is gone
            proc.kill()


@pytest.fixture
def page(server):
    from playwright.sync_api import sync_playwright

    SHOTS.mkdir(exist_ok=True)
    with sync_playwright() as p:
        browser = p.chromium.launch(executable_path=CHROMIUM, args=FLAGS)
        try:
            yield browser.new_page(viewport={"width": 1500, "height": 2200})
        finally:
            browser.close()


def settle(page, selector: str = "[data-testid='stAppViewContainer']") -> None:
    """Wait until the page's script has finished and charts have drawn."""
    page.wait_for_selector(selector, timeout=60_000, state="attached")
    page.wait_for_function(
        "() => !document.querySelector(\"[data-testid='stStatusWidget']\")", timeout=60_000
    )
    page.wait_for_timeout(1500)


def grid_rows(page) -> list[str]:
    """Text of the fleet table's rows (Streamlit renders an accessible table under the grid)."""
    rows = page.locator("[data-testid='stDataFrame'] [role='row']")
    return [rows.nth(i).inner_text() for i in range(rows.count())]


def test_fleet_unit_upload_plan_settings_in_chromium(page, server, demo_store):
    page.goto(server + "/")
    settle(page, "[data-testid='stDataFrame'] [role='row']")
    page.wait_for_selector(".js-plotly-plot")
    rows = grid_rows(page)
    assert rows[1].startswith(fx.MOST_URGENT), rows[:3]  # row 0 is the heading
    assert "estimates" in page.locator("[data-testid='stSidebar']").inner_text()
    page.screenshot(path=str(SHOTS / "fleet.png"), full_page=True)
    with page.expect_download() as got:  # the CSV is made when the button is clicked
        page.get_by_role("button", name="Download this table (CSV)").click()
    csv_lines = Path(got.value.path()).read_text(encoding="utf-8").splitlines()
    assert csv_lines[0].startswith("unit,") and fx.MOST_URGENT in csv_lines[1], csv_lines[:2]
    assert len(csv_lines) == 1 + _counts(demo_store)["component"]  # every drive, no filter

    page.get_by_role("button", name="Open unit").click()
    page.wait_for_url(f"**/unit?unit={fx.MOST_URGENT}")
    settle(page, "h1:has-text('Unit AA-HOT')")
    page.wait_for_selector(".js-plotly-plot")
    assert page.locator(".js-plotly-plot").count() == 10
    page.screenshot(path=str(SHOTS / "unit.png"), full_page=True)

    before = _counts(demo_store)
    page.goto(server + "/upload")
    settle(page, "[data-testid='stFileUploader']")
    page.locator("[data-testid='stFileUploader'] input[type='file']").set_input_files(
        files=[
            {
                "name": "qa-mild-next.csv",
                "mimeType": "text/csv",
                "buffer": fx.good_upload(date.today()),
            }
        ]  # fmt: skip
    )
    page.get_by_role("button", name="Check and store").click()
    settle(page, "text=Result per file")
    page.wait_for_selector("text=The fleet ranking now includes the accepted files.")
    assert _counts(demo_store)["upload_file"] == before["upload_file"] + 1
    page.screenshot(path=str(SHOTS / "upload.png"), full_page=True)

    page.locator("[data-testid='stFileUploader'] input[type='file']").set_input_files(
        files=[
            {"name": "broken.csv", "mimeType": "text/csv", "buffer": fx.broken_upload(date.today())}
        ]  # fmt: skip
    )
    page.get_by_role("button", name="Check and store").click()
    settle(page, "text=was rejected; nothing from it was stored")
    assert _counts(demo_store)["upload_file"] == before["upload_file"] + 1
    page.screenshot(path=str(SHOTS / "upload-rejected.png"), full_page=True)

    for name in ("plan", "settings"):
        page.goto(f"{server}/{name}")
        settle(page, "h1")
        page.screenshot(path=str(SHOTS / f"{name}.png"), full_page=True)
    assert page.locator("text=Fleet registry").count() >= 1


PAGES = {
    "fleet": "Fleet condition",
    "unit": f"Unit {fx.MOST_URGENT}",
    "plan": "Rebuild plan",
    "calibration": "Calibration",
    "upload": "Upload data",
    "settings": "Settings",
}
"""Each page's address (as a bookmark would hold it) and its heading."""

VIEWPORTS = {"desktop": (1600, 1000), "phone": (390, 844)}
INTERNALS = re.compile(r"\bNone\b|\bNaN\b|\bnan\b|Traceback|sqlite:/|postgresql:/")


@pytest.fixture(params=list(VIEWPORTS))
def sized_page(request, server):
    from playwright.sync_api import sync_playwright

    SHOTS.mkdir(exist_ok=True)
    width, height = VIEWPORTS[request.param]
    with sync_playwright() as p:
        browser = p.chromium.launch(executable_path=CHROMIUM, args=FLAGS)
        try:
            yield request.param, browser.new_page(viewport={"width": width, "height": height})
        finally:
            browser.close()


def _main_text(page) -> str:
    return page.locator("[data-testid='stMain']").inner_text()


def test_every_page_at_desktop_and_phone_width(sized_page, server):
    name, page = sized_page
    width, height = VIEWPORTS[name]
    for path, heading in PAGES.items():
        query = f"?unit={fx.MOST_URGENT}" if path == "unit" else ""
        page.goto(f"{server}/{path}{query}")  # a bookmarked address opens its page
        settle(page, f"h1:has-text('{heading}')")
        assert "not found" not in page.locator("body").inner_text().lower(), (name, path)
        assert page.url.split("?")[0].endswith(f"/{path}"), page.url
        caution = page.locator("[data-testid='stMain'] [data-testid='stCaptionContainer']",
                               has_text="accumulators").first  # fmt: skip
        assert caution.is_visible(), (name, path)  # on the page itself, not in the sidebar
        text = caution.inner_text()
        assert "lock out and tag out" in text and "qualified technicians" in text
        if path == "fleet":
            _check_attention_first(page, height)
        main = _main_text(page)
        found = INTERNALS.findall(main)
        assert not found, (name, path, found)
        assert page.evaluate("document.documentElement.scrollWidth") <= width + 1, (name, path)
        page.screenshot(path=str(SHOTS / f"{path}-{name}-fold.png"))  # what shows first
        _whole_page_shot(page, SHOTS / f"{path}-{name}.png", width, height)


def _whole_page_shot(page, target: Path, width: int, height: int) -> None:
    """A screenshot of the whole page: the app scrolls inside its own container, so the
    window is made as tall as that content for the shot, then set back."""
    tall = page.evaluate(
        "Math.max(...[...document.querySelectorAll('[data-testid=stMain], "
        "[data-testid=stAppViewContainer], section')].map(e => e.scrollHeight))"
    )
    page.set_viewport_size({"width": width, "height": min(max(height, tall + 40), 12000)})
    page.wait_for_timeout(1500)
    page.screenshot(path=str(target), full_page=True)
    page.set_viewport_size({"width": width, "height": height})


def test_the_root_address_opens_the_fleet_page_under_its_address(page, server):
    page.goto(server + "/")
    settle(page, "h1:has-text('Fleet condition')")
    page.wait_for_url("**/fleet")
    assert "not found" not in page.locator("body").inner_text().lower()


def _check_attention_first(page, height: int) -> None:
    """The attention list starts above the fold, with its first drive, status and why."""
    page.wait_for_selector(".ds-att tr", timeout=60_000)  # drawn after the heading
    box = page.locator(".ds-att")
    assert box.count() == 1
    first = box.locator("tr").nth(1)
    top = first.bounding_box()
    assert top is not None and top["y"] + top["height"] <= height, top
    row = first.inner_text()
    assert fx.MOST_URGENT in row and "act now" in row and "limit reached" in row, row
    assert "with stale data" in box.inner_text()


def _counts(url: str) -> dict[str, int]:
    engine = usecases.init_db(url)
    try:
        with engine.connect() as conn:
            return queries.table_counts(conn)
    finally:
        engine.dispose()
