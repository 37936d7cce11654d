"""CSV/JSON tables in output units; conversion factors from NIST SP 811."""

import json
from types import SimpleNamespace

import numpy as np
import pandas as pd
import pytest

from geo3d.io.tables import to_output_units, unit_label, write_csv, write_json, write_tables


def test_to_output_units_feet_and_gallons():
    df = pd.DataFrame(
        {
            "boring_id": ["B1"],
            "top": [0.3048],
            "bottom": [3.048],
            "log10_k": [-5.0],
            "pore_volume_m3": [1.0],
        }
    )
    out = to_output_units(df, length_unit="ft", volume_unit="gal")
    assert list(out.columns) == ["boring_id", "top_ft", "bottom_ft", "log10_k", "pore_volume_gal"]
    # 1 ft = 0.3048 m exactly; 1 US gal = 3.785411784 L (NIST SP 811, appendix B).
    assert out["top_ft"][0] == pytest.approx(1.0)
    assert out["bottom_ft"][0] == pytest.approx(10.0)
    assert out["pore_volume_gal"][0] == pytest.approx(1000 / 3.785411784)
    assert out["log10_k"][0] == -5.0
    # The input is unchanged.
    assert list(df.columns)[1] == "top"


def test_metres_keep_values_and_label():
    out = to_output_units(pd.DataFrame({"depth": [1.5], "volume_m3": [2.0]}))
    assert out.to_dict("list") == {"depth_m": [1.5], "volume_m3": [2.0]}
    assert unit_label("us_survey_ft") == "usft"


def test_write_csv_and_json(tmp_path):
    path = write_csv(
        pd.DataFrame({"x": [1.0], "name": ["a"]}), tmp_path / "t.csv", length_unit="ft"
    )
    back = pd.read_csv(path)
    assert list(back.columns) == ["x_ft", "name"]
    assert back["x_ft"][0] == pytest.approx(1 / 0.3048)  # NIST SP 811
    data = {
        "a": np.float64(np.nan),
        "b": np.int64(3),
        "c": [np.bool_(True)],
        "d": pd.DataFrame({"q": [1.0]}),
    }
    back = json.loads(write_json(data, tmp_path / "t.json").read_text())
    assert back == {"a": None, "b": 3, "c": [True], "d": [{"q": 1.0}]}


def test_write_tables(tmp_path):
    cv = SimpleNamespace(
        samples=pd.DataFrame({"group": ["B1"], "observed": [-5.0], "estimate": [-5.2]}),
        per_group=pd.DataFrame({"group": ["B1"], "rmse": [0.2]}),
        summary={"rmse": 0.2, "n": 1},
    )
    written = write_tables(
        tmp_path,
        length_unit="ft",
        volume_unit="L",
        intervals=pd.DataFrame({"boring_id": ["B1"], "top": [0.0], "bottom": [0.3048]}),
        volumes=pd.DataFrame({"zone": ["Z"], "volume_m3": [1.5]}),
        injection_schedule=pd.DataFrame({"point": [1], "top_depth": [1.0], "volume_m3": [0.5]}),
        injection_summary={"Z": {"n_points": 1}},
        crossval={"log10_k": cv},
        water_levels=pd.DataFrame({"boring_id": ["B1"], "depth_to_water": [3.048]}),
        calibration={"method": "physics", "a": 0.0, "b": 1.0},
    )
    names = sorted(p.name for p in written)
    assert names == sorted(
        [
            "intervals.csv",
            "volumes.csv",
            "volumes.json",
            "injection_plan.csv",
            "injection_plan.json",
            "crossval.csv",
            "crossval_borings.csv",
            "crossval.json",
            "water_levels.csv",
            "calibration.json",
        ]
    )
    assert pd.read_csv(tmp_path / "intervals.csv")["bottom_ft"][0] == pytest.approx(1.0)
    assert pd.read_csv(tmp_path / "volumes.csv")["volume_L"][0] == pytest.approx(1500.0)
    assert pd.read_csv(tmp_path / "water_levels.csv")["depth_to_water_ft"][0] == pytest.approx(10.0)
    plan = json.loads((tmp_path / "injection_plan.json").read_text())
    assert plan["schedule"][0]["volume_L"] == pytest.approx(500.0)
    assert json.loads((tmp_path / "crossval.json").read_text())["log10_k"]["rmse"] == 0.2
    assert pd.read_csv(tmp_path / "crossval.csv")["variable"].tolist() == ["log10_k"]


def test_unit_tokens_areas_and_si_columns():
    from geo3d.io.tables import mapping_to_output_units, output_name

    df = pd.DataFrame(
        {
            "bulk_volume_m3_p10": [3.785411784e-3],
            "area_m2": [0.09290304],
            "k": [1e-5],
            "flag": [True],
            "spacing_m": [3.048],
        }
    )
    out = to_output_units(df, length_unit="ft", volume_unit="gal")
    assert list(out.columns) == ["bulk_volume_gal_p10", "area_ft2", "k_m_s", "flag", "spacing_ft"]
    # 1 US gal = 3.785411784 L; 1 ft2 = 0.09290304 m2 (NIST SP 811, appendix B).
    assert out["bulk_volume_gal_p10"][0] == pytest.approx(1.0)
    assert out["area_ft2"][0] == pytest.approx(1.0)
    assert out["spacing_ft"][0] == pytest.approx(10.0)
    assert out["k_m_s"][0] == 1e-5
    # US survey foot = 1200/3937 m (NIST SP 811).
    assert output_name("top", length_unit="us_survey_ft") == ("top_usft", "length", "us_survey_ft")
    nested = mapping_to_output_units(
        {"Z1": {"design_volume_m3": 1.0, "n_points": 4, "radius_of_influence_m": 0.3048}},
        length_unit="ft",
        volume_unit="L",
    )
    assert nested == {
        "Z1": {"design_volume_L": 1000.0, "n_points": 4, "radius_of_influence_ft": 1.0}
    }


def test_coordinates_keep_full_precision(tmp_path):
    path = write_csv(pd.DataFrame({"x": [500010.123], "y": [5000070.456]}), tmp_path / "c.csv")
    back = pd.read_csv(path)
    assert back["x_m"][0] == 500010.123 and back["y_m"][0] == 5000070.456
