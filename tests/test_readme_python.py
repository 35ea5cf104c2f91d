"""The README's "Use from Python" example runs as written and ranks the sample fleet."""

from __future__ import annotations

import re
import shutil
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def test_readme_python_example_runs(tmp_path):
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    code = re.search(r"## Use from Python.*?```python\n(.*?)```", text, re.S).group(1)
    shutil.copytree(ROOT / "demo_fleet" / "sample", tmp_path / "demo_fleet" / "sample")
    out = subprocess.run(
        [sys.executable, "-c", code], cwd=tmp_path, capture_output=True, text=True, timeout=300
    )
    assert out.returncode == 0, out.stderr[-3000:]
    rows = [line.split() for line in out.stdout.strip().splitlines()]
    assert len(rows) == 3 and all(len(r) >= 4 for r in rows), out.stdout
    assert (tmp_path / "example.db").exists()
