import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from geo3d.errors import Geo3dError, UnitError
from geo3d.units import factor, from_internal, to_internal


@pytest.mark.parametrize(
    ("unit", "quantity", "expected"),
    [
        ("ft", "length", 0.3048),  # NIST SP 811: 1 ft = 0.3048 m exactly
        ("us_survey_ft", "length", 1200 / 3937),  # NIST SP 811: US survey foot
        ("psi", "pressure", 6.894757),  # NIST SP 811: 1 psi = 6.894757 kPa
        ("Pa", "pressure", 1e-3),
        ("gal/min", "flow", 3.785411784e-3 / 60),  # NIST SP 811: 1 US gal = 3.785411784 L
        ("gpm", "flow", 3.785411784e-3 / 60),
        ("L/min", "flow", 1e-3 / 60),
        ("mL/min", "flow", 1e-6 / 60),
        ("uS/cm", "ec", 0.1),  # 1 uS/cm = 1e-4 S/m = 0.1 mS/m (SI prefixes)
        ("S/m", "ec", 1000.0),
        ("cm/s", "k", 0.01),
        ("m/d", "k", 1 / 86400),
        ("gal", "volume", 3.785411784e-3),  # NIST SP 811
    ],
)
def test_factors_match_nist_sp811(unit, quantity, expected):
    assert factor(unit, quantity) == pytest.approx(expected, rel=1e-6)


def test_unknown_unit_is_a_geo3d_error_naming_the_choices():
    with pytest.raises(UnitError, match="furlong") as info:
        factor("furlong/fortnight", "flow")
    assert isinstance(info.value, Geo3dError)
    assert isinstance(info.value, ValueError)
    assert "mL/min" in str(info.value)


def test_wrong_dimension_is_refused():
    with pytest.raises(UnitError, match="not a unit of pressure"):
        factor("m", "pressure")


def test_arrays_convert_elementwise():
    np.testing.assert_allclose(to_internal([1.0, 2.0], "psi", "pressure"), [6.894757, 13.789515])


@given(
    st.floats(min_value=-1e6, max_value=1e6, allow_nan=False),
    st.sampled_from(["ft", "us_survey_ft", "m"]),
)
def test_round_trip(value, unit):
    assert from_internal(to_internal(value, unit, "length"), unit, "length") == pytest.approx(
        value, rel=1e-12, abs=1e-9
    )
