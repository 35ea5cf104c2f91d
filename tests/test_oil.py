"""Tests of monitor.oil against published check values (ISO 4406:2021 scale-number table; ISO
3448:1992 grades; ASTM D341-20 and ASTM D2270-10 with their worked examples)."""

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from monitor.models import oil


@pytest.mark.parametrize(
    "grade, low, high",
    # ISO 3448:1992 Table 1 (REFERENCES §4)
    [(22, 19.8, 24.2), (32, 28.8, 35.2), (46, 41.4, 50.6), (68, 61.2, 74.8), (100, 90.0, 110.0)],
)
def test_iso_vg_limits(grade, low, high):
    assert oil.iso_vg_limits_mm2s(grade) == pytest.approx((low, high), rel=1e-9)
    assert oil.iso_vg_of((low + high) / 2) == grade


def test_iso_vg_errors_and_gaps():
    with pytest.raises(ValueError, match="iso_vg must be one of the ISO 3448 grades"):
        oil.iso_vg_limits_mm2s(45)
    assert oil.iso_vg_of(38.0) is None  # between VG 32 (max 35.2) and VG 46 (min 41.4)


def test_d341_reference_point():
    # REFERENCES §4, ASTM D341 check: 404 mm2/s at 40 degC, 28 mm2/s at 100 degC -> 60 degC
    a, b = oil.walther_coefficients(40.0, 404.0, 100.0, 28.0)
    assert float(oil.walther_viscosity_mm2s(60.0, a, b)) == pytest.approx(132.126, rel=1e-5)


def test_d341_identity_vector_and_edges():
    a, b = oil.walther_coefficients(40.0, 46.0, 100.0, 6.8)
    temps = np.array([40.0, 100.0, 70.0, np.nan, -300.0])
    nu = oil.walther_viscosity_mm2s(temps, a, b)
    np.testing.assert_allclose(nu[:2], [46.0, 6.8], rtol=1e-12)  # passes through its points
    assert nu[2] == pytest.approx(float(oil.walther_viscosity_mm2s(70.0, a, b)))
    assert 6.8 < nu[2] < 46.0
    assert np.isnan(nu[3]) and np.isnan(nu[4])
    with pytest.raises(ValueError, match="temp1_c and temp2_c must differ"):
        oil.walther_coefficients(40.0, 46.0, 40.0, 6.8)
    with pytest.raises(ValueError, match="nu2_mm2s must be a viscosity > 0"):
        oil.walther_coefficients(40.0, 46.0, 100.0, 0.0)


@pytest.mark.parametrize(
    "nu40, nu100, vi",
    # ASTM D2270-10 worked examples (REFERENCES §4), printed to 2 decimals
    [(73.30, 8.86, 92.43), (22.83, 5.05, 156.42), (53.47, 7.80, 111.31)],
)
def test_viscosity_index_d2270_examples(nu40, nu100, vi):
    assert float(oil.viscosity_index(nu40, nu100)) == pytest.approx(vi, abs=0.006)


def test_viscosity_index_vector_high_range_and_edges():
    nu40 = np.array([73.30, 22.83, 53.47])
    nu100 = np.array([8.86, 5.05, 7.80])
    vec = oil.viscosity_index(nu40, nu100)
    np.testing.assert_allclose(
        vec, [float(oil.viscosity_index(u, y)) for u, y in zip(nu40, nu100, strict=True)]
    )
    # ASTM D2270 Eqs. for Y > 70: hand-computed L = 0.8353*80^2 + 14.67*80 - 216 = 6303.52,
    # H = 0.1684*80^2 + 11.85*80 - 97 = 1928.76; U = 4000 -> VI = 100 (L-U)/(L-H) = 52.6548
    assert float(oil.viscosity_index(4000.0, 80.0)) == pytest.approx(52.6548, rel=1e-5)
    assert np.isnan(oil.viscosity_index(10.0, 1.9))


def test_viscosity_index_against_chemicals_package():
    # Independent implementation of ASTM D2270 in the `chemicals` package (optional oracle).
    chem = pytest.importorskip("chemicals.viscosity")
    rng = np.random.default_rng(7)
    for nu100 in rng.uniform(2.0, 120.0, 40):
        nu40 = nu100 * rng.uniform(3.0, 12.0)
        expected = chem.viscosity_index(nu40 * 1e-6, nu100 * 1e-6)
        assert float(oil.viscosity_index(nu40, nu100)) == pytest.approx(expected, rel=1e-9)


def test_vg46_vi100():
    # REFERENCES §4: ISO VG 46 with VI 100 -> nu100 6.7604; D341 line through
    # (40, 46) and (100, 6.7604): nu60 20.562, nu80 11.050, nu20 134.49 (computed, +-0.5 %)
    nu100 = oil.nu100_for_viscosity_index(46.0, 100.0)
    assert nu100 == pytest.approx(6.7604, abs=5e-5)
    a, b = oil.oil_line_from_spec(iso_vg=46, viscosity_index=100)
    nu = oil.walther_viscosity_mm2s([60.0, 80.0, 20.0], a, b)
    np.testing.assert_allclose(nu, [20.562, 11.050, 134.49], rtol=5e-3)


def test_oil_line_from_spec_forms_agree():
    a1, b1 = oil.oil_line_from_spec(iso_vg=46, nu100_mm2s=6.8)
    a2, b2 = oil.oil_line_from_spec(nu40_mm2s=46.0, nu100_mm2s=6.8)
    assert (a1, b1) == pytest.approx((a2, b2))
    a3, b3 = oil.oil_line_from_spec(nu40_mm2s=46.0, viscosity_index=100)
    a4, b4 = oil.oil_line_from_spec(iso_vg=46, viscosity_index=100)
    assert (a3, b3) == pytest.approx((a4, b4))


@pytest.mark.parametrize("vg, vi", [(32, 95.0), (46, 100.0), (68, 140.0), (460, 60.0)])
def test_stored_nu100_gives_the_same_line(vg, vi):
    # the registry import stores line_nu100_mm2s with the oil; a status passes it back as
    # nu100_mm2s and must get bit for bit the line it got by solving for it
    nu100 = oil.line_nu100_mm2s(iso_vg=vg, viscosity_index=vi)
    assert nu100 == oil.nu100_for_viscosity_index(float(vg), vi)
    solved = oil.oil_line_from_spec(iso_vg=vg, viscosity_index=vi)
    assert oil.oil_line_from_spec(iso_vg=vg, viscosity_index=vi, nu100_mm2s=nu100) == solved


def test_line_nu100_given_missing_or_unreachable():
    assert oil.line_nu100_mm2s(nu40_mm2s=46.0, nu100_mm2s=7) == 7.0
    assert oil.line_nu100_mm2s(iso_vg=46) is None
    assert oil.line_nu100_mm2s(viscosity_index=100) is None
    assert oil.line_nu100_mm2s(iso_vg=46, viscosity_index=2000.0) is None


def test_oil_line_from_spec_errors():
    with pytest.raises(ValueError, match="give iso_vg or nu40_mm2s"):
        oil.oil_line_from_spec(viscosity_index=100)
    with pytest.raises(ValueError, match="give viscosity_index or nu100_mm2s"):
        oil.oil_line_from_spec(iso_vg=46)
    with pytest.raises(ValueError, match="lies outside ISO VG 46"):
        oil.oil_line_from_spec(iso_vg=46, nu40_mm2s=60.0, viscosity_index=100)
    with pytest.raises(ValueError, match="cannot be reached"):
        oil.nu100_for_viscosity_index(46.0, 2000.0)


@given(st.floats(10.0, 500.0), st.floats(40.0, 160.0))
def test_nu100_for_vi_round_trip(nu40, vi):
    nu100 = oil.nu100_for_viscosity_index(nu40, vi)
    assert float(oil.viscosity_index(nu40, nu100)) == pytest.approx(vi, abs=1e-6)


@pytest.mark.parametrize(
    "counts, code",
    # REFERENCES §3, ISO 4406 Table 1 checks; a count on a limit stays in the lower number
    [((2900, 780, 35), "19/17/12"), ((2500, 640, 40), "18/16/12"), ((150, 45, 3.2), "14/13/9")],
)
def test_iso4406_codes(counts, code):
    assert oil.iso4406_code_from_counts(*counts) == code


def test_iso4406_limits_table():
    # ISO 4406 Table 1: upper limits of scale numbers 7, 13, 17, 22, 27, 28
    limits = {7: 1.3, 13: 80.0, 17: 1300.0, 22: 40000.0, 27: 1.3e6, 28: 2.5e6}
    for r, limit in limits.items():
        assert int(oil.iso4406_scale_number(limit)) == r
        assert int(oil.iso4406_scale_number(limit * 1.0001)) == r + 1
    nums = oil.iso4406_scale_number(np.array([0.0, 0.01, 0.011, 3e6]))
    np.testing.assert_array_equal(nums, [0, 0, 1, oil.ISO4406_ABOVE_28])
    with pytest.raises(ValueError, match="count_per_ml must be particle counts"):
        oil.iso4406_scale_number(-1.0)


def test_iso4406_parse_format_round_trip():
    assert oil.parse_iso4406("18/16/13") == (18, 16, 13)
    assert oil.parse_iso4406(" - / 15 / 12 ") == (None, 15, 12)
    assert oil.parse_iso4406(">28/22/18") == (29, 22, 18)
    for code in ("18/16/13", "-/15/12", ">28/>28/20"):
        assert oil.format_iso4406(*oil.parse_iso4406(code)) == code
    assert oil.iso4406_code_from_counts(None, 640, 40) == "-/16/12"
    assert oil.iso4406_code_from_counts(float("nan"), 640, 40) == "-/16/12"


@pytest.mark.parametrize("bad", ["18/16", "18-16-13", "18/16/29", "18/-/13", "a/b/c", ""])
def test_iso4406_parse_errors(bad):
    with pytest.raises(ValueError, match="ISO 4406 code"):
        oil.parse_iso4406(bad)


def test_iso4406_counts_must_be_cumulative():
    with pytest.raises(ValueError, match="must be cumulative"):
        oil.iso4406_code_from_counts(100, 200, 10)
    with pytest.raises(ValueError, match="r6 must be a scale number"):
        oil.format_iso4406(18, 30, 13)
