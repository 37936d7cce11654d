"""The fields of a VoxelModel that the analyses read: facies codes, realizations, plan maps.

Every analysis takes the VoxelModel itself (an :class:`xarray.Dataset` from
:class:`geo3d.model.VoxelModel`); its facies classes come from its attributes through
``ds.voxels.facies_classes``.
"""

from __future__ import annotations

from collections.abc import Iterator, Mapping
from typing import Any

import numpy as np
import xarray as xr

from geo3d.errors import ModelError
from geo3d.facies import FaciesClasses

__all__ = [
    "require_model",
    "facies_codes",
    "realization_fields",
    "realization_facies",
    "effective_porosity_of",
    "probability_stack",
    "plan_map",
]


def require_model(ds: object) -> xr.Dataset:
    """Return ``ds`` when it is a VoxelModel Dataset, else raise :class:`ModelError`."""
    if not isinstance(ds, xr.Dataset):
        msg = f"expected a VoxelModel (xarray.Dataset), got {type(ds)!r}"
        raise ModelError(msg)
    return ds


def facies_codes(ds: xr.Dataset) -> np.ndarray:
    """Most likely facies code per cell (``facies_code``, else from ``log10_k``); -1 = none."""
    if "facies_code" in ds:
        return ds["facies_code"].values.astype(int)
    return ds.voxels.facies_classes.classify(ds["log10_k"].values).astype(int)


def realization_fields(ds: xr.Dataset) -> Iterator[np.ndarray]:
    """Yield the simulated log10 K fields ``(nz, ny, nx)``, one per realization."""
    if "realizations" not in ds:
        return
    for r in range(ds.sizes.get("realization", 0)):
        yield ds["realizations"].isel(realization=r).values


def realization_facies(ds: xr.Dataset) -> list[np.ndarray]:
    """Facies codes ``(nz, ny, nx)`` of each realization (empty without realizations).

    The simulated facies (``facies_realizations``) of a facies-first model, otherwise the
    classes of the simulated log10 K fields.
    """
    if "facies_realizations" in ds:
        values = ds["facies_realizations"].values
        return [values[r] for r in range(values.shape[0])]
    classes = ds.voxels.facies_classes
    return [classes.classify(field) for field in realization_fields(ds)]


def effective_porosity_of(codes: np.ndarray, classes: FaciesClasses) -> np.ndarray:
    """Effective porosity of each cell's facies (0 where unclassified)."""
    return np.where(codes >= 0, classes.effective_porosity[np.clip(codes, 0, None)], 0.0)


def probability_stack(ds: xr.Dataset) -> np.ndarray:
    """Facies probabilities ``(n_classes, nz, ny, nx)`` of a model (0 where unknown).

    From the ``prob_<facies>`` variables, or the indicators of ``facies_code`` without them.
    """
    classes = ds.voxels.facies_classes
    names = [f"prob_{n}" for n in classes.names]
    if all(n in ds for n in names):
        return np.stack([np.nan_to_num(ds[n].values, nan=0.0) for n in names])
    codes = ds["facies_code"].values
    return np.stack([(codes == i).astype(float) for i in range(len(classes))])


def plan_map(
    ds: xr.Dataset, values: np.ndarray, name: str, attrs: Mapping[str, Any]
) -> xr.DataArray:
    """Make a ``(y, x)`` map on the columns of the model, with its CRS in the attributes."""
    out = xr.DataArray(
        values,
        dims=("y", "x"),
        coords={"y": ds["y"], "x": ds["x"]},
        name=name,
        attrs=dict(attrs),
    )
    if ds.attrs.get("crs"):
        out.attrs["crs"] = ds.attrs["crs"]
    return out
