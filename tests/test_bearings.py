"""Tests of monitor.bearings against ISO 281:2007 check values (ISO 281:2007: basic rating life,
reliability factor a1 table, rated viscosity, aISO)."""

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from monitor.models import bearings as b

# ISO 281:2007, table of the reliability factor a1 (2 significant figures).
A1_TABLE = [
    (90, 1.0), (95, 0.64), (96, 0.55), (97, 0.47), (98, 0.37), (99, 0.25), (99.2, 0.22),
    (99.4, 0.19), (99.6, 0.16), (99.8, 0.12), (99.9, 0.093), (99.92, 0.087),
    (99.94, 0.080), (99.95, 0.077),
]  # fmt: skip


def test_basic_life_ball_iso281():
    # REFERENCES §1 (ISO 281:2007 Eq. 1): ball, C 30 kN, P 3 kN, 1500 rpm
    assert b.basic_rating_life_mrev(30.0, 3.0, "ball") == pytest.approx(1000.0, rel=1e-9)
    assert b.basic_rating_life_h(30.0, 3.0, 1500.0, "ball") == pytest.approx(11111.11, rel=1e-6)


def test_basic_life_roller_iso281():
    # REFERENCES §1 (ISO 281:2007 Eq. 1): roller, C 100 kN, P 10 kN, 2000 rpm
    assert b.basic_rating_life_mrev(100.0, 10.0, "roller") == pytest.approx(2154.4347, rel=1e-6)
    assert b.basic_rating_life_h(100.0, 10.0, 2000.0, "roller") == pytest.approx(17953.62, rel=1e-6)


def test_basic_life_scaling_and_edges():
    # Scaling law of Eq. (1): doubling the load divides the life by 2^p.
    l1 = b.basic_rating_life_h(100.0, 10.0, 2000.0, "roller")
    l2 = b.basic_rating_life_h(100.0, 20.0, 2000.0, "roller")
    assert l1 / l2 == pytest.approx(2 ** (10 / 3), rel=1e-12)
    assert np.isinf(b.basic_rating_life_h(100.0, 0.0, 2000.0, "ball"))
    assert np.isnan(b.basic_rating_life_h(100.0, -1.0, 2000.0, "ball"))
    vec = b.basic_rating_life_h(100.0, np.array([10.0, 20.0]), 2000.0, "roller")
    np.testing.assert_allclose(vec, [l1, l2], rtol=1e-12)


def test_bad_bearing_type():
    with pytest.raises(ValueError, match="bearing_type must be one of"):
        b.basic_rating_life_mrev(10.0, 1.0, "needle")


@pytest.mark.parametrize("pct, expected", A1_TABLE)
def test_a1_table(pct, expected):
    # ISO 281:2007, reliability factor table: the printed value itself at a table point
    assert float(b.reliability_factor(pct)) == expected


@pytest.mark.parametrize(
    "pct, expected",
    # hand-computed from a1 = 0.95 (ln(100/S) / ln(100/90))^(2/3) + 0.05 (ISO 281:2007):
    # 92.5 %: ln(100/92.5) / ln(100/90) = 0.73995, ^(2/3) = 0.81809 -> 0.8272;
    # 99.5 %: ln(100/99.5) / ln(100/90) = 0.047575, ^(2/3) = 0.13130 -> 0.1747;
    # 99.93 %: ln(100/99.93) / ln(100/90) = 0.0066462, ^(2/3) = 0.035349 -> 0.08358
    [(92.5, 0.8272), (99.5, 0.1747), (99.93, 0.08358)],
)
def test_a1_between_table_points_closed_form(pct, expected):
    got = float(b.reliability_factor(pct))
    assert got == pytest.approx(expected, abs=2e-4)
    # and it lies between the printed neighbours
    below = max(a for p, a in A1_TABLE if p < pct)
    above = min(a for p, a in A1_TABLE if p > pct)
    assert above < got < below


def test_a1_table_points_are_the_closed_form_rounded():
    # ISO 281:2007 prints the closed form to two significant figures: the printed value
    # and the formula differ by at most half a unit of the last printed digit.
    for pct, printed in A1_TABLE:
        exact = 0.95 * (np.log(100 / pct) / np.log(100 / 90)) ** (2 / 3) + 0.05
        digit = 10 ** (np.floor(np.log10(printed)) - 1)
        assert abs(exact - printed) <= 0.5 * digit + 1e-12, pct


def test_a1_vectorised_and_identity():
    pcts = np.array([p for p, _ in A1_TABLE] + [92.5, 99.5])
    vec = b.reliability_factor(pcts)
    assert vec[0] == 1.0  # ISO 281: a1 = 1 at 90 %
    np.testing.assert_array_equal(vec, [float(b.reliability_factor(p)) for p in pcts])
    np.testing.assert_array_equal(vec[: len(A1_TABLE)], [a for _, a in A1_TABLE])
    assert np.all(np.diff(vec[: len(A1_TABLE)]) < 0)


@pytest.mark.parametrize("pct", [89.9, 99.96, 100.0, float("nan")])
def test_a1_outside_range(pct):
    with pytest.raises(ValueError, match="reliability_pct must be between 90"):
        b.reliability_factor(pct)


@pytest.mark.parametrize(
    "speed, dm, expected",
    # REFERENCES §1, ISO 281:2007 rated viscosity equations
    [(500.0, 50.0, 36.6085), (1000.0, 50.0, 20.1246), (2400.0, 60.0, 11.8585)],
)
def test_rated_viscosity(speed, dm, expected):
    assert float(b.rated_viscosity_mm2s(speed, dm)) == pytest.approx(expected, rel=1e-5)


def test_viscosity_ratio_clamps():
    # ISO 281:2007 clause 6.3.3: kappa > 4 taken as 4; kappa < 0.1 outside the method
    k = b.viscosity_ratio([100.0, 20.0, 0.5], 10.0)
    np.testing.assert_allclose(k[:2], [4.0, 2.0])
    assert np.isnan(k[2])


@pytest.mark.parametrize(
    "kappa, x, kind, expected",
    [  # REFERENCES §1, computed from the ISO 281:2007 aISO equations
        (1.0, 0.1, "ball", 2.4305),
        (0.5, 0.2, "ball", 0.8617),
        (1.0, 0.5, "ball", 50.0),  # the cap
        (0.5, 0.2, "roller", 0.2443),
        (1.0, 1.0, "roller", 5.3106),
        (0.3, 0.0, "ball", 0.1),
        (2.0, 0.0, "roller", 0.1),
    ],
)
def test_aiso_reference(kappa, x, kind, expected):
    assert float(b.life_modification_factor(kappa, x, kind)) == pytest.approx(expected, abs=5e-5)


def test_aiso_edges_and_vector():
    a = b.life_modification_factor([1.0, 0.05, 4.5, 1.0], [np.inf, 0.1, 0.1, -1.0], "ball")
    assert a[0] == 50.0  # no load: unbounded life, capped
    assert np.all(np.isnan(a[1:]))  # kappa outside 0.1-4, negative x
    ks = np.array([0.2, 0.5, 1.5, 3.0])
    vec = b.life_modification_factor(ks, 0.3, "roller")
    np.testing.assert_allclose(
        vec, [float(b.life_modification_factor(k, 0.3, "roller")) for k in ks]
    )


@given(
    st.floats(0.1, 4.0),
    st.floats(0.0, 3.0),
    st.floats(0.0, 3.0),
    st.sampled_from(["ball", "roller"]),
)
def test_aiso_monotone_in_x(kappa, x1, x2, kind):
    # Cleaner oil or lighter load (larger x) never shortens the life; always within 0.1-50.
    lo, hi = sorted((x1, x2))
    a_lo = float(b.life_modification_factor(kappa, lo, kind))
    a_hi = float(b.life_modification_factor(kappa, hi, kind))
    assert a_lo <= a_hi + 1e-12
    assert 0.0 < a_lo <= 50.0


def test_contamination_factor_guide():
    # ISO 281:2007 eC guide: normal cleanliness 0.6-0.5 (dm < 100) and 0.8-0.6 (dm >= 100)
    assert b.contamination_factor("normal", 60.0) == pytest.approx(0.55)
    assert b.contamination_factor("normal", 150.0, position=0.0) == pytest.approx(0.6)
    assert b.contamination_factor("high", 150.0, position=1.0) == pytest.approx(0.9)
    assert b.contamination_factor("very severe", 60.0) == 0.0
    assert b.contamination_factor("extreme", 60.0) == 1.0
    with pytest.raises(ValueError, match="level must be one of"):
        b.contamination_factor("dirty", 60.0)
    with pytest.raises(ValueError, match="position must be between 0 and 1"):
        b.contamination_factor("normal", 60.0, position=2.0)


def test_iso4406_mapping_default_and_override():
    # Mapping is the module's documented assumption (common practice, no source).
    assert b.cleanliness_level_from_iso4406("-/13/10") == "high"
    assert b.cleanliness_level_from_iso4406("17/15/12") == "normal"
    assert b.cleanliness_level_from_iso4406("22/18/13") == "slight"
    assert b.cleanliness_level_from_iso4406(">28/>28/>28") == "very severe"
    custom = ((13, "normal"), (29, "typical"))
    assert b.cleanliness_level_from_iso4406("22/18/13", mapping=custom) == "normal"
    assert b.contamination_factor_from_iso4406("22/18/13", 60.0, mapping=custom) == pytest.approx(
        0.55
    )
    with pytest.raises(ValueError, match="does not cover"):
        b.cleanliness_level_from_iso4406("22/18/17", mapping=((16, "normal"),))
    with pytest.raises(ValueError, match="ISO 4406 code"):
        b.cleanliness_level_from_iso4406("22-18-13")
