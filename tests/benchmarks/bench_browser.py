"""The dashboard's fleet page timed in a real browser (run by hand, not collected).

    python tests/benchmarks/bench_browser.py --db sqlite:////path/to/demo.db [--sessions 5]

Starts the dashboard server (``dashboards.launch.run``) on a free port and drives Debian's
``/usr/bin/chromium`` through playwright (never ``playwright install``). The page counts
as rendered when the fleet table has its rows, a plotly chart is drawn and Streamlit's
"running" indicator is gone. It reports:

- ``fresh_server_s``: from starting the server process to the first session's rendered
  fleet page (server start, first script run, cold caches);
- ``first_session_s``: that first page alone, from navigation;
- ``new_session_s``: ``--sessions`` more browser contexts (new sessions, the server and
  its caches warm), median and each, from navigation;
- the server's peak resident memory (``VmHWM``) and the load average.

Targets (issue 16): within 3 s from a fresh server, within 1.5 s for a new session warm.
"""

from __future__ import annotations

import argparse
import json
import os
import statistics
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

from tests.browser_support import CHROMIUM, FLAGS, free_port, wait_healthy  # noqa: E402

ROWS = "[data-testid='stDataFrame'] [role='row']"
RUNNING = "() => !document.querySelector(\"[data-testid='stStatusWidget']\")"


def render(browser, url: str) -> float:  # noqa: ANN001
    """Seconds from navigation to the rendered fleet page in a new browser context."""
    context = browser.new_context(viewport={"width": 1500, "height": 2200})
    try:
        page = context.new_page()
        t = time.perf_counter()
        page.goto(url)
        page.wait_for_selector(ROWS, timeout=120_000, state="attached")
        page.wait_for_selector(".js-plotly-plot", timeout=120_000, state="attached")
        page.wait_for_function(RUNNING, timeout=120_000)
        return time.perf_counter() - t
    finally:
        context.close()


def peak_mb(pid: int) -> float | None:
    try:
        for line in Path(f"/proc/{pid}/status").read_text().splitlines():
            if line.startswith("VmHWM:"):
                return int(line.split()[1]) / 1024
    except OSError:
        return None
    return None


def main() -> None:
    from playwright.sync_api import sync_playwright

    from dashboards import launch

    p = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    p.add_argument("--db", required=True, help="URL of a filled store (e.g. the demo's)")
    p.add_argument("--sessions", type=int, default=5)
    args = p.parse_args()
    load = [os.getloadavg()[0]]
    with sync_playwright() as pw:
        browser = pw.chromium.launch(executable_path=CHROMIUM, args=FLAGS)
        port = free_port()
        t0 = time.perf_counter()
        proc = launch.run(args.db, port=port)
        try:
            wait_healthy(port, proc)
            url = f"http://127.0.0.1:{port}/"
            first = render(browser, url)
            fresh = time.perf_counter() - t0
            warm = [render(browser, url) for _ in range(args.sessions)]
            server_mb = peak_mb(proc.pid)
        finally:
            proc.terminate()
            proc.wait(timeout=30)
            browser.close()
    load.append(os.getloadavg()[0])
    out = {
        "fresh_server_s": round(fresh, 2),
        "first_session_s": round(first, 2),
        "new_session_s_median": round(statistics.median(warm), 2),
        "new_session_s": [round(w, 2) for w in warm],
        "server_peak_mb": server_mb,
        "load_avg_1min": load,
    }
    print(json.dumps(out, indent=2))


if __name__ == "__main__":
    main()
