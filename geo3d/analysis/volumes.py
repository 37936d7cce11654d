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
from typing import Any

import numpy as np
import pandas as pd
import shapely
import xarray as xr

from geo3d.analysis.thickness import _dataset
from geo3d.errors import GeometryError, ModelError
from geo3d.grid import height_fraction
from geo3d.model import FaciesTable, classify_log10_k, facies_table

__all__ = [
    "Region",
    "StoredMassInputs",
    "partition_coefficient",
    "retardation_factor",
    "stored_mass",
    "region_weights",
    "probability_stack",
    "interface_area",
    "zone_volumes",
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
    geometry: Any = None
    top: float | None = None
    bottom: float | None = None
    reference: str = "depth"
    band: str = "all"

    @classmethod
    def from_zone(cls, zone: Any) -> Region:
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
    zones: Any, bands: Iterable[Sequence[float]] | None, include_site: bool
) -> list[Region]:
    regions: list[Region] = []
    if include_site:
        regions.append(Region("site"))
    if zones is not None:
        rows: Iterable[Any]
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


def probability_stack(ds: xr.Dataset, table: FaciesTable) -> np.ndarray:
    """Facies probabilities ``(n_classes, nz, ny, nx)`` of a model (0 where unknown).

    From the ``prob_<facies>`` variables, or the indicators of ``facies_code`` without them.
    """
    names = [f"prob_{n}" for n in table.names]
    if all(n in ds for n in names):
        return np.stack([np.nan_to_num(ds[n].values, nan=0.0) for n in names])
    codes = ds["facies_code"].values
    return np.stack([(codes == i).astype(float) for i in range(len(table.names))])


def _percentiles(values: np.ndarray) -> tuple[float, float, float]:
    if values.size == 0:
        return (math.nan, math.nan, math.nan)
    p10, p50, p90 = np.percentile(values, PERCENTILES)
    return float(p10), float(p50), float(p90)


def zone_volumes(
    model: Any,
    zones: Any = None,
    *,
    facies_classes: Sequence[Any] | None = None,
    bands: Iterable[Sequence[float]] | None = None,
    mass: StoredMassInputs | None = None,
    include_site: bool = True,
) -> pd.DataFrame:
    """Bulk, pore and effective pore volumes per region and facies.

    Parameters
    ----------
    model
        VoxelModel (xarray Dataset) or a ``ModelResult``.
    zones
        Treatment zones: a GeoDataFrame (``name``, ``top``, ``bottom``, ``reference``,
        ``geometry``), an iterable of such rows or :class:`Region` objects, or None.
    facies_classes
        Facies classes (porosities); default the ones recorded in the model's attributes.
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
        cells with no estimate, when any), columns ``zone``, ``band``, ``facies``,
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
    ds = _dataset(model)
    table = facies_table(facies_classes, model=ds)
    nclass = len(table.names)
    cell_volume = ds.voxels.cell_volume
    cell_area = ds.voxels.cell_area
    prob = probability_stack(ds, table)
    if "facies_code" in ds:
        codes = ds["facies_code"].values.astype(int)
    else:
        codes = classify_log10_k(ds["log10_k"].values, table).astype(int)
    known = codes >= 0
    sims: list[np.ndarray] = []
    if "facies_realizations" in ds:
        sims = [ds["facies_realizations"].values[r] for r in range(ds.sizes["realization"])]
    elif "realizations" in ds and ds.sizes.get("realization", 0) > 0:
        for r in range(ds.sizes["realization"]):
            sims.append(classify_log10_k(ds["realizations"].isel(realization=r).values, table))
    mask = ds.voxels.mask
    retardation = None
    n_mass = None
    if mass is not None:
        n_mass = table.porosity[table.storage] if mass.porosity is None else mass.porosity
        retardation = retardation_factor(mass.bulk_density, mass.partition(), n_mass)
    rows = []
    for region in _regions(zones, bands, include_site):
        weight, colfrac, _ = region_weights(ds, region)
        area = float((colfrac * mask.any(axis=0)).sum() * cell_area)
        base = {"zone": region.name, "band": region.band, "area_m2": area}
        bulk_expected = (prob * weight[None]).reshape(nclass, -1).sum(axis=1) * cell_volume
        bulk_likely = np.array(
            [float((weight * (codes == i)).sum()) * cell_volume for i in range(nclass)]
        )
        bulk_sims = np.array(
            [
                np.bincount(
                    s.ravel().astype(int) + 1, weights=weight.ravel(), minlength=nclass + 1
                )[1:]
                * cell_volume
                for s in sims
            ]
        ).reshape(len(sims), nclass)
        interface = interface_area(
            codes, weight, ds.voxels.cell_size, first=table.transmissive, second=table.storage
        )
        interface_sims = np.array(
            [
                interface_area(
                    s, weight, ds.voxels.cell_size, first=table.transmissive, second=table.storage
                )
                for s in sims
            ]
        )
        for i, name in enumerate(table.names):
            row = dict(base, facies=name)
            for key, factor in (
                ("bulk_volume_m3", 1.0),
                ("pore_volume_m3", table.porosity[i]),
                ("effective_pore_volume_m3", table.effective_porosity[i]),
            ):
                row[key] = bulk_expected[i] * factor
                row[f"{key}_most_likely"] = bulk_likely[i] * factor
                p = _percentiles(bulk_sims[:, i] * factor)
                row[f"{key}_p10"], row[f"{key}_p50"], row[f"{key}_p90"] = p
            if mass is not None and i == table.storage:
                row["retardation"] = retardation
                for suffix in ("", "_most_likely", "_p10", "_p50", "_p90"):
                    row[f"mass_kg{suffix}"] = stored_mass(
                        row[f"bulk_volume_m3{suffix}"],
                        porosity=n_mass,
                        retardation=retardation,
                        concentration=mass.concentration,
                    )
            rows.append(row)
        unknown = float((weight * ~known).sum()) * cell_volume
        if unknown > 0:
            rows.append(
                dict(
                    base,
                    facies="unclassified",
                    bulk_volume_m3=unknown,
                    bulk_volume_m3_most_likely=unknown,
                )
            )
        total = float(weight.sum()) * cell_volume
        row = dict(base, facies="all", bulk_volume_m3=total, bulk_volume_m3_most_likely=total)
        row["pore_volume_m3"] = float(bulk_expected @ table.porosity)
        row["effective_pore_volume_m3"] = float(bulk_expected @ table.effective_porosity)
        row["pore_volume_m3_most_likely"] = float(bulk_likely @ table.porosity)
        row["effective_pore_volume_m3_most_likely"] = float(bulk_likely @ table.effective_porosity)
        totals = {
            "bulk_volume_m3": bulk_sims.sum(axis=1),
            "pore_volume_m3": bulk_sims @ table.porosity,
            "effective_pore_volume_m3": bulk_sims @ table.effective_porosity,
        }
        for key, values in totals.items():
            p = _percentiles(values)
            row[f"{key}_p10"], row[f"{key}_p50"], row[f"{key}_p90"] = p
        row["interface_area_m2"] = interface
        p = _percentiles(interface_sims)
        row["interface_area_m2_p10"], row["interface_area_m2_p50"] = p[0], p[1]
        row["interface_area_m2_p90"] = p[2]
        rows.append(row)
    table_out = pd.DataFrame(rows)
    first = ["zone", "band", "facies", "area_m2"]
    return table_out[first + [c for c in table_out.columns if c not in first]]
