import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from geo3d.errors import LogFormatError
from geo3d.logs.pressure import (
    ToolLoss,
    fit_tool_loss,
    hydrostatic_pressure,
    net_pressure,
)

PSI = 6.894757  # kPa per psi, NIST SP 811
FOOT = 0.3048  # m per ft, NIST SP 811


def test_ten_metres_below_the_water_table_adds_98_0665_kpa():
    # gamma_w = 1000 kg/m3 * 9.80665 m/s2 (standard gravity, NIST SP 811) = 9.80665 kPa/m
    assert hydrostatic_pressure(17.0, 7.0) == pytest.approx(98.0665, abs=1e-9)


def test_hydrostatic_gradient_is_the_trade_rounded_0_433_psi_per_ft():
    # 0.433 psi/ft of fresh water (common practice), a value truncated from 0.4335;
    # stated tolerance 0.2 % (relative)
    psi_per_ft = hydrostatic_pressure(10.0 + FOOT, 10.0) / PSI
    assert psi_per_ft == pytest.approx(0.433, rel=2e-3)
    assert psi_per_ft == pytest.approx(0.4335, abs=1e-4)  # 9.80665*0.3048/6.894757, by hand


def test_no_hydrostatic_pressure_above_the_water_table():
    # by definition of hydrostatic pressure: zero above the free surface
    np.testing.assert_array_equal(hydrostatic_pressure([0.5, 2.9, 3.0], 3.0), [0.0, 0.0, 0.0])


@given(
    p_net=st.floats(0.0, 500.0),
    depth=st.floats(0.0, 40.0),
    dtw=st.floats(0.0, 20.0),
    p_atm=st.floats(60.0, 110.0),
    flow=st.floats(0.0, 1e-4),
)
def test_pressure_split_round_trip(p_net, depth, dtw, p_atm, flow):
    # invariant: P_total = P_atm + gamma_w*max(0, d - dtw) + tool loss + P_net
    loss = ToolLoss(c1=2.0e4, c2=1.0e8)
    total = p_atm + 9.80665 * max(0.0, depth - dtw) + loss(flow) + p_net
    back = net_pressure(
        total, depth=depth, depth_to_water=dtw, p_atm=p_atm, flow=flow, tool_loss=loss
    )
    assert back == pytest.approx(p_net, abs=1e-9)


def test_tool_loss_quadratic_through_zero_is_recovered():
    # invented open-water check from a known curve P = c1*Q + c2*Q^2 (synthetic case)
    q = np.array([1e-6, 3e-6, 5e-6, 8e-6])
    points = np.column_stack([q, 1.5e5 * q + 4.0e10 * q**2])
    loss = fit_tool_loss(points)
    assert loss.c1 == pytest.approx(1.5e5, rel=1e-6)
    assert loss.c2 == pytest.approx(4.0e10, rel=1e-6)
    assert loss(0.0) == 0.0


def test_tool_loss_single_point_is_a_line_and_empty_means_none():
    loss = fit_tool_loss([[5e-6, 2.0]])
    assert loss(10e-6) == pytest.approx(4.0)  # proportional by construction
    assert fit_tool_loss([])(1e-5) == 0.0


def test_tool_loss_rejects_malformed_points():
    with pytest.raises(LogFormatError, match="tool_loss"):
        fit_tool_loss([[1.0, 2.0, 3.0]])
    with pytest.raises(LogFormatError, match=">= 0"):
        fit_tool_loss([[-1e-6, 2.0]])
