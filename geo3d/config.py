"""The ``site.toml`` schema.

:class:`SiteConfig` mirrors ``geo3d/templates/site.toml`` section by section; every setting is
documented here and in the template, and every section but ``[site]`` has working defaults.
Keys are strict: a misspelled key is an error that names the key, the file and the line.

:func:`load_config` reads a site file, validates it, and converts every number that carries a
unit to geo3d's internal units (m, kPa, m3/s): lengths declared in ``[units] length`` (probe
screen, grid cell size and padding, depth to water, compositing interval, minimum facies
thickness, spike-filter window, radius of influence, variogram ranges and tolerance, kriging
search distance, grid base) become metres, pressures declared in ``[units] pressure`` (sensor
noise and limit, atmospheric pressure, tool-loss pressures) become kPa and tool-loss flows
become m3/s. ``"auto"`` stays the string ``"auto"``. The ``[units]`` section keeps the declared
units: readers use it to convert the data files.
"""

from __future__ import annotations

import difflib
import re
import tomllib
from collections.abc import Mapping
from dataclasses import dataclass
from os import PathLike
from pathlib import Path
from types import MappingProxyType
from typing import Any, Literal

from pydantic import (
    BaseModel,
    ConfigDict,
    Field,
    ValidationError,
    ValidationInfo,
    field_validator,
    model_validator,
)
from pydantic_core import ErrorDetails

from geo3d.errors import CRSError, SiteFileError, SiteValidationError, UnitError, where
from geo3d.facies import DEFAULT_CLASSES, FaciesClass, FaciesClasses
from geo3d.units import check_unit, length_unit_of, read_crs, to_internal

__all__ = [
    "SiteConfig",
    "SiteSection",
    "UnitsSection",
    "FilesSection",
    "LogsSection",
    "LogColumns",
    "ProbeSection",
    "WaterSection",
    "FlagsSection",
    "CompositeSection",
    "FaciesClassConfig",
    "FaciesSection",
    "GridSection",
    "VariogramSection",
    "KrigingSection",
    "SimulationSection",
    "TreatmentSection",
    "OutputSection",
    "LimitsSection",
    "LogsOptions",
    "OutputOptions",
    "ModelOptions",
    "VolumeOptions",
    "load_config",
    "config_from_dict",
    "TEMPLATE",
]

#: The commented site-file template written by ``geo3d init``.
TEMPLATE = Path(__file__).parent / "templates" / "site.toml"

Auto = Literal["auto"]


class _Section(BaseModel):
    model_config = ConfigDict(extra="forbid", validate_default=True)


class SiteSection(_Section):
    """``[site]``: what the site is called and where it is."""

    name: str = Field(description="Site name, free text, shown in the report.", min_length=1)
    crs: str = Field(
        description='Coordinate reference system: an EPSG code ("EPSG:nnnn") or a WKT string. '
        "Must be a projected CRS.",
    )


#: Field of ``[units]`` -> the quantity its unit must measure.
_UNIT_FIELDS = {
    "length": "length",
    "output_length": "length",
    "pressure": "pressure",
    "flow": "flow",
    "ec": "ec",
    "k": "k",
    "output_volume": "volume",
}


class UnitsSection(_Section):
    """``[units]``: the units of the input files and of the tables written for people."""

    length: str = Field(
        "m", description="Coordinates, elevations and depths: m | ft | us_survey_ft."
    )
    pressure: str = Field("kPa", description="Logged and tested pressures: kPa | psi | Pa | bar.")
    pressure_reference: Literal["absolute", "gauge"] = Field(
        "absolute", description="What the pressure logger records: absolute | gauge."
    )
    flow: str = Field(
        "mL/min", description="Injection flow: mL/min | L/min | gal/min | m3/s | L/s."
    )
    ec: str = Field("mS/m", description="Electrical conductivity: mS/m | uS/cm | S/m | mS/cm.")
    k: str = Field("m/s", description="Slug-test hydraulic conductivity: m/s | cm/s | m/d | ft/d.")
    output_length: str = Field("m", description="Length unit of every output.")
    output_volume: str = Field("m3", description="Volume unit of every output.")

    @field_validator(*_UNIT_FIELDS)
    @classmethod
    def _unit(cls, value: str, info: ValidationInfo) -> str:
        try:
            return check_unit(value, _UNIT_FIELDS[str(info.field_name)])
        except UnitError as exc:
            raise ValueError(str(exc)) from None


class FilesSection(_Section):
    """``[files]``: input files, relative to the folder of ``site.toml``."""

    borings: str = Field(
        "borings.csv",
        description="Borings table (boring_id, x, y, ground_elev [, date]); CSV or GeoPackage.",
        min_length=1,
    )
    logs: str | list[str] = Field(
        "logs/*.csv",
        description="Glob (or list of globs) of injection-log files, one per boring "
        "(CSV, or LAS 2.0 for *.las).",
    )
    dissipation: str = Field(
        "dissipation.csv",
        description="Dissipation tests (boring_id, depth, time_s, pressure [, test_id]); "
        '"" = none.',
    )
    slug_tests: str = Field(
        "", description='Slug tests (boring_id, top_depth, bottom_depth, k); "" = none.'
    )
    sensor_checks: str = Field(
        "",
        description="Sensor checks (boring_id, sensor, stage, measured, expected, tolerance); "
        '"" = none.',
    )
    boundary: str = Field(
        "", description='Site boundary polygon (GeoJSON or GeoPackage); "" = hull of the borings.'
    )
    zones: str = Field(
        "",
        description="Treatment zones (GeoJSON or GeoPackage) with name, top, bottom [, reference, "
        'design_fraction, radius_of_influence]; "" = none.',
    )
    dem: str = Field("", description='Ground-surface GeoTIFF; "" = from the boring collars.')

    @field_validator("logs")
    @classmethod
    def _logs(cls, value: str | list[str]) -> str | list[str]:
        patterns = [value] if isinstance(value, str) else value
        if not patterns or not all(p.strip() for p in patterns):
            msg = "expected a glob of log files (or a list of globs), not an empty value"
            raise ValueError(msg)
        return value


class LogColumns(_Section):
    """``[logs.las]`` or ``[logs.csv]``: column names for one file format.

    A name left out (or ``""``) falls back to the same key of ``[logs]``.
    """

    depth: str = Field("", description='Column (or LAS curve) holding depth; "" = as [logs].')
    pressure: str = Field("", description='Column holding injection pressure; "" = as [logs].')
    flow: str = Field("", description='Column holding injection flow; "" = as [logs].')
    ec: str = Field("", description='Column holding electrical conductivity; "" = as [logs].')
    time: str = Field("", description='Column holding time in seconds; "" = as [logs].')


class LogsSection(_Section):
    """``[logs]``: how to read the injection-log files."""

    depth: str = Field("depth", description="Column (or LAS curve) holding depth.", min_length=1)
    pressure: str = Field(
        "pressure", description="Column holding injection pressure.", min_length=1
    )
    flow: str = Field("flow", description="Column holding injection flow.", min_length=1)
    ec: str = Field("ec", description="Column holding electrical conductivity.", min_length=1)
    time: str = Field("", description='Column holding time in seconds; "" = none.')
    header_rows: int = Field(
        0, ge=0, description="Lines to skip before the column-name line (CSV only)."
    )
    boring_id: str = Field(
        "filename",
        description='"filename" (the boring id is the file stem) or the name of a column in the '
        "file holding the boring id.",
        min_length=1,
    )
    delimiter: str = Field(",", description="CSV field delimiter.", min_length=1, max_length=1)
    units_row: bool = Field(
        False,
        description="CSV only: the line under the column names states each column's unit; the "
        "units of the mapped columns must agree with [units] (a blank cell is not checked).",
    )
    las: LogColumns = Field(
        default_factory=LogColumns, description="Curve names of LAS files, where they differ."
    )
    csv: LogColumns = Field(
        default_factory=LogColumns, description="Column names of CSV files, where they differ."
    )


class ProbeSection(_Section):
    """``[probe]``: the injection screen and the pressure sensor."""

    shape: Literal["cylinder", "sphere"] = Field(
        "cylinder", description="Screen shape for the Hvorslev (1951) shape factor."
    )
    screen_length: float = Field(
        0.02, gt=0, description="Screen length (cylinder only), in [units] length."
    )
    screen_diameter: float = Field(
        0.01,
        gt=0,
        description="Screen diameter (cylinder) or sphere diameter, in [units] length.",
    )
    sensor_noise: float = Field(0.5, gt=0, description="Pressure noise, in [units] pressure.")
    pressure_limit: float = Field(
        1500.0, gt=0, description="Pressure sensor full scale, in [units] pressure."
    )
    atmospheric_pressure: float | Auto = Field(
        "auto",
        description='"auto" = flow-off readings at the collar, else barometric_pressure, else '
        "readings of the same day's logs, else the ISO 2533 standard atmosphere at the collar "
        "elevation; or a number in [units] pressure used for every boring.",
    )
    barometric_pressure: float | dict[str, float] | Literal["none"] = Field(
        "none",
        description="Barometric pressure in [units] pressure for logs without a flow-off "
        "reading at the collar: one site-wide number, or a table of boring ids and/or days "
        '("YYYY-MM-DD", matched to the borings\' date) to values; "none" = not measured.',
    )
    tool_loss: list[tuple[float, float]] = Field(
        default_factory=list,
        description="Optional [[flow, pressure], ...] pairs measured in open water, in [units] "
        "flow and [units] pressure.",
    )

    @field_validator("atmospheric_pressure")
    @classmethod
    def _positive_atm(cls, value: float | str) -> float | str:
        if not isinstance(value, str) and value <= 0:
            msg = 'expected a positive pressure or "auto"'
            raise ValueError(msg)
        return value

    @field_validator("barometric_pressure")
    @classmethod
    def _positive_barometric(
        cls, value: float | dict[str, float] | str
    ) -> float | dict[str, float] | str:
        values = value.values() if isinstance(value, dict) else [value]
        if any(not isinstance(v, str) and v <= 0 for v in values):
            msg = 'expected positive pressures (a number or a table of numbers) or "none"'
            raise ValueError(msg)
        return value


class WaterSection(_Section):
    """``[water]``: how the water table is found."""

    depth_to_water: float | Auto = Field(
        "auto",
        description='"auto" = from dissipation tests; or a site-wide depth to water in [units] '
        "length.",
    )
    min_fraction_dissipated: float = Field(
        0.5, ge=0, le=1, description="Dissipation records dissipating less than this are refused."
    )
    surface: Literal["plane", "kriging"] = Field(
        "plane", description="Site-wide water-table surface: plane | kriging."
    )

    @field_validator("depth_to_water")
    @classmethod
    def _non_negative(cls, value: float | str) -> float | str:
        if not isinstance(value, str) and value < 0:
            msg = 'expected a depth to water >= 0 or "auto"'
            raise ValueError(msg)
        return value


class FlagsSection(_Section):
    """``[flags]``: limits of the quality flags."""

    out_of_range_high_factor: float = Field(
        3.0, gt=0, description="Flag P_net within this many times the sensor noise."
    )
    min_flow_fraction: float = Field(
        0.1, ge=0, le=1, description="Flow below this fraction of the median flow is flagged."
    )
    pressure_limit_fraction: float = Field(
        0.95, gt=0, le=1, description="Pressure above this fraction of the sensor limit is flagged."
    )
    hampel_window: float = Field(
        0.15, gt=0, description="Half window of the EC spike filter, in [units] length."
    )
    hampel_k: float = Field(4.0, gt=0, description="Spike threshold in scaled MADs.")
    ec_trend_sigma: float = Field(
        2.5, gt=0, description="EC this many residual SDs above the EC-vs-log10 K trend is flagged."
    )
    ec_min_thickness: float = Field(
        0.2,
        gt=0,
        description="An EC-above-trend anomaly must hold over consecutive samples spanning at "
        "least this thickness, in [units] length.",
    )
    min_slug_tests: int = Field(
        3, ge=0, description="Fewer slug tests than this: physics-only K, with a warning."
    )


class CompositeSection(_Section):
    """``[composite]``: compositing of samples into intervals."""

    interval: float = Field(
        0.15, gt=0, description="Length of composited intervals, in [units] length."
    )


class FaciesClassConfig(_Section):
    """One ``[[facies.classes]]`` entry."""

    name: str = Field(description="Class name.", min_length=1)
    log10_k_max: float = Field(
        description="Upper bound of log10 K (m/s); ignored for the last class."
    )
    porosity: float = Field(gt=0, lt=1, description="Total porosity (fraction).")
    effective_porosity: float = Field(gt=0, lt=1, description="Effective porosity (fraction).")
    ec_max: float | None = Field(
        None,
        gt=0,
        description="EC cut-off, in [units] ec: an interval of this class with a higher bulk "
        "EC is moved down one class (high EC means finer grains; thresholds method only); "
        "omitted = no cut-off.",
    )

    @model_validator(mode="after")
    def _porosities(self) -> FaciesClassConfig:
        if self.effective_porosity > self.porosity:
            msg = (
                f"class {self.name!r}: effective_porosity {self.effective_porosity} exceeds "
                f"porosity {self.porosity}; expected effective_porosity <= porosity"
            )
            raise ValueError(msg)
        return self


def _default_classes() -> list[FaciesClassConfig]:
    return [
        FaciesClassConfig(
            name=c.name,
            log10_k_max=c.log10_k_max,
            porosity=c.porosity,
            effective_porosity=c.effective_porosity,
        )
        for c in DEFAULT_CLASSES
    ]


class FaciesSection(_Section):
    """``[facies]``: hydrofacies classification."""

    method: Literal["thresholds", "mixture"] = Field(
        "thresholds", description="thresholds | mixture (Gaussian mixture on log10 K and EC)."
    )
    min_thickness: float = Field(
        0.1, ge=0, description="Thinner runs are merged into their neighbours, in [units] length."
    )
    classes: list[FaciesClassConfig] = Field(
        default_factory=_default_classes,
        description="Hydrofacies from the lowest K up.",
        min_length=1,
    )

    @model_validator(mode="after")
    def _ordered(self) -> FaciesSection:
        names = [c.name for c in self.classes]
        if len(set(names)) != len(names):
            msg = f"facies class names must be unique; got {names}"
            raise ValueError(msg)
        bounds = [c.log10_k_max for c in self.classes[:-1]]
        if any(upper <= lower for lower, upper in zip(bounds, bounds[1:], strict=False)):
            msg = f"facies classes must go from the lowest K up; got log10_k_max {bounds}"
            raise ValueError(msg)
        return self


class GridSection(_Section):
    """``[grid]``: the voxel grid."""

    cell_size: tuple[float, float, float] = Field(
        (2.0, 2.0, 0.25), description="Cell size dx, dy, dz in [units] length."
    )
    base: float | Auto = Field(
        "auto", description='"auto" = deepest data; or a base elevation in [units] length.'
    )
    padding: float = Field(
        0.0, ge=0, description="Extend the grid beyond the boundary by this much, [units] length."
    )

    @field_validator("cell_size")
    @classmethod
    def _positive(cls, value: tuple[float, float, float]) -> tuple[float, float, float]:
        if any(v <= 0 for v in value):
            msg = f"expected three positive cell sizes [dx, dy, dz]; got {list(value)}"
            raise ValueError(msg)
        return value


class VariogramSection(_Section):
    """``[variogram]``: variogram model and anisotropy."""

    model: Literal["auto", "exponential", "spherical", "gaussian", "matern"] = Field(
        "auto", description="auto | exponential | spherical | gaussian | matern."
    )
    horizontal_range: float | Auto = Field(
        "auto", description='"auto" = fitted; or the major horizontal range in [units] length.'
    )
    vertical_range: float | Auto = Field(
        "auto", description='"auto" = fitted; or the vertical range in [units] length.'
    )
    azimuth: float = Field(
        0.0, ge=-360, le=360, description="Degrees clockwise from north of the major axis."
    )
    anisotropy_minor: float = Field(
        1.0, gt=0, le=1, description="Minor/major horizontal range ratio."
    )
    elevation_tolerance: float = Field(
        0.5,
        gt=0,
        description="Pairs between borings must be this close in elevation, [units] length.",
    )

    @field_validator("horizontal_range", "vertical_range")
    @classmethod
    def _positive_range(cls, value: float | str) -> float | str:
        if not isinstance(value, str) and value <= 0:
            msg = 'expected a positive range or "auto"'
            raise ValueError(msg)
        return value


class KrigingSection(_Section):
    """``[kriging]``: ordinary kriging settings."""

    neighbors: int = Field(32, gt=0, description="Samples per estimate.")
    max_per_boring: int = Field(
        8, ge=0, description="At most this many samples from one boring (0 = no limit)."
    )
    drift: Literal["none", "linear_z"] = Field("none", description="none | linear_z.")
    max_distance: float | Auto = Field(
        "auto",
        description="A cell with no sample within this anisotropy-scaled distance, in variogram "
        "ranges (1 = one range along each axis; not a length), is left empty (NaN) rather "
        'than given a distant mean; "auto" = no limit.',
    )
    chunk_size: int = Field(20000, gt=0, description="Cells per chunk.")
    scheduler: str = Field(
        "", description='"" = local threads; or a dask.distributed scheduler address.'
    )


class SimulationSection(_Section):
    """``[simulation]``: conditional simulation."""

    realizations: int = Field(20, ge=0, description="Number of realizations (0 = none).")
    seed: int = Field(20261202, description="Random seed.")
    engine: Literal["gaussian", "facies"] = Field(
        "gaussian",
        description=(
            "gaussian: kriging and Gaussian simulation of log10 K, facies by thresholds; "
            "facies: facies simulated first, then log10 K within each facies."
        ),
    )


class TreatmentSection(_Section):
    """``[treatment]``: injection design defaults for the treatment zones."""

    design_fraction: float = Field(
        0.2, gt=0, le=1, description="Fraction of the effective pore volume to inject."
    )
    radius_of_influence: float = Field(
        3.0, gt=0, description="Radius of influence of an injection point, [units] length."
    )
    target: Literal["transmissive", "all"] = Field(
        "transmissive", description="Material to treat inside each zone: transmissive | all."
    )


_OUTPUT_FORMATS: tuple[Literal["vtk", "geotiff", "gpkg", "netcdf", "csv", "report"], ...] = (
    "vtk",
    "geotiff",
    "gpkg",
    "netcdf",
    "csv",
    "report",
)


class OutputSection(_Section):
    """``[output]``: which outputs to write, and their CRS."""

    formats: list[Literal["vtk", "geotiff", "gpkg", "netcdf", "csv", "report"]] = Field(
        default_factory=lambda: list(_OUTPUT_FORMATS),
        description="Outputs to write: vtk, geotiff, gpkg, netcdf, csv, report.",
    )
    crs: str = Field(
        "",
        description="CRS of every output (EPSG code or WKT, projected, axes in m, ft or US "
        'survey ft); "" = the CRS declared in [site] crs.',
    )

    @field_validator("crs")
    @classmethod
    def _crs(cls, value: str) -> str:
        if not value.strip():
            return ""
        crs = read_crs(value)
        if not crs.is_projected:
            msg = f"{crs.name!r} is not a projected CRS; expected one in metres or feet"
            raise ValueError(msg)
        if length_unit_of(crs.axis_info[0].unit_conversion_factor) is None:
            msg = (
                f"the CRS {crs.name!r} has axes in {crs.axis_info[0].unit_name}; expected "
                "metres, feet or US survey feet"
            )
            raise ValueError(msg)
        return value


class LimitsSection(_Section):
    """``[limits]``: refuse or warn about a model too large for the machine or the user's time."""

    max_cells: int = Field(
        200_000_000, gt=0, description="Refuse a voxel grid of more cells than this."
    )
    max_memory: float | Auto = Field(
        "auto",
        description='Refuse a model estimated to need more memory than this, in GB; "auto" = '
        "the memory available when the run starts.",
    )
    warn_time: float = Field(
        1800.0, gt=0, description="Warn when the model stage is estimated to take longer, in s."
    )

    @field_validator("max_memory")
    @classmethod
    def _positive_memory(cls, value: float | str) -> float | str:
        if not isinstance(value, str) and not value > 0:
            msg = 'expected a positive number of GB or "auto"'
            raise ValueError(msg)
        return value


class SiteConfig(_Section):
    """The whole site file; each attribute is one ``[section]``.

    Built by :func:`load_config`, numbers carrying units are in internal units (m, kPa, m3/s).
    """

    site: SiteSection = Field(description="Site name and CRS.")
    units: UnitsSection = Field(default_factory=UnitsSection, description="Declared units.")
    files: FilesSection = Field(default_factory=FilesSection, description="Input files.")
    logs: LogsSection = Field(default_factory=LogsSection, description="Log file layout.")
    probe: ProbeSection = Field(default_factory=ProbeSection, description="Probe and sensor.")
    water: WaterSection = Field(default_factory=WaterSection, description="Water table.")
    flags: FlagsSection = Field(default_factory=FlagsSection, description="Quality flags.")
    composite: CompositeSection = Field(
        default_factory=CompositeSection, description="Compositing."
    )
    facies: FaciesSection = Field(default_factory=FaciesSection, description="Hydrofacies.")
    grid: GridSection = Field(default_factory=GridSection, description="Voxel grid.")
    variogram: VariogramSection = Field(default_factory=VariogramSection, description="Variogram.")
    kriging: KrigingSection = Field(default_factory=KrigingSection, description="Kriging.")
    simulation: SimulationSection = Field(
        default_factory=SimulationSection, description="Simulation."
    )
    treatment: TreatmentSection = Field(
        default_factory=TreatmentSection, description="Treatment design."
    )
    output: OutputSection = Field(default_factory=OutputSection, description="Outputs.")
    limits: LimitsSection = Field(default_factory=LimitsSection, description="Resource limits.")

    def facies_classes(self) -> FaciesClasses:
        """Return the ``[[facies.classes]]`` as the one facies-class type."""
        return FaciesClasses(
            tuple(
                FaciesClass(c.name, c.log10_k_max, c.porosity, c.effective_porosity)
                for c in self.facies.classes
            )
        )

    def logs_options(self) -> LogsOptions:
        """Return the settings of the logs stage (see :class:`LogsOptions`)."""
        return _logs_options(self)

    def output_options(self) -> OutputOptions:
        """Return the settings of the export and report stages (see :class:`OutputOptions`)."""
        return OutputOptions(
            formats=tuple(self.output.formats),
            length_unit=self.units.output_length,
            volume_unit=self.units.output_volume,
        )

    def model_options(self) -> ModelOptions:
        """Return the settings of the model stage (see :class:`ModelOptions`)."""
        return _model_options(self)

    def volume_options(self) -> VolumeOptions:
        """Return the settings of the volumes stage (see :class:`VolumeOptions`)."""
        return _volume_options(self)


_LENGTHS = {
    "probe": ("screen_length", "screen_diameter"),
    "water": ("depth_to_water",),
    "flags": ("hampel_window", "ec_min_thickness"),
    "composite": ("interval",),
    "facies": ("min_thickness",),
    "grid": ("cell_size", "base", "padding"),
    "variogram": ("horizontal_range", "vertical_range", "elevation_tolerance"),
    "treatment": ("radius_of_influence",),
}
_PRESSURES = {
    "probe": ("sensor_noise", "pressure_limit", "atmospheric_pressure", "barometric_pressure")
}


def _convert(value: Any, unit: str, quantity: str) -> Any:
    if isinstance(value, str):
        return value
    if isinstance(value, dict):
        return {k: to_internal(float(v), unit, quantity) for k, v in value.items()}
    if isinstance(value, tuple | list):
        return type(value)(to_internal(float(v), unit, quantity) for v in value)
    return to_internal(float(value), unit, quantity)


def _to_internal(config: SiteConfig) -> SiteConfig:
    units = config.units
    updates: dict[str, BaseModel] = {}
    for quantity, table, unit in (
        ("length", _LENGTHS, units.length),
        ("pressure", _PRESSURES, units.pressure),
    ):
        for section, keys in table.items():
            current = updates.get(section, getattr(config, section))
            changes = {k: _convert(getattr(current, k), unit, quantity) for k in keys}
            updates[section] = current.model_copy(update=changes)
    probe = updates["probe"]
    tool_loss = [
        (
            to_internal(flow, units.flow, "flow"),
            to_internal(pressure, units.pressure, "pressure"),
        )
        for flow, pressure in config.probe.tool_loss
    ]
    updates["probe"] = probe.model_copy(update={"tool_loss": tool_loss})
    facies = updates["facies"]
    assert isinstance(facies, FaciesSection)  # min_thickness converted above
    classes = [
        c
        if c.ec_max is None
        else c.model_copy(update={"ec_max": to_internal(c.ec_max, units.ec, "ec")})
        for c in facies.classes
    ]
    updates["facies"] = facies.model_copy(update={"classes": classes})
    return config.model_copy(update=updates)


def _line_of(text: str, loc: tuple[Any, ...]) -> int | None:
    """Find the line of a key given a pydantic error location (best effort)."""
    keys = [str(k) for k in loc if not isinstance(k, int)]
    if not keys:
        return None
    table = ""
    header_line = None
    parent_line = None
    wanted_table = ".".join(keys[:-1])
    for number, raw in enumerate(text.splitlines(), start=1):
        line = raw.strip()
        header = re.match(r"^\[\[?\s*([^\]]+?)\s*\]\]?", line)
        if header:
            table = header.group(1)
            if table == ".".join(keys):
                header_line = header_line or number
            if table == wanted_table and wanted_table:
                parent_line = parent_line or number
            continue
        if table == wanted_table and re.match(rf"^['\"]?{re.escape(keys[-1])}['\"]?\s*=", line):
            return number
    return header_line or parent_line


def _describe(error: ErrorDetails, path: str | PathLike | None, text: str) -> str:
    loc = tuple(error["loc"])
    # Drop the union-member tags pydantic appends ('float', "literal['auto']").
    keys = tuple(k for k in loc if isinstance(k, int) or not re.match(r"^(float|literal\[)", k))
    dotted = ".".join(str(k) if not isinstance(k, int) else f"[{k}]" for k in keys)
    dotted = dotted.replace(".[", "[")
    line = _line_of(text, keys) if text else None
    place = where(path, line=line)
    kind = error["type"]
    if kind == "extra_forbidden":
        section = _model_at(keys[:-1])
        hint = ""
        if section is not None:
            close = difflib.get_close_matches(str(keys[-1]), list(section.model_fields), n=1)
            if close:
                hint = f"; did you mean {close[0]!r}?"
            known = ", ".join(section.model_fields)
            hint += f" (expected one of: {known})"
        return f"{place}: unknown setting {dotted!r}{hint}"
    if kind == "missing":
        return f"{place}: missing setting {dotted!r}"
    message = error["msg"].removeprefix("Value error, ")
    value = error.get("input")
    shown = "" if isinstance(value, dict) else f" (got {value!r})"
    return f"{place}: setting {dotted!r}: {message}{shown}"


def _model_at(keys: tuple[Any, ...]) -> type[BaseModel] | None:
    model: type[BaseModel] = SiteConfig
    for key in keys:
        if isinstance(key, int):
            continue
        field = model.model_fields.get(str(key))
        if field is None:
            return None
        annotation = field.annotation
        args = getattr(annotation, "__args__", ())
        candidates = [annotation, *args]
        found = [c for c in candidates if isinstance(c, type) and issubclass(c, BaseModel)]
        if not found:
            return None
        model = found[0]
    return model


def _raise(problems: list[tuple[type[Exception], str]]) -> None:
    if len(problems) == 1:
        cls, message = problems[0]
        raise cls(message)
    raise SiteValidationError([m for _, m in problems])


def config_from_dict(
    data: dict[str, Any], *, path: str | PathLike | None = None, text: str = ""
) -> SiteConfig:
    """Validate a parsed site file and convert its numbers to internal units.

    Parameters
    ----------
    data
        The parsed TOML document.
    path
        The file it came from, for messages.
    text
        The file's text, to find line numbers for messages.

    Returns
    -------
    SiteConfig
        Lengths in m, pressures in kPa, flows in m3/s.

    Raises
    ------
    SiteFileError
        A setting is missing, misspelled or invalid.
    UnitError
        The only problem is an unknown unit.
    CRSError
        The only problem is a missing ``[site] crs``.
    SiteValidationError
        Several problems at once (``.problems`` lists them).
    """
    try:
        config = SiteConfig.model_validate(data)
    except ValidationError as exc:
        problems: list[tuple[type[Exception], str]] = []
        for error in exc.errors():
            message = _describe(error, path, text)
            is_unit = error["loc"][:1] == ("units",) and "unit" in error["msg"]
            is_crs = tuple(error["loc"][:2]) == ("site", "crs")
            cls = UnitError if is_unit else CRSError if is_crs else SiteFileError
            if is_crs and error["type"] == "missing":
                message += '; expected an EPSG code ("EPSG:nnnn") or a WKT string'
            problems.append((cls, message))
        _raise(problems)
    return _to_internal(config)


def load_config(path: str | PathLike) -> SiteConfig:
    """Read, validate and convert a ``site.toml``.

    Parameters
    ----------
    path
        The site file, or the site folder holding ``site.toml``.

    Returns
    -------
    SiteConfig
        The validated settings, lengths in m, pressures in kPa, flows in m3/s.

    Raises
    ------
    SiteFileError
        The file is missing, not valid TOML, or breaks the schema; the message names the file,
        the line and the setting.
    UnitError
        The only problem is an unknown unit.
    SiteValidationError
        Several problems at once.
    """
    file = Path(path)
    if file.is_dir():
        file = file / "site.toml"
    if not file.is_file():
        msg = f"{file}: site file not found; expected a site.toml (make one with `geo3d init`)"
        raise SiteFileError(msg)
    try:
        text = file.read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError) as exc:
        msg = f"{file}: cannot read the site file ({exc}); expected UTF-8 TOML text"
        raise SiteFileError(msg) from None
    if not text.strip():
        msg = f"{file}: the site file is empty; expected at least [site] name and crs"
        raise SiteFileError(msg)
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        match = re.search(r"line (\d+)", str(exc))
        line = int(match.group(1)) if match else None
        msg = f"{where(file, line=line)}: not valid TOML ({exc})"
        raise SiteFileError(msg) from None
    return config_from_dict(data, path=file, text=text)


# --- logs stage options ---------------------------------------------------------------------
# The settings of the logs stage, built from a validated SiteConfig in one place: every value
# is read from the schema above (no default is repeated here) and "auto" becomes None.


@dataclass(frozen=True)
class LogsOptions:
    """Settings of the logs stage, in internal units (m, kPa, m3/s, mS/m).

    Attributes
    ----------
    gauge
        The logger records gauge pressure (``[units] pressure_reference``).
    atmospheric_pressure
        Given atmospheric pressure for every boring; None = in order of preference (see
        :mod:`geo3d.logs.reference`).
    barometric_pressure
        Barometric pressure from ``[probe] barometric_pressure``: one value, or boring ids and/or
        days (``YYYY-MM-DD``) to values; None = not measured.
    tool_loss
        ``(flow, pressure)`` pairs measured in open water.
    probe_shape, screen_length, screen_diameter
        The injection screen (``[probe]``).
    sensor_noise, pressure_limit
        The pressure sensor (``[probe]``).
    depth_to_water
        A site-wide depth to water; None = from the dissipation tests.
    min_fraction_dissipated
        Dissipation records dissipating less are refused.
    water_surface
        ``'plane'`` or ``'kriging'``: the site-wide water-table surface.
    out_of_range_high_factor, min_flow_fraction, pressure_limit_fraction
        Limits of the resolution flags (``[flags]``).
    hampel_window, hampel_k
        EC spike filter (``[flags]``).
    ec_trend_sigma
        EC-above-trend flag threshold in residual SDs.
    ec_min_thickness
        Thinnest run of EC above the trend that is flagged.
    min_slug_tests
        Fewer slug tests than this: physics-only K.
    composite_interval
        Length of the composited intervals.
    facies_method
        ``'thresholds'`` or ``'mixture'``.
    min_thickness
        Thinner hydrofacies runs are merged into their neighbours.
    facies_classes
        The hydrofacies classes.
    ec_cutoffs
        EC cut-off per class (None = no cut-off), or None when no class has one.
    seed
        Random state of the Gaussian mixture (``[simulation] seed``).
    """

    gauge: bool
    atmospheric_pressure: float | None
    barometric_pressure: float | Mapping[str, float] | None
    tool_loss: tuple[tuple[float, float], ...]
    probe_shape: str
    screen_length: float
    screen_diameter: float
    sensor_noise: float
    pressure_limit: float
    depth_to_water: float | None
    min_fraction_dissipated: float
    water_surface: str
    out_of_range_high_factor: float
    min_flow_fraction: float
    pressure_limit_fraction: float
    hampel_window: float
    hampel_k: float
    ec_trend_sigma: float
    ec_min_thickness: float
    min_slug_tests: int
    composite_interval: float
    facies_method: str
    min_thickness: float
    facies_classes: FaciesClasses
    ec_cutoffs: tuple[float | None, ...] | None
    seed: int


@dataclass(frozen=True)
class OutputOptions:
    """What the export and report stages write, and in which units.

    Attributes
    ----------
    formats
        Outputs to write (``[output] formats``).
    length_unit, volume_unit
        Units of the tables written for people (``[units] output_length``, ``output_volume``).
    """

    formats: tuple[str, ...]
    length_unit: str
    volume_unit: str


def _logs_options(config: SiteConfig) -> LogsOptions:
    probe, water, flags, facies = config.probe, config.water, config.flags, config.facies
    cutoffs = tuple(c.ec_max for c in facies.classes)
    return LogsOptions(
        gauge=config.units.pressure_reference == "gauge",
        atmospheric_pressure=_auto_none(probe.atmospheric_pressure),
        barometric_pressure=None
        if isinstance(probe.barometric_pressure, str)
        else MappingProxyType(dict(probe.barometric_pressure))
        if isinstance(probe.barometric_pressure, dict)
        else float(probe.barometric_pressure),
        tool_loss=tuple((float(q), float(p)) for q, p in probe.tool_loss),
        probe_shape=probe.shape,
        screen_length=probe.screen_length,
        screen_diameter=probe.screen_diameter,
        sensor_noise=probe.sensor_noise,
        pressure_limit=probe.pressure_limit,
        depth_to_water=_auto_none(water.depth_to_water),
        min_fraction_dissipated=water.min_fraction_dissipated,
        water_surface=water.surface,
        out_of_range_high_factor=flags.out_of_range_high_factor,
        min_flow_fraction=flags.min_flow_fraction,
        pressure_limit_fraction=flags.pressure_limit_fraction,
        hampel_window=flags.hampel_window,
        hampel_k=flags.hampel_k,
        ec_trend_sigma=flags.ec_trend_sigma,
        ec_min_thickness=flags.ec_min_thickness,
        min_slug_tests=flags.min_slug_tests,
        composite_interval=config.composite.interval,
        facies_method=facies.method,
        min_thickness=facies.min_thickness,
        facies_classes=config.facies_classes(),
        ec_cutoffs=None if all(c is None for c in cutoffs) else cutoffs,
        seed=config.simulation.seed,
    )


# --- model and volumes stage options --------------------------------------------------------
# The settings of the model and volumes stages, built from a validated SiteConfig in one place.
# Every value is read from the schema above (no default is repeated here); "auto" becomes None
# and an empty scheduler becomes dask's local threads.


@dataclass(frozen=True)
class ModelOptions:
    """Settings of the voxel model, in internal units (m).

    Attributes
    ----------
    cell_size
        ``(dx, dy, dz)`` of the grid (``[grid] cell_size``).
    base
        Base elevation of the grid; None = the bottom of the deepest interval (``[grid] base``).
    padding
        Grid padding beyond the boundary (``[grid] padding``).
    variogram_model
        ``'auto'`` or a covariance family (``[variogram] model``).
    range_h, range_v
        Major horizontal and vertical ranges; None = fitted (``[variogram]
        horizontal_range``, ``vertical_range``).
    azimuth
        Degrees clockwise from north of the major horizontal axis.
    minor_ratio
        Minor/major horizontal range ratio (``[variogram] anisotropy_minor``).
    elevation_tolerance
        Elevation tolerance of horizontal variogram pairs.
    neighbors
        Samples per kriging estimate.
    max_per_group
        At most this many samples from one boring (0 = no limit; ``[kriging] max_per_boring``).
    drift
        ``'none'`` or ``'linear_z'``.
    max_distance
        Search distance in variogram ranges; None = no limit.
    chunk_size
        Cells per kriging chunk.
    scheduler
        Dask scheduler: ``'threads'`` (local threads) or a ``dask.distributed`` address.
    n_realizations
        Conditional simulations of log10 K (``[simulation] realizations``).
    seed
        Seed of the simulations.
    engine
        ``'gaussian'`` or ``'facies'`` (``[simulation] engine``).
    """

    cell_size: tuple[float, float, float]
    base: float | None
    padding: float
    variogram_model: str
    range_h: float | None
    range_v: float | None
    azimuth: float
    minor_ratio: float
    elevation_tolerance: float
    neighbors: int
    max_per_group: int
    drift: str
    max_distance: float | None
    chunk_size: int
    scheduler: str
    n_realizations: int
    seed: int
    engine: str = "gaussian"


@dataclass(frozen=True)
class VolumeOptions:
    """Settings of the volumes stage: the injection design defaults of ``[treatment]``.

    Attributes
    ----------
    design_fraction
        Fraction of the effective pore volume to inject (a zone's own value wins).
    radius_of_influence
        Radius of influence of an injection point, m (a zone's own value wins).
    target
        ``'transmissive'`` or ``'all'``: the material treated inside each zone.
    """

    design_fraction: float
    radius_of_influence: float
    target: str


def _auto_none(value: float | str) -> float | None:
    return None if isinstance(value, str) else value


def _model_options(config: SiteConfig) -> ModelOptions:
    grid, variogram, kriging = config.grid, config.variogram, config.kriging
    dx, dy, dz = grid.cell_size
    return ModelOptions(
        cell_size=(dx, dy, dz),
        base=_auto_none(grid.base),
        padding=grid.padding,
        variogram_model=variogram.model,
        range_h=_auto_none(variogram.horizontal_range),
        range_v=_auto_none(variogram.vertical_range),
        azimuth=variogram.azimuth,
        minor_ratio=variogram.anisotropy_minor,
        elevation_tolerance=variogram.elevation_tolerance,
        neighbors=kriging.neighbors,
        max_per_group=kriging.max_per_boring,
        drift=kriging.drift,
        max_distance=_auto_none(kriging.max_distance),
        chunk_size=kriging.chunk_size,
        scheduler=kriging.scheduler or "threads",
        n_realizations=config.simulation.realizations,
        seed=config.simulation.seed,
        engine=config.simulation.engine,
    )


def _volume_options(config: SiteConfig) -> VolumeOptions:
    treatment = config.treatment
    return VolumeOptions(
        design_fraction=treatment.design_fraction,
        radius_of_influence=treatment.radius_of_influence,
        target=treatment.target,
    )


# --- end of model and volumes stage options --------------------------------------------------
