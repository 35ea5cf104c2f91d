"""Tests of monitor.units: spellings and conversions against published factors."""

import numpy as np
import pytest

from monitor.ingest import units as U

# NIST SP 811 (2008), Appendix B.8: 1 psi = 6.894757 E+03 Pa; 1 gallon (U.S.) = 3.785412 E-03 m3
# (exact definition 231 in3 = 3.785411784 L).
PSI_IN_BAR = 0.06894757
US_GALLON_IN_L = 3.785411784


def test_psi_to_bar_nist_sp811():
    assert U.to_bar([1.0], "psi")[0] == pytest.approx(PSI_IN_BAR, rel=1e-6)
    assert U.to_bar(np.array([1.0]), "PSI")[0] == pytest.approx(0.0689476, rel=1e-6)


def test_us_gallon_per_minute_nist_sp811():
    assert U.to_lpm([1.0], "gpm")[0] == pytest.approx(US_GALLON_IN_L, rel=1e-9)
    assert U.to_lpm([2.0], "gal/min")[0] == pytest.approx(2 * US_GALLON_IN_L, rel=1e-9)


def test_fahrenheit_fixed_points():
    # definition of the Fahrenheit scale: water boils at 212 degF = 100 degC, freezes at 32 degF
    out = U.to_celsius([212.0, 32.0, -40.0], "°F")
    np.testing.assert_allclose(out, [100.0, 0.0, -40.0], atol=1e-9)
    np.testing.assert_allclose(U.to_celsius([50.0], "degC"), [50.0])


def test_mpa_and_kpa_to_bar():
    # SI definition: 1 bar = 1e5 Pa, so 1 MPa = 10 bar and 1 kPa = 0.01 bar
    assert U.to_bar([1.0], "MPa")[0] == pytest.approx(10.0, rel=1e-12)
    assert U.to_bar([250.0], "kpa")[0] == pytest.approx(2.5, rel=1e-12)
    assert U.to_bar([7.5], "bar")[0] == 7.5


def test_c_and_f_are_temperatures_not_light_or_farad():
    assert U.normalise_unit("temperature", "c") == "c"
    assert U.normalise_unit("temperature", "F") == "f"
    assert U.to_celsius([20.0], "c")[0] == pytest.approx(20.0)


def test_vector_equals_scalar_and_nan_passes_through():
    vec = U.to_bar(np.array([0.0, 1000.0, np.nan]), "psi")
    assert vec[1] == pytest.approx(U.to_bar([1000.0], "psi")[0])
    assert np.isnan(vec[2])


@pytest.mark.parametrize(
    ("kind", "spelling", "short"),
    [
        ("pressure", " MPa ", "mpa"),
        ("pressure", "kPa", "kpa"),
        ("flow", "L/min", "lpm"),
        ("flow", "GPM", "gpm"),
        ("temperature", "degF", "f"),
        ("temperature", "°C", "c"),
        ("speed", "RPM", "rpm"),
    ],
)
def test_normalise_accepted_spellings(kind, spelling, short):
    assert U.normalise_unit(kind, spelling) == short


def test_unknown_spelling_lists_accepted():
    with pytest.raises(ValueError, match="unknown pressure unit 'atm'.*bar, psi, mpa, kpa"):
        U.normalise_unit("pressure", "atm")
    with pytest.raises(ValueError, match="kind must be one of"):
        U.normalise_unit("torque", "Nm")


def test_ranges_and_out_of_range_mask():
    assert U.PRESSURE_RANGE_BAR == (0.0, 1000.0)
    assert U.SPEED_RANGE_RPM == (0.0, 10000.0)
    mask = U.out_of_range(np.array([-0.1, 0.0, 1000.0, 1000.1, np.nan]), U.PRESSURE)
    assert mask.tolist() == [True, False, False, True, False]
