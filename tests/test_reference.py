"""Reference (atmospheric) pressure of a log: sources in order, ISO 2533, time interpolation."""

import numpy as np
import pandas as pd
import pytest

from geo3d.errors import Geo3dWarning
from geo3d.logs.reference import (
    CollarReadings,
    flow_off_collar_readings,
    reference_pressures,
    standard_atmosphere_pressure,
)


@pytest.mark.parametrize(
    ("elevation", "expected"),
    # ISO 2533:1975 table of the standard atmosphere (values from memory, to 0.01 kPa)
    [(0.0, 101.325), (500.0, 95.461), (1000.0, 89.875), (2000.0, 79.495)],
)
def test_standard_atmosphere_matches_the_iso_2533_table(elevation, expected):
    assert standard_atmosphere_pressure(elevation) == pytest.approx(expected, abs=0.01)


def test_flow_off_collar_readings_before_and_after_interpolate_in_time():
    # invented log: flow off at the collar (100.0 kPa), the log, back at the collar with the
    # flow off (101.0 kPa, the barometer rose by 1 kPa over the hour)
    depth = np.array([0.0, 0.002, 0.004, 0.5, 1.0, 1.5, 0.003, 0.001])
    pressure = np.array([100.0, 100.0, 100.0, 130.0, 140.0, 150.0, 101.0, 101.0])
    flow = np.array([0.0, 0.0, 0.0, 5e-6, 5e-6, 5e-6, 0.0, 0.0])
    time = np.array([0.0, 1.0, 2.0, 100.0, 1800.0, 3500.0, 3599.0, 3601.0])
    readings = flow_off_collar_readings(depth, pressure, flow, time, flow_off=5e-7)
    assert readings.before == pytest.approx(100.0) and readings.after == pytest.approx(101.0)
    # linear in time between the mean times of the two groups (1 s and 3600 s)
    assert readings.at(1800.5) == pytest.approx(100.5, abs=1e-6)
    assert readings.at() == pytest.approx(100.5)


def test_a_flow_on_reading_is_never_atmospheric():
    depth = np.array([0.01, 0.03, 0.05, 0.5])
    pressure = np.array([101.3, 101.4, 101.2, 130.0])  # plausible values, but flow is on
    flow = np.full(4, 5e-6)
    readings = flow_off_collar_readings(depth, pressure, flow, flow_off=5e-7)
    assert not readings.found


def _borings():
    return pd.DataFrame(
        {
            "boring_id": ["A", "B", "C", "D"],
            "ground_elev": [100.0, 100.0, 100.0, 1000.0],
            "date": pd.to_datetime(["2026-06-01", "2026-06-01", "2026-06-02", "2026-06-03"]),
        }
    )


def test_reference_pressure_sources_in_order_of_preference():
    collar = {"A": CollarReadings(before=100.8), "B": CollarReadings(), "C": CollarReadings()}
    with pytest.warns(Geo3dWarning, match=r"D: .*ISO 2533.*0\.10 m"):
        table = reference_pressures(_borings(), collar, barometric={"C": 99.0})
    by = table.set_index("boring_id")
    assert by.loc["A"].tolist() == [100.8, "collar_flow_off"]
    assert by.loc["B"].tolist() == [100.8, "same_day_logs"]  # A was logged the same day
    assert by.loc["C"].tolist() == [99.0, "site_file"]
    # ISO 2533 at 1000 m (from memory: 89.875 kPa)
    assert by.loc["D", "p_atm"] == pytest.approx(89.875, abs=0.01)
    assert by.loc["D", "p_atm_source"] == "standard_atmosphere"


def test_a_barometric_value_per_day_or_for_the_site_and_gauge_records():
    collar = {b: CollarReadings() for b in "ABCD"}
    with pytest.warns(Geo3dWarning, match="boring"):  # C has no value: standard atmosphere
        table = reference_pressures(_borings(), collar, barometric={"2026-06-01": 100.2, "D": 88.0})
    assert table["p_atm"].tolist()[:2] == [100.2, 100.2]
    assert table["p_atm"].tolist()[3] == 88.0
    assert set(reference_pressures(_borings(), collar, barometric=99.5)["p_atm"]) == {99.5}
    gauge = reference_pressures(_borings(), collar, gauge=True)
    assert set(gauge["p_atm"]) == {0.0} and set(gauge["p_atm_source"]) == {"gauge"}
    given = reference_pressures(_borings(), collar, given=101.0)
    assert set(given["p_atm_source"]) == {"given"}
