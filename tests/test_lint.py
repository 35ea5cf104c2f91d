"""The code stays as the style guide says: ruff lint and format (settings in pyproject.toml)."""

from __future__ import annotations

import shutil
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent


def _ruff(*args: str) -> subprocess.CompletedProcess:
    exe = shutil.which("ruff")
    cmd = [exe] if exe else [sys.executable, "-m", "ruff"]
    return subprocess.run([*cmd, *args], cwd=ROOT, capture_output=True, text=True)


@pytest.mark.parametrize("args", [("check", "."), ("format", "--check", ".")])
def test_ruff_is_clean(args):
    res = _ruff(*args)
    assert res.returncode == 0, res.stdout + res.stderr
