"""Unit report sentences for drives that lack some data."""

from __future__ import annotations

import math

from monitor.fleet.detail import _oil_sentence


def test_oil_sentence_is_left_out_for_a_drive_without_ledger_values():
    # a drive without bearing data has no oil-condition factor; in a status frame its
    # source reads NaN, not None (this raised KeyError: nan in `drivespan unit`)
    for missing in (None, math.nan):
        assert _oil_sentence({"oil_factor_source": missing, "position": "motor"}) is None


def test_oil_sentence_names_the_temperature_and_where_it_came_from():
    row = {
        "oil_factor_source": "model",
        "oil_temp_c": 50.0,
        "position": "pump",
        "contamination_level": "slight contamination",
        "contamination_ec": 0.4,
    }
    text = _oil_sentence(row)
    assert "oil factor at 50 degC (the component model's operating_temp_c)" in text
    assert "eC 0.40" in text
