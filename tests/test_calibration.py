"""Tests for monitor.fleet.calibration: the model-against-field table."""

from __future__ import annotations

import json
import math

import numpy as np
import pandas as pd
import pytest
from scipy import optimize, stats

from monitor.fleet.calibration import (
    CALIBRATION_COLUMNS,
    calibration_table,
    check_lives,
    mode_sample,
    table_records,
)
from monitor.models.weibull import fit_weibull

# An invented fleet: two pump models at two invented sites. Each row is one life.
LIVES = pd.DataFrame(
    [
        # model,   site,       reason,        ended, consumed_fraction, operating_h
        ("VP-210", "Kestrel", "failure", True, 0.8, 5000.0),
        ("VP-210", "Kestrel", "failure", True, 1.1, 7000.0),
        ("VP-210", "Brackwater", "failure", True, 0.6, 4000.0),
        ("VP-210", "Brackwater", "wear_limit", True, 0.9, 6500.0),
        ("VP-210", "Kestrel", "preventive", True, 0.5, 3000.0),
        ("VP-210", "Brackwater", None, False, 0.4, 2500.0),  # still running
        ("VP-210", "Kestrel", "wear_limit", True, 1.3, 8000.0),
        ("VP-210", "Kestrel", "other", True, math.nan, 100.0),  # no ledger value
        ("VP-90", "Kestrel", "failure", True, 0.7, 3900.0),
        ("VP-90", "Kestrel", None, True, 0.2, 1200.0),  # old event without a reason
    ],
    columns=["component_model", "site", "reason", "ended", "consumed_fraction", "operating_h"],
)


def _tight_fmin(func, x0, args=(), disp=0):
    return optimize.fmin(func, x0, args=args, disp=disp, xtol=1e-12, ftol=1e-14)


@pytest.fixture(scope="module")
def table():
    return calibration_table(LIVES)


def row(frame, model, mode, site=None):
    match = frame[(frame.component_model == model) & (frame["mode"] == mode)]
    if site is not None:
        match = match[match.site == site]
    assert len(match) == 1
    return match.iloc[0]


def test_columns_and_rows(table):
    assert list(table.columns) == list(CALIBRATION_COLUMNS)
    assert table[["component_model", "mode"]].values.tolist() == [
        ["VP-210", "bearing"],
        ["VP-210", "wear_limit"],
        ["VP-90", "bearing"],
        ["VP-90", "wear_limit"],
    ]
    assert table.site.isna().all()
    assert set(table.basis) == {"consumed_fraction", "operating_h"}


def test_mode_samples_are_the_hand_chosen_values():
    clean = check_lives(LIVES[LIVES.component_model == "VP-210"])
    # Bearing mode, by hand: the three `failure` lives fail; the wear-limit, preventive and
    # running lives are suspended at their consumed fraction; the NaN life is left out.
    failures, suspensions, left_out = mode_sample(clean, "bearing")
    assert sorted(failures) == [0.6, 0.8, 1.1]
    assert sorted(suspensions) == [0.4, 0.5, 0.9, 1.3]
    assert left_out == 1
    # Wear-limit mode, by hand: the two `wear_limit` lives fail; every other life, the
    # bearing failures included, is suspended at its operating hours.
    failures, suspensions, left_out = mode_sample(clean, "wear_limit")
    assert sorted(failures) == [6500.0, 8000.0]
    assert sorted(suspensions) == [100.0, 2500.0, 3000.0, 4000.0, 5000.0, 7000.0]
    assert left_out == 0


def test_bearing_row_gives_a_life_factor(table):
    got = row(table, "VP-210", "bearing")
    assert (got.failures, got.suspensions) == (3, 4)
    fit = fit_weibull([0.6, 0.8, 1.1], [0.4, 0.5, 0.9, 1.3], confidence=0.90)
    for name in ("shape", "scale", "b10", "b10_low", "b10_high", "shape_low", "scale_high"):
        assert got[name] == pytest.approx(getattr(fit, name), rel=1e-12)
    # Independent check of the point estimate with scipy's censored fit; its default
    # Nelder-Mead tolerance stops ~1e-5 short on this flat 7-life likelihood, so tighten it.
    data = stats.CensoredData(uncensored=[0.6, 0.8, 1.1], right=[0.4, 0.5, 0.9, 1.3])
    shape, _, scale = stats.weibull_min.fit(data, floc=0, optimizer=_tight_fmin)
    assert got["shape"] == pytest.approx(shape, rel=1e-7)
    assert got.scale == pytest.approx(scale, rel=1e-7)
    # The suggested life factor is the observed B10 of the consumed fraction.
    assert got.suggested_life_factor == pytest.approx(fit.b10, rel=1e-12)
    assert (got.suggested_low, got.suggested_high) == pytest.approx((fit.b10_low, fit.b10_high))
    assert "1 life without a positive consumed_fraction left out" in got.note


def test_wear_limit_row_is_fitted_without_a_factor(table):
    got = row(table, "VP-210", "wear_limit")
    assert (got.failures, got.suspensions) == (2, 6)
    fit = fit_weibull([6500.0, 8000.0], [100.0, 2500.0, 3000.0, 4000.0, 5000.0, 7000.0])
    assert got.b10 == pytest.approx(fit.b10, rel=1e-12)
    assert got.suggested_life_factor is None or math.isnan(got.suggested_life_factor)
    assert "life factor from the bearing mode only" in got.note


def test_too_few_failures_gives_no_fit_and_says_why(table):
    got = row(table, "VP-90", "bearing")
    # One failure; the reason-less ended life counts as `other`, so it is a suspension.
    assert (got.failures, got.suspensions) == (1, 1)
    assert np.isnan(got[list(CALIBRATION_COLUMNS[6:15])].astype(float)).all()
    assert "no fit: 1 failure, a fit needs at least 2" in got.note
    assert "no life factor: 1 failure, a suggestion needs at least 3" in got.note


def test_split_by_site():
    by_site = calibration_table(LIVES, by_site=True)
    assert sorted(set(zip(by_site.component_model, by_site.site, strict=True))) == [
        ("VP-210", "Brackwater"),
        ("VP-210", "Kestrel"),
        ("VP-90", "Kestrel"),
    ]
    kestrel = row(by_site, "VP-210", "bearing", "Kestrel")
    # By hand: failures 0.8 and 1.1; suspensions preventive 0.5 and wear-limit 1.3.
    assert (kestrel.failures, kestrel.suspensions) == (2, 2)
    assert kestrel.b10 == pytest.approx(fit_weibull([0.8, 1.1], [0.5, 1.3]).b10, rel=1e-12)
    assert kestrel.suggested_life_factor is None or math.isnan(kestrel.suggested_life_factor)
    assert "no life factor: 2 failures, a suggestion needs at least 3" in kestrel.note
    brackwater = row(by_site, "VP-210", "bearing", "Brackwater")
    # By hand: failure 0.6; suspensions wear-limit 0.9 and running 0.4.
    assert (brackwater.failures, brackwater.suspensions) == (1, 2)
    assert math.isnan(brackwater["shape"]) and "no fit: 1 failure" in brackwater.note


def test_records_are_json_ready(table):
    records = table_records(table)
    assert [list(r) for r in records] == [list(CALIBRATION_COLUMNS)] * len(records)
    text = json.dumps(records, allow_nan=False)  # raises on any NaN left in
    loaded = json.loads(text)
    assert loaded[2]["shape"] is None and loaded[2]["suggested_life_factor"] is None
    assert loaded[0]["suggested_life_factor"] == pytest.approx(table.b10.iloc[0])
    assert loaded[0]["failures"] == 3 and loaded[0]["site"] is None


def test_empty_lives_give_an_empty_table():
    empty = calibration_table(LIVES.iloc[0:0])
    assert empty.empty and list(empty.columns) == list(CALIBRATION_COLUMNS)


@pytest.mark.parametrize(
    ("change", "match"),
    [
        (lambda df: df.drop(columns="reason"), r"missing column\(s\) \['reason'\]"),
        (lambda df: df.assign(reason="seized"), r"`reason` holds \['seized'\]; valid reasons"),
        (lambda df: df.assign(ended="maybe"), r"`ended` must hold true or false"),
        (lambda df: df.assign(operating_h="long"), r"`operating_h` must hold numbers"),
    ],
)
def test_bad_lives_raise(change, match):
    with pytest.raises(ValueError, match=match):
        calibration_table(change(LIVES.copy()))


def test_bad_arguments_raise():
    with pytest.raises(ValueError, match=r"confidence must be a level strictly between 0 and 1"):
        calibration_table(LIVES, confidence=90)
    with pytest.raises(ValueError, match=r"mode must be one of \('bearing', 'wear_limit'\)"):
        mode_sample(check_lives(LIVES), "seal")
    with pytest.raises(ValueError, match=r"lives must be a pandas DataFrame"):
        calibration_table([{"component_model": "VP-210"}])
