import tomllib
from pathlib import Path

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from geo3d.config import TEMPLATE, SiteConfig, config_from_dict, load_config
from geo3d.errors import CRSError, SiteFileError, SiteValidationError, UnitError

FT = 0.3048  # m, international foot (NIST SP 811)
US_FT = 1200 / 3937  # m, US survey foot (NIST SP 811)
PSI = 6.894757  # kPa (NIST SP 811, rounded to 7 significant digits)
GAL = 3.785411784e-3  # m3, US gallon (NIST SP 811)

MINIMAL = '[site]\nname = "S"\ncrs = "EPSG:32631"\n'


def write(tmp_path: Path, text: str) -> Path:
    path = tmp_path / "site.toml"
    path.write_text(text)
    return path


def test_template_loads_as_is():
    config = load_config(TEMPLATE)
    # Values of the template itself (it declares m and kPa, so nothing changes).
    assert config.site.crs == "EPSG:32631"
    assert config.probe.screen_length == pytest.approx(0.02)
    assert config.grid.cell_size == pytest.approx((2.0, 2.0, 0.25))
    assert config.water.depth_to_water == "auto"
    assert config.probe.atmospheric_pressure == "auto"
    names = [c.name for c in config.facies.classes]
    assert names == ["storage", "transitional", "transmissive"]
    assert config.facies.classes[1].log10_k_max == -5.0
    assert config.facies.classes[2].effective_porosity == 0.25


def test_defaults_equal_template():
    # Every default in the schema must equal the template's value (the template is its twin).
    from_template = load_config(TEMPLATE)
    minimal = SiteConfig.model_validate(tomllib.loads(MINIMAL.replace('"S"', '"My site"')))
    assert minimal.model_dump() == from_template.model_dump()


def test_every_field_is_documented():
    def walk(model):
        for name, field in model.model_fields.items():
            assert field.description, f"{model.__name__}.{name} has no description"
            annotation = field.annotation
            for candidate in (annotation, *getattr(annotation, "__args__", ())):
                if isinstance(candidate, type) and hasattr(candidate, "model_fields"):
                    walk(candidate)

    walk(SiteConfig)


def test_feet_and_psi_are_converted(tmp_path: Path):
    text = MINIMAL + (
        '[units]\nlength = "ft"\npressure = "psi"\nflow = "gal/min"\n'
        "[probe]\nscreen_length = 1.0\nsensor_noise = 2.0\natmospheric_pressure = 14.7\n"
        "tool_loss = [[1.0, 3.0]]\n"
        "[water]\ndepth_to_water = 10.0\n"
        "[grid]\ncell_size = [10.0, 10.0, 1.0]\nbase = 100.0\npadding = 5.0\n"
        '[variogram]\nhorizontal_range = 100.0\nvertical_range = "auto"\n'
        "[treatment]\nradius_of_influence = 10.0\n"
        "[kriging]\nmax_distance = 2.0\n"
    )
    config = load_config(write(tmp_path, text))
    assert config.probe.screen_length == pytest.approx(FT)
    assert config.probe.sensor_noise == pytest.approx(2 * PSI)
    assert config.probe.atmospheric_pressure == pytest.approx(14.7 * PSI)
    assert config.probe.tool_loss[0][0] == pytest.approx(GAL / 60)
    assert config.probe.tool_loss[0][1] == pytest.approx(3 * PSI)
    assert config.water.depth_to_water == pytest.approx(10 * FT)
    assert config.grid.cell_size == pytest.approx((10 * FT, 10 * FT, FT))
    assert config.grid.base == pytest.approx(100 * FT)
    assert config.grid.padding == pytest.approx(5 * FT)
    assert config.variogram.horizontal_range == pytest.approx(100 * FT)
    assert config.variogram.vertical_range == "auto"
    assert config.treatment.radius_of_influence == pytest.approx(10 * FT)
    assert config.units.length == "ft"  # the declared units are kept for the readers
    # max_distance counts variogram ranges, a ratio: no unit to convert
    assert config.kriging.max_distance == 2.0


def test_us_survey_feet(tmp_path: Path):
    config = load_config(write(tmp_path, MINIMAL + '[units]\nlength = "us_survey_ft"\n'))
    assert config.composite.interval == pytest.approx(0.15 * US_FT, rel=1e-12)


@settings(max_examples=25, deadline=None)
@given(st.floats(min_value=0.001, max_value=1e4))
def test_conversion_is_linear_in_declared_length(value):
    # Invariant: a length declared in ft equals the same number in m times 0.3048.
    data = tomllib.loads(MINIMAL)
    data["units"] = {"length": "ft"}
    data["composite"] = {"interval": value}
    config = config_from_dict(data)
    assert config.composite.interval == pytest.approx(value * FT, rel=1e-12)


def test_misspelled_key_names_key_line_and_suggestion(tmp_path: Path):
    path = write(tmp_path, MINIMAL + "[probe]\nscreen_lenght = 0.1\n")
    with pytest.raises(SiteFileError) as info:
        load_config(path)
    message = str(info.value)
    assert "screen_lenght" in message
    assert "line 5" in message
    assert "screen_length" in message
    assert str(path) in message


def test_misspelled_section(tmp_path: Path):
    with pytest.raises(SiteFileError, match=r"line 4.*'prob'.*did you mean 'probe'"):
        load_config(write(tmp_path, MINIMAL + "[prob]\nshape = 'sphere'\n"))


def test_unknown_unit_is_unit_error(tmp_path: Path):
    with pytest.raises(UnitError, match=r"line 5.*units.pressure.*'furlong'"):
        load_config(write(tmp_path, MINIMAL + '[units]\npressure = "furlong"\n'))


def test_unit_of_wrong_quantity(tmp_path: Path):
    with pytest.raises(UnitError, match="not a unit of length"):
        load_config(write(tmp_path, MINIMAL + '[units]\nlength = "kPa"\n'))


def test_missing_crs(tmp_path: Path):
    with pytest.raises(CRSError, match=r"line 1: missing setting 'site.crs'.*EPSG"):
        load_config(write(tmp_path, '[site]\nname = "S"\n'))


def test_several_problems_reported_together(tmp_path: Path):
    text = MINIMAL + '[units]\nflow = "bogus"\n[grid]\ncell_size = [2.0, -1.0, 0.25]\nfoo = 1\n'
    with pytest.raises(SiteValidationError) as info:
        load_config(write(tmp_path, text))
    problems = info.value.problems
    assert len(problems) == 3
    assert any("units.flow" in p for p in problems)
    assert any("cell_size" in p and "line 7" in p for p in problems)
    assert any("'grid.foo'" in p and "line 8" in p for p in problems)
    assert isinstance(info.value, ValueError)


def test_bad_literal_and_bad_toml(tmp_path: Path):
    with pytest.raises(SiteFileError, match=r"pressure_reference"):
        load_config(write(tmp_path, MINIMAL + '[units]\npressure_reference = "relative"\n'))
    with pytest.raises(SiteFileError, match=r"line 4.*not valid TOML"):
        load_config(write(tmp_path, MINIMAL + "[units\n"))


def test_empty_and_missing_file(tmp_path: Path):
    with pytest.raises(SiteFileError, match="empty"):
        load_config(write(tmp_path, "  \n"))
    with pytest.raises(SiteFileError, match="not found"):
        load_config(tmp_path / "nowhere")


def test_facies_classes_checked(tmp_path: Path):
    text = MINIMAL + (
        "[[facies.classes]]\nname = 'a'\nlog10_k_max = -5\nporosity = 0.3\n"
        "effective_porosity = 0.2\n"
        "[[facies.classes]]\nname = 'b'\nlog10_k_max = -7\nporosity = 0.3\n"
        "effective_porosity = 0.2\n"
        "[[facies.classes]]\nname = 'c'\nlog10_k_max = 0\nporosity = 0.3\n"
        "effective_porosity = 0.2\n"
    )
    with pytest.raises(SiteFileError, match="lowest K up"):
        load_config(write(tmp_path, text))


def test_folder_path_reads_site_toml(tmp_path: Path):
    write(tmp_path, MINIMAL)
    assert load_config(tmp_path).site.name == "S"


def test_ec_cutoffs_are_converted_and_reach_the_logs_options():
    # 100 uS/cm = 10 mS/m (SI prefixes: 1 S/m = 1000 mS/m = 10000 uS/cm)
    data = {
        "site": {"name": "x", "crs": "EPSG:32631"},
        "units": {"ec": "uS/cm"},
        "facies": {
            "classes": [
                {"name": "clay", "log10_k_max": -7.0, "porosity": 0.45, "effective_porosity": 0.05},
                {
                    "name": "sand",
                    "log10_k_max": 0.0,
                    "porosity": 0.32,
                    "effective_porosity": 0.25,
                    "ec_max": 100.0,
                },
            ]
        },
    }
    options = config_from_dict(data).logs_options()
    assert options.ec_cutoffs == (None, pytest.approx(10.0))
    assert options.facies_classes.names == ("clay", "sand")
    assert config_from_dict({"site": data["site"]}).logs_options().ec_cutoffs is None


def test_simulation_seed_default_reaches_every_stage():
    config = config_from_dict({"site": {"name": "x", "crs": "EPSG:32631"}})
    assert config.logs_options().seed == config.model_options().seed == config.simulation.seed


def test_output_options_carry_formats_and_output_units():
    data = {
        "site": {"name": "x", "crs": "EPSG:32631"},
        "units": {"output_length": "ft", "output_volume": "gal"},
        "output": {"formats": ["csv", "report"]},
    }
    options = config_from_dict(data).output_options()
    assert options.formats == ("csv", "report")
    assert (options.length_unit, options.volume_unit) == ("ft", "gal")
