"""Driving Debian's Chromium against a dashboard served on this machine: the browser, its
flags (this machine's closed network needs the background services off) and waiting for
the server. Shared by tests/test_browser.py and tests/benchmarks/bench_browser.py."""

from __future__ import annotations

import socket
import time
import urllib.request

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
            time.sleep(0.05)
    raise TimeoutError(f"dashboard on port {port} not healthy after {timeout_s} s")
