"""Tests of monitor.hydraulics against handbook check values (hydraulics handbooks, e.g. Exner et
al., Hydraulics: Basic Principles and Components)."""

import math

import numpy as np
import pytest

from monitor.models import hydraulics as hy


def test_pump_reference_example():
    # REFERENCES §5 (fluid-power handbooks): Vg 100, n 1500, dp 250, eta_v 0.95,
    # eta_mh 0.92 -> Q 142.5 L/min, T 432.486 N m, P_in 67.935 kW
    q = hy.pump_flow_lpm(100.0, 1500.0, 0.95)
    assert float(q) == pytest.approx(142.5, rel=1e-9)
    assert float(hy.pump_torque_nm(100.0, 250.0, 0.92)) == pytest.approx(432.486, rel=1e-6)
    p_in = hy.pump_input_power_kw(q, 250.0, 0.95 * 0.92)
    assert float(p_in) == pytest.approx(67.935, rel=1e-5)
    # the same power from torque and speed, P = T * 2 pi n / 60 (mechanics, hand-derived)
    t = hy.pump_torque_nm(100.0, 250.0, 0.92)
    assert float(t) * 2 * math.pi * 1500.0 / 60.0 / 1000.0 == pytest.approx(float(p_in))


def test_relief_loss_reference_and_us_units():
    # REFERENCES §5: 100 L/min across 400 bar -> 66.667 kW
    assert float(hy.throttle_power_kw(100.0, 400.0)) == pytest.approx(66.667, rel=1e-5)
    # US units, hp = gpm * psi / 1714 (handbooks); 100 L/min = 26.417 gpm, 400 bar =
    # 5801.5 psi (unit definitions), 1 hp = 0.7457 kW; the 1714 constant is rounded
    hp = hy.throttle_power_hp(100.0 / 3.785411784, 400.0 * 14.503773773)
    assert float(hp) * 0.745699872 == pytest.approx(66.667, rel=2e-3)


def test_motor_is_pump_reversed():
    # Motor: T = Vg dp eta_mh / (20 pi); n = 1000 Q eta_v / Vg (handbooks, REFERENCES §5)
    assert float(hy.motor_torque_nm(100.0, 250.0, 0.92)) == pytest.approx(
        100.0 * 250.0 * 0.92 / (20 * math.pi)
    )
    assert float(hy.motor_speed_rpm(142.5, 100.0, 0.95)) == pytest.approx(1353.75)
    # ideal (eta = 1) motor fed by an ideal pump of the same Vg turns at pump speed
    assert float(hy.motor_speed_rpm(hy.pump_flow_lpm(75.0, 2000.0), 75.0)) == pytest.approx(2000)
    # ideal motor output power equals the hydraulic power Q dp / 600
    assert float(hy.motor_output_power_kw(100.0, 400.0)) == pytest.approx(66.667, rel=1e-5)
    assert np.isinf(hy.motor_speed_rpm(10.0, 0.0))


def test_vectorised():
    vg = np.array([50.0, 100.0])
    np.testing.assert_allclose(hy.pump_flow_lpm(vg, 2000.0), [100.0, 200.0])
    np.testing.assert_allclose(hy.pump_torque_nm(vg, [0.0, 100.0]), [0.0, 10000 / (20 * math.pi)])


@pytest.mark.parametrize("bad", [0.0, 1.2, -0.5, float("nan")])
def test_bad_efficiency(bad):
    with pytest.raises(ValueError, match="volumetric_efficiency must be a fraction in"):
        hy.pump_flow_lpm(100.0, 1500.0, bad)
    with pytest.raises(ValueError, match="mechanical_efficiency must be a fraction in"):
        hy.motor_torque_nm(100.0, 250.0, bad)
