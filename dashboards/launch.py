"""Start the dashboard as a Streamlit server in a child process.

The database URL reaches the app through the ``DRIVESPAN_DB`` environment variable
(the same variable the CLI reads), so the URL never shows in the process list; the
hash of an optional dashboard password (never the password) travels the same way in
``DRIVESPAN_DASHBOARD_PASSWORD_HASH`` (see :mod:`dashboards.gate`).
"""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

APP = Path(__file__).resolve().parent / "streamlit_app.py"
ROOT = APP.parent.parent
ENV_URL = "DRIVESPAN_DB"
ENV_PASSWORD_HASH = "DRIVESPAN_DASHBOARD_PASSWORD_HASH"
"""Same name as :data:`monitor.usecases.access.PASSWORD_HASH_ENV` (a test checks)."""
MAX_UPLOAD_MB = 50
"""Largest accepted upload [MB]; the upload page checks the same number in code."""


def command(
    db_url: str | None = None,
    port: int = 8501,
    host: str = "127.0.0.1",
    headless: bool = True,
    max_upload_mb: int = MAX_UPLOAD_MB,
) -> list[str]:
    """The ``python -m streamlit run`` command line for the dashboard.

    ``db_url`` is not part of the command (see :func:`run`); it is accepted here so the
    two functions take the same arguments.
    """
    if not 0 < int(port) < 65536:
        raise ValueError(f"port must be between 1 and 65535, got {port!r}")
    return [
        sys.executable, "-m", "streamlit", "run", str(APP),
        "--server.address", host,
        "--server.port", str(int(port)),
        "--server.headless", "true" if headless else "false",
        "--server.maxUploadSize", str(int(max_upload_mb)),
        "--server.fileWatcherType", "none",
        "--browser.gatherUsageStats", "false",
        "--client.toolbarMode", "minimal",
        "--theme.base", "light",
        "--theme.primaryColor", "#2F6690",
    ]  # fmt: skip


def environment(db_url: str | None = None, password_hash: str | None = None) -> dict[str, str]:
    """The child's environment: ours plus the database URL, the password hash (or none:
    an inherited one is removed) and the project on the path."""
    env = dict(os.environ)
    if db_url:
        env[ENV_URL] = db_url
    env.pop(ENV_PASSWORD_HASH, None)
    if password_hash:
        env[ENV_PASSWORD_HASH] = password_hash
    env["PYTHONPATH"] = os.pathsep.join(p for p in (str(ROOT), env.get("PYTHONPATH")) if p)
    return env


def run(
    db_url: str | None = None,
    port: int = 8501,
    host: str = "127.0.0.1",
    headless: bool = True,
    password_hash: str | None = None,
) -> subprocess.Popen:
    """Start the dashboard server and return its process (the caller stops it).

    ``db_url`` defaults to ``$DRIVESPAN_DB`` and then to the store's default SQLite
    file, as for the CLI. With ``password_hash`` (from
    :func:`monitor.usecases.access.hash_password`) the app asks for the password first.
    """
    return subprocess.Popen(
        command(db_url, port=port, host=host, headless=headless),
        env=environment(db_url, password_hash),
        cwd=str(ROOT),
    )
