"""The demo fleet's calibration story: DS-P46 field lives give no evidence against the
rating, DS-P90 (a batch of undersized swashplate saddle bushes, demo_fleet/README.md)
fails well short of it, and ``drivespan demo`` names that finding."""

from __future__ import annotations

import pytest

from monitor import usecases
from monitor.cli.plan_demo import _calibration_line


@pytest.fixture(scope="module")
def demo_table(full_demo):
    engine = usecases.init_db(full_demo.db_url)
    table = usecases.calibrate(engine)
    return engine, table[table["mode"] == "bearing"].set_index("component_model")


def test_short_model_gets_a_life_factor_below_one(demo_table):
    row = demo_table[1].loc["DS-P90"]
    assert row["failures"] >= 3 and row["suspensions"] > 0
    assert row["suggested_life_factor"] is not None
    assert 0.0 < float(row["suggested_life_factor"]) < 1.0
    assert float(row["suggested_low"]) < float(row["suggested_life_factor"])
    # the shortfall is clear: even the upper bound of the factor lies below the rating
    assert float(row["suggested_high"]) < 1.0


def test_agreeing_model_shows_no_evidence_against_its_rating(demo_table):
    row = demo_table[1].loc["DS-P46"]
    assert row["suspensions"] > 0
    factor = row["suggested_life_factor"]
    if factor is None or factor != factor:  # no suggestion: the table says why
        assert "no life factor" in row["note"] or "no fit" in row["note"]
    else:
        assert float(row["suggested_low"]) <= 1.0 <= float(row["suggested_high"])


def test_demo_line_names_the_short_model(demo_table):
    line = _calibration_line(demo_table[0])
    assert line.startswith("calibration: DS-P90 fails short of its rating")
    row = demo_table[1].loc["DS-P90"]
    assert f"{row['failures']} failures, {row['suspensions']} suspensions" in line
