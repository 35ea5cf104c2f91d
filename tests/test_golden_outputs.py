"""What a planner reads does not change by accident: ``rank --format json``, ``unit`` (table
and JSON) for three units and ``plan --format json`` on the demo fleet at a fixed as-of day
equal the recorded files in tests/data/golden byte for byte.

The files were recorded before the package was reorganised into layers (issue #11) and are
changed only on purpose, with the reason in the commit (regenerate them with
``python tests/test_golden_outputs.py``)."""

from __future__ import annotations

import sys
from pathlib import Path

import pytest
from click.testing import CliRunner

from monitor.cli import main

GOLDEN = Path(__file__).parent / "data" / "golden"
AS_OF = "2026-12-02"
CASES = {
    "rank.json": ["rank", "--format", "json"],
    "plan.json": ["plan", "--format", "json"],
    **{f"unit-{t}.json": ["unit", t, "--format", "json"] for t in ("GQ-02", "SW-14", "TH-09")},
    **{f"unit-{t}.txt": ["unit", t] for t in ("GQ-02", "SW-14", "TH-09")},
}


def _run(db_url: str, args: list[str]) -> str:
    result = CliRunner().invoke(main, [*args, "--as-of", AS_OF, "--db", db_url])
    assert result.exit_code == 0, result.output
    return result.stdout


@pytest.mark.parametrize("name", sorted(CASES))
def test_output_is_unchanged(full_demo, name):
    want = (GOLDEN / name).read_text(encoding="utf-8")
    assert _run(full_demo.db_url, CASES[name]) == want


if __name__ == "__main__":  # regenerate: python tests/test_golden_outputs.py
    import tempfile

    sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

    from monitor.usecases.demo import build_demo
    from tests.conftest import GOLDEN_END

    with tempfile.TemporaryDirectory() as tmp:
        demo = build_demo(Path(tmp) / "demo", end_date=GOLDEN_END)
        for name, args in CASES.items():
            (GOLDEN / name).write_text(_run(demo.db_url, args), encoding="utf-8")
    sys.exit(0)
