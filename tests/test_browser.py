"""End to end in headless Chromium: the real dashboard server on a temporary demo store.

Starts the app with ``dashboards.launch.run`` on a free port, drives it with
playwright's sync API in Debian's chromium, and saves a screenshot of every page
under ``test-output/`` (git-ignored).
"""

from __future__ import annotations

import socket
import time
import urllib.request
from datetime import date, timedelta
from pathlib import Path

import pytest

from dashboards import launch
from monitor import usecases
from monitor.store import queries
from tests import dashboard_fleet as fx

pytestmark = pytest.mark.browser

ROOT = Path(__file__).resolve().parent.parent
SHOTS = ROOT / "test-output"
CHROMIUM = "/usr/bin/chromium"
FLAGS = [
    "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
    "--disable-background-networking", "--disable-component-update", "--disable-sync",
]  # fmt: skip


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def wait_healthy(port: int, proc, timeout_s: float = 90.0) -> None:
    deadline = time.monotonic() + timeout_s
    while time.monotonic() < deadline:
        if proc.poll() is not None:
            raise RuntimeError(f"dashboard exited with code {proc.returncode}")
        try:
            with urllib.request.urlopen(f"http://127.0.0.1:{port}/_stcore/health", timeout=2):
                return
        except OSError:
            time.sleep(0.5)
    raise TimeoutError(f"dashboard on port {port} not healthy after {timeout_s} s")


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
    assert "Estimates only" in page.locator("[data-testid='stSidebar']").inner_text()
    page.screenshot(path=str(SHOTS / "fleet.png"), full_page=True)

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


def _counts(url: str) -> dict[str, int]:
    engine = usecases.init_db(url)
    try:
        with engine.connect() as conn:
            return queries.table_counts(conn)
    finally:
        engine.dispose()
