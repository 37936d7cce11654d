"""Volumes of the voxel model per hydrofacies, treatment zone and depth band.

A region is the whole model, a treatment zone (a polygon with a top and a bottom given as depths
below ground or as elevations) or a depth band over the whole site.  Each model cell counts by
the fraction of it inside the region: the fraction of its column's plan area inside the polygon
(exact polygon intersection) times the fraction of its height between the region's top and
bottom.  Volumes are in m3:

* bulk volume ``V``; pore volume ``V n``; effective pore volume ``V n_e`` (porosities per class);
* the expected value uses the facies probabilities of the model (``prob_<facies>``), the most
  likely value the facies code, and P10/P50/P90 the realizations when the model has them;
* the interface area between transmissive and storage material (where back-diffusion happens)
  counts the cell faces shared by the two;
* the contaminant mass held in the storage material, ``M = V n R C`` with the retardation
  factor ``R = 1 + rho_b Kd / n``, when the user gives the inputs (:class:`StoredMassInputs`).
"""

from __future__ import annotations

import logging
import math
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass
from typing import Any, TypeAlias

import numpy as np
import pandas as pd
import shapely
import xarray as xr

from geo3d.analysis.fields import (
    facies_codes,
    probability_stack,
    realization_facies,
    require_model,
)
from geo3d.errors import GeometryError, ModelError
from geo3d.facies import FaciesClasses
from geo3d.grid import height_fraction

__all__ = [
    "Region",
    "ZoneLike",
    "Zones",
    "StoredMassInputs",
    "partition_coefficient",
    "retardation_factor",
    "stored_mass",
    "region_weights",
    "interface_area",
    "zone_volumes",
    "WATER_BANDS",
]

logger = logging.getLogger(__name__)

PERCENTILES = (10, 50, 90)


def partition_coefficient(koc: float, foc: float) -> float:
    """Soil-water partition coefficient from the organic-carbon one, ``Kd = Koc foc``.

    Parameters
    ----------
    koc
        Organic-carbon partition coefficient (m3/kg; 1 L/kg = 1e-3 m3/kg).
    foc
        Fraction of organic carbon (kg/kg).

    References
    ----------
    .. [1] Karickhoff, S.W., Brown, D.S., Scott, T.A. (1979) Sorption of hydrophobic pollutants
       on natural sediments. Water Research 13, 241-248.

    Examples
    --------
    >>> partition_coefficient(0.1, 0.002)
    0.0002
    """
    if koc < 0 or not 0 <= foc <= 1:
        msg = f"mass: need koc >= 0 and 0 <= foc <= 1, got koc={koc}, foc={foc}"
        raise ModelError(msg)
    return koc * foc


def retardation_factor(bulk_density: float, kd: float, porosity: float) -> float:
    """Retardation factor of a sorbing solute, ``R = 1 + rho_b Kd / n``.

    Parameters
    ----------
    bulk_density
        Dry bulk density ``rho_b`` (kg/m3).
    kd
        Partition coefficient (m3/kg).
    porosity
        Porosity ``n`` (fraction).

    References
    ----------
    .. [1] Freeze, R.A., Cherry, J.A. (1979) Groundwater. Prentice-Hall, eq. 9.14.

    Examples
    --------
    >>> round(retardation_factor(1600.0, 0.0002, 0.4), 12)
    1.8
    """
    if not 0 < porosity <= 1 or bulk_density < 0 or kd < 0:
        msg = (
            "mass: need 0 < porosity <= 1, bulk_density >= 0 and kd >= 0, got "
            f"porosity={porosity}, bulk_density={bulk_density}, kd={kd}"
        )
        raise ModelError(msg)
    return 1.0 + bulk_density * kd / porosity


def stored_mass(
    volume: float | np.ndarray, *, porosity: float, retardation: float, concentration: float
) -> float | np.ndarray:
    """Dissolved plus sorbed mass in a bulk volume, ``M = V n R C``.

    Parameters
    ----------
    volume
        Bulk volume (m3).
    porosity
        Porosity (fraction).
    retardation
        Retardation factor (from :func:`retardation_factor`).
    concentration
        Pore-water concentration (kg/m3; 1 mg/L = 1e-3 kg/m3).

    Returns
    -------
    float or numpy.ndarray
        Mass (kg).

    References
    ----------
    .. [1] Freeze, R.A., Cherry, J.A. (1979) Groundwater. Prentice-Hall, section 9.2: total
       mass per bulk volume n C + rho_b S = n C R for a linear isotherm S = Kd C.
    """
    return volume * porosity * retardation * concentration


@dataclass(frozen=True)
class StoredMassInputs:
    """What is needed for the mass held in the storage material (internal SI units).

    Attributes
    ----------
    concentration
        Pore-water concentration C (kg/m3).
    bulk_density
        Dry bulk density rho_b (kg/m3).
    porosity
        Porosity n of the storage material; None = the storage class porosity.
    kd
        Partition coefficient (m3/kg); or give ``koc`` and ``foc``.
    koc, foc
        Organic-carbon partition coefficient (m3/kg) and organic-carbon fraction.
    """

    concentration: float
    bulk_density: float
    porosity: float | None = None
    kd: float | None = None
    koc: float | None = None
    foc: float | None = None

    def partition(self) -> float:
        """Kd given, or Koc * foc."""
        if self.kd is not None:
            return float(self.kd)
        if self.koc is None or self.foc is None:
            msg = "mass: give kd, or koc and foc"
            raise ModelError(msg)
        return partition_coefficient(self.koc, self.foc)


@dataclass(frozen=True)
class Region:
    """A part of the model: polygon (None = whole site) and vertical limits.

    ``top`` and ``bottom`` are depths below ground (``reference='depth'``) or elevations
    (``reference='elevation'``); None = no limit.
    """

    name: str
    geometry: shapely.Geometry | None = None
    top: float | None = None
    bottom: float | None = None
    reference: str = "depth"
    band: str = "all"

    @classmethod
    def from_zone(cls, zone: ZoneLike) -> Region:
        """Make a region from a zone row (mapping or Series with name, top, bottom, ...)."""
        if isinstance(zone, Region):
            return zone
        get = zone.get if hasattr(zone, "get") else lambda k, d=None: getattr(zone, k, d)

        def number(key: str) -> float | None:
            value = get(key, None)
            if value is None:
                return None
            try:
                value = float(value)
            except (TypeError, ValueError) as exc:
                msg = f"zone {get('name', '?')!r}: '{key}' must be a number, got {value!r}"
                raise GeometryError(msg) from exc
            return None if math.isnan(value) else value

        reference = get("reference", "depth")
        reference = "depth" if reference is None or reference != reference else str(reference)
        if reference not in ("depth", "elevation"):
            msg = f"zone {get('name', '?')!r}: reference must be depth or elevation"
            raise GeometryError(msg)
        return cls(
            name=str(get("name", "zone")),
            geometry=get("geometry", None),
            top=number("top"),
            bottom=number("bottom"),
            reference=reference,
        )

    def limits(self, ground: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Lower and upper elevation of the region per column (NaN = no limit)."""
        nan = np.full(ground.shape, np.nan)
        if self.reference == "depth":
            upper = nan if self.top is None else ground - self.top
            lower = nan if self.bottom is None else ground - self.bottom
        else:
            upper = nan if self.top is None else np.full(ground.shape, self.top)
            lower = nan if self.bottom is None else np.full(ground.shape, self.bottom)
        both = np.isfinite(upper) & np.isfinite(lower)
        if np.any(both & (upper < lower)):
            msg = f"zone {self.name!r}: bottom is above top"
            raise GeometryError(msg)
        return lower, upper


#: One treatment zone: a :class:`Region`, or a mapping or row (pandas Series, named tuple)
#: with ``name``, ``top``, ``bottom``, ``reference`` and ``geometry``.
ZoneLike: TypeAlias = Region | Mapping[str, Any] | pd.Series | tuple[Any, ...]

#: Treatment zones: a (Geo)DataFrame of zone rows, one zone, several, or None.
Zones: TypeAlias = pd.DataFrame | ZoneLike | Iterable[ZoneLike] | None


def region_weights(ds: xr.Dataset, region: Region) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Covered fraction of each model cell in a region.

    Returns
    -------
    weight, column_fraction, height_fraction
        ``weight = mask * column_fraction * height_fraction``, shape ``(nz, ny, nx)``;
        the column fraction ``(ny, nx)``; the height fraction ``(nz, ny, nx)``.
    """
    mask = ds.voxels.mask
    shape2d = mask.shape[1:]
    if region.geometry is None:
        colfrac = np.ones(shape2d)
    else:
        colfrac = ds.voxels.column_fraction(region.geometry).values
    if region.top is None and region.bottom is None:
        hfrac = np.ones(mask.shape)
    else:
        if region.reference == "depth":
            ground = ds.voxels.ground.values
        else:
            ground = np.zeros(shape2d)
        lower, upper = region.limits(ground)
        _, _, dz = ds.voxels.cell_size
        hfrac = height_fraction(ds["z"].values, dz, lower, upper)
    weight = mask * colfrac[None] * hfrac
    return weight, colfrac, hfrac


def interface_area(
    codes: np.ndarray,
    weight: np.ndarray,
    cell_size: Sequence[float],
    *,
    first: int,
    second: int,
) -> float:
    """Area of the cell faces shared by material ``first`` and material ``second``.

    Each shared face counts its area times the smaller covered fraction of its two cells.

    Parameters
    ----------
    codes
        Facies code per cell ``(nz, ny, nx)``.
    weight
        Covered fraction per cell (0 outside the region).
    cell_size
        ``(dx, dy, dz)``.
    first, second
        The two facies codes.

    Returns
    -------
    float
        Interface area (m2).
    """
    dx, dy, dz = (float(v) for v in cell_size)
    a = codes == first
    b = codes == second
    total = 0.0
    for axis, face in ((0, dx * dy), (1, dx * dz), (2, dy * dz)):
        lo = [slice(None)] * 3
        hi = [slice(None)] * 3
        lo[axis] = slice(None, -1)
        hi[axis] = slice(1, None)
        lo_t, hi_t = tuple(lo), tuple(hi)
        pair = (a[lo_t] & b[hi_t]) | (b[lo_t] & a[hi_t])
        w = np.minimum(weight[lo_t], weight[hi_t])
        total += face * float((pair * w).sum())
    return total


def _regions(
    zones: Zones, bands: Iterable[Sequence[float]] | None, include_site: bool
) -> list[Region]:
    regions: list[Region] = []
    if include_site:
        regions.append(Region("site"))
    if zones is not None:
        rows: Iterable[ZoneLike]
        if isinstance(zones, pd.DataFrame):
            rows = (row for _, row in zones.iterrows())
        elif isinstance(zones, Region | Mapping):
            rows = [zones]
        else:
            rows = zones
        for row in rows:
            region = Region.from_zone(row)
            geom = region.geometry
            if geom is not None and (
                not isinstance(geom, shapely.Geometry)
                or geom.geom_type not in ("Polygon", "MultiPolygon")
            ):
                msg = f"zone {region.name!r}: geometry must be a polygon, got {geom!r}"
                raise GeometryError(msg)
            regions.append(region)
    for band in bands or []:
        top, bottom = (float(v) for v in band)
        if bottom <= top:
            msg = f"depth band {band!r}: bottom must be deeper than top"
            raise GeometryError(msg)
        regions.append(Region("site", top=top, bottom=bottom, band=f"{top:g}-{bottom:g} m"))
    return regions


def _percentiles(values: np.ndarray) -> tuple[float, float, float]:
    if values.size == 0:
        return (math.nan, math.nan, math.nan)
    p10, p50, p90 = np.percentile(values, PERCENTILES)
    return float(p10), float(p50), float(p90)


@dataclass(frozen=True)
class _Storage:
    """The inputs of the stored mass with the porosity and retardation they resolve to."""

    inputs: StoredMassInputs
    porosity: float
    retardation: float

    @classmethod
    def of(cls, mass: StoredMassInputs, classes: FaciesClasses) -> _Storage:
        porosity = classes.porosity[classes.storage] if mass.porosity is None else mass.porosity
        return cls(
            mass, porosity, retardation_factor(mass.bulk_density, mass.partition(), porosity)
        )

    def add_to(self, row: dict[str, Any]) -> None:
        """Add the retardation and the stored mass of each bulk volume of a row."""
        row["retardation"] = self.retardation
        for suffix in ("", "_most_likely", "_p10", "_p50", "_p90"):
            row[f"mass_kg{suffix}"] = stored_mass(
                row[f"bulk_volume_m3{suffix}"],
                porosity=self.porosity,
                retardation=self.retardation,
                concentration=self.inputs.concentration,
            )


@dataclass(frozen=True)
class _Fields:
    """The facies fields of a model that every region is measured on."""

    classes: FaciesClasses
    prob: np.ndarray
    codes: np.ndarray
    sims: list[np.ndarray]
    cell_size: tuple[float, float, float]
    cell_volume: float

    @classmethod
    def of(cls, ds: xr.Dataset) -> _Fields:
        classes = ds.voxels.facies_classes
        sims = realization_facies(ds)
        return cls(
            classes,
            probability_stack(ds),
            facies_codes(ds),
            sims,
            ds.voxels.cell_size,
            ds.voxels.cell_volume,
        )

    def interface(self, codes: np.ndarray, weight: np.ndarray) -> float:
        """Transmissive-storage interface area of a code field in a region."""
        return interface_area(
            codes,
            weight,
            self.cell_size,
            first=self.classes.transmissive,
            second=self.classes.storage,
        )

    def bulk(self, weight: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Bulk volume (m3) per class: expected, most likely, and per realization."""
        nclass, cell_volume = len(self.classes), self.cell_volume
        expected = (self.prob * weight[None]).reshape(nclass, -1).sum(axis=1) * cell_volume
        likely = np.array(
            [float((weight * (self.codes == i)).sum()) * cell_volume for i in range(nclass)]
        )
        sims = np.array(
            [
                np.bincount(
                    s.ravel().astype(int) + 1, weights=weight.ravel(), minlength=nclass + 1
                )[1:]
                * cell_volume
                for s in self.sims
            ]
        ).reshape(len(self.sims), nclass)
        return expected, likely, sims


def _set_percentiles(row: dict[str, Any], key: str, values: np.ndarray) -> None:
    row[f"{key}_p10"], row[f"{key}_p50"], row[f"{key}_p90"] = _percentiles(values)


def _facies_rows(
    base: dict[str, Any],
    fields: _Fields,
    bulk: tuple[np.ndarray, np.ndarray, np.ndarray],
    storage: _Storage | None,
) -> list[dict[str, Any]]:
    """One row per facies: bulk, pore and effective pore volumes (and the stored mass)."""
    classes = fields.classes
    expected, likely, sims = bulk
    rows = []
    for i, name in enumerate(classes.names):
        row = dict(base, facies=name)
        for key, factor in (
            ("bulk_volume_m3", 1.0),
            ("pore_volume_m3", classes.porosity[i]),
            ("effective_pore_volume_m3", classes.effective_porosity[i]),
        ):
            row[key] = expected[i] * factor
            row[f"{key}_most_likely"] = likely[i] * factor
            _set_percentiles(row, key, sims[:, i] * factor)
        if storage is not None and i == classes.storage:
            storage.add_to(row)
        rows.append(row)
    return rows


def _total_row(
    base: dict[str, Any],
    fields: _Fields,
    bulk: tuple[np.ndarray, np.ndarray, np.ndarray],
    weight: np.ndarray,
) -> dict[str, Any]:
    """Sum the facies of a region into its ``facies='all'`` row, with the interface area."""
    por, eff = fields.classes.porosity, fields.classes.effective_porosity
    expected, likely, sims = bulk
    total = float(weight.sum()) * fields.cell_volume
    row = dict(base, facies="all", bulk_volume_m3=total, bulk_volume_m3_most_likely=total)
    row["pore_volume_m3"] = float(expected @ por)
    row["effective_pore_volume_m3"] = float(expected @ eff)
    row["pore_volume_m3_most_likely"] = float(likely @ por)
    row["effective_pore_volume_m3_most_likely"] = float(likely @ eff)
    _set_percentiles(row, "bulk_volume_m3", sims.sum(axis=1))
    _set_percentiles(row, "pore_volume_m3", sims @ por)
    _set_percentiles(row, "effective_pore_volume_m3", sims @ eff)
    row["interface_area_m2"] = fields.interface(fields.codes, weight)
    _set_percentiles(
        row, "interface_area_m2", np.array([fields.interface(s, weight) for s in fields.sims])
    )
    return row


def _plan_area_corrected(
    ds: xr.Dataset, region: Region, weight: np.ndarray, colfrac: np.ndarray
) -> tuple[np.ndarray, float]:
    """Scale a region's cell weights to its exact plan area inside the site boundary.

    A model column belongs to the model when its centre lies inside the site boundary, so the
    columns cover the boundary only to within half a cell along its edge, and a zone drawn to
    the boundary loses (or gains) that sliver.  When the Dataset records the boundary
    (``boundary_wkt``), the weights are multiplied by ``exact area / covered area``: the
    region's facies shares in the covered columns stand for the sliver (a ratio estimator,
    Cochran 1977, sec. 6.2).

    Returns
    -------
    weight, area_m2
        The (scaled) weights and the plan area of the region inside the model.

    References
    ----------
    .. [1] Cochran, W.G. (1977) Sampling Techniques, 3rd ed. Wiley.
    """
    covered = float((colfrac * ds.voxels.mask.any(axis=0)).sum() * ds.voxels.cell_area)
    wkt = ds.attrs.get("boundary_wkt")
    if not wkt or covered <= 0:
        return weight, covered
    boundary = shapely.from_wkt(str(wkt))
    plan = boundary if region.geometry is None else shapely.intersection(region.geometry, boundary)
    exact = float(plan.area)
    if exact <= 0:
        return weight, covered
    return weight * (exact / covered), exact


#: Band labels of the parts of a region below and above the water table.
WATER_BANDS = ("saturated", "unsaturated")


def _water_parts(ds: xr.Dataset) -> list[tuple[str, np.ndarray]]:
    """``(band, cells)`` for the saturated and unsaturated parts; none if all is saturated."""
    if "saturated" not in ds:
        return []
    mask = ds.voxels.mask
    saturated = ds["saturated"].values.astype(bool) & mask
    if saturated.sum() == mask.sum():
        return []
    return [(WATER_BANDS[0], saturated), (WATER_BANDS[1], mask & ~saturated)]


def zone_volumes(
    ds: xr.Dataset,
    zones: Zones = None,
    *,
    bands: Iterable[Sequence[float]] | None = None,
    mass: StoredMassInputs | None = None,
    include_site: bool = True,
) -> pd.DataFrame:
    """Bulk, pore and effective pore volumes per region and facies.

    Parameters
    ----------
    ds
        The VoxelModel (its facies classes, with their porosities, are read from its
        attributes).
    zones
        Treatment zones: a GeoDataFrame (``name``, ``top``, ``bottom``, ``reference``,
        ``geometry``), an iterable of such rows or :class:`Region` objects, or None.
    bands
        Depth bands ``(top_depth, bottom_depth)`` (m below ground) over the whole site.
    mass
        Inputs for the mass held in the storage material; None = no mass.
    include_site
        Add the whole model as region ``"site"``.

    Returns
    -------
    pandas.DataFrame
        One row per region and facies (plus ``facies='all'``; ``'unclassified'`` for model
        cells with no estimate, when any), and the same per region for its parts below and
        above the water table (``band`` ``'saturated'`` and ``'unsaturated'``; facies there
        come from EC in a facies-first model), columns ``zone``, ``band``, ``facies``,
        ``area_m2`` (plan area of the region inside the model), ``bulk_volume_m3``,
        ``pore_volume_m3``, ``effective_pore_volume_m3`` (expected values from the facies
        probabilities), the same with ``_most_likely`` (from the facies code) and with
        ``_p10``/``_p50``/``_p90`` (over the realizations; NaN without), ``interface_area_m2``
        (on the ``'all'`` rows, with its ``_p10``/``_p50``/``_p90``) and, with ``mass``,
        ``retardation`` and ``mass_kg`` (+ percentiles) on the storage rows.

    References
    ----------
    .. [1] Freeze, R.A., Cherry, J.A. (1979) Groundwater. Prentice-Hall, section 2.5: porosity
       and effective porosity as void and drainable fractions of the bulk volume.
    """
    ds = require_model(ds)
    fields = _Fields.of(ds)
    storage = None if mass is None else _Storage.of(mass, fields.classes)
    water_parts = _water_parts(ds)
    rows = []
    for region in _regions(zones, bands, include_site):
        weight, colfrac, _ = region_weights(ds, region)
        weight, area = _plan_area_corrected(ds, region, weight, colfrac)
        base = {"zone": region.name, "band": region.band, "area_m2": area}
        bulk = fields.bulk(weight)
        rows += _facies_rows(base, fields, bulk, storage)
        unknown = float((weight * (fields.codes < 0)).sum()) * ds.voxels.cell_volume
        if unknown > 0:
            rows.append(
                dict(
                    base,
                    facies="unclassified",
                    bulk_volume_m3=unknown,
                    bulk_volume_m3_most_likely=unknown,
                )
            )
        rows.append(_total_row(base, fields, bulk, weight))
        for band, part in water_parts if region.band == "all" else []:
            part_weight = weight * part
            if part_weight.sum() > 0:
                part_base = dict(base, band=band)
                part_bulk = fields.bulk(part_weight)
                rows += _facies_rows(part_base, fields, part_bulk, storage)
                rows.append(_total_row(part_base, fields, part_bulk, part_weight))
    table_out = pd.DataFrame(rows)
    first = ["zone", "band", "facies", "area_m2"]
    return table_out[first + [c for c in table_out.columns if c not in first]]
