import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from geo3d.logs.hydraulic import GAMMA_W, k_from_injection, net_pressure_for_k, shape_factor


def test_gamma_w_from_standard_gravity():
    # NIST SP 811: g = 9.80665 m/s2; 1000 kg/m3 water -> 9.80665 kPa/m
    assert GAMMA_W == pytest.approx(1000 * 9.80665 / 1000)


def test_cylinder_shape_factor_worked_case():
    # Hvorslev (1951) cylinder: F = 2 pi L / ln(L/D + sqrt(1 + (L/D)^2)); by hand for
    # L = 0.30 m, D = 0.05 m: ln(6 + sqrt(37)) = 2.491779 -> F = 0.756470 m
    assert shape_factor("cylinder", length=0.30, diameter=0.05) == pytest.approx(0.756470, abs=1e-6)


def test_long_cylinder_approaches_2pil_over_ln_2l_over_d():
    # Hvorslev (1951): for L/D > 4, F ~ 2 pi L / ln(2 L / D)
    length, diameter = 1.0, 0.01
    approx = 2 * np.pi * length / np.log(2 * length / diameter)
    assert shape_factor("cylinder", length=length, diameter=diameter) == pytest.approx(
        approx, rel=1e-4
    )


def test_sphere_shape_factor_is_4_pi_r():
    # Hvorslev (1951): spherical intake F = 4 pi r
    assert shape_factor("sphere", diameter=0.02) == pytest.approx(4 * np.pi * 0.01)


def test_sphere_k_worked_case():
    # Hvorslev (1951), K = Q gamma_w / (F P): r = 1 cm, Q = 0.25 L/min, P = 50 kPa
    # -> K = (0.25e-3/60) * 9.80665 / (0.1256637 * 50) = 6.503e-6 m/s (by hand)
    f = shape_factor("sphere", diameter=0.02)
    assert k_from_injection(0.25e-3 / 60, 50.0, f) == pytest.approx(6.503e-6, rel=1e-3)


def test_non_positive_net_pressure_gives_nan():
    k = k_from_injection(np.array([1e-6, 1e-6]), np.array([0.0, -1.0]), 0.1)
    assert np.isnan(k).all()


@pytest.mark.parametrize(
    "bad", [dict(shape="cone", diameter=0.1), dict(shape="sphere", diameter=0)]
)
def test_bad_geometry_is_refused(bad):
    with pytest.raises(ValueError):
        shape_factor(**bad)


@given(
    st.floats(min_value=1e-8, max_value=1e-3),
    st.floats(min_value=1e-9, max_value=1e-2),
    st.floats(min_value=1e-3, max_value=1.0),
)
def test_forward_and_inverse_agree(flow, k, f):
    assert k_from_injection(flow, net_pressure_for_k(flow, k, f), f) == pytest.approx(k, rel=1e-9)
