"""Column summaries of the hydrofacies: thickness and mean probability of each class.

Each map is a 2D :class:`xarray.DataArray` with dims ``("y", "x")`` on the model's x, y
coordinates, NaN where no cell of the column lies inside the model.
"""

from __future__ import annotations

import numpy as np
import xarray as xr

from geo3d.analysis.fields import require_model
from geo3d.facies import FaciesClasses

__all__ = ["facies_column_maps"]


def facies_column_maps(ds: xr.Dataset) -> dict[str, xr.DataArray]:
    """Thickness and column-mean probability of every hydrofacies class.

    ``thickness_<name>`` is the number of cells of the column whose most likely facies is the
    class, times the cell height (m). ``mean_prob_<name>`` is the mean of ``prob_<name>`` over
    the cells of the column that hold a probability (NaN cells skipped), when the model holds
    that probability. The classes are those recorded in the model's attributes.

    Parameters
    ----------
    ds
        VoxelModel with ``facies_code`` and optionally ``mask`` and ``prob_<name>``.

    Returns
    -------
    dict of str to xarray.DataArray
        Empty when the model has no ``facies_code``; thickness maps carry ``units = "m"``.

    Examples
    --------
    >>> import numpy as np, xarray as xr
    >>> from geo3d.facies import DEFAULT_CLASSES
    >>> ds = xr.Dataset(coords={"z": [0.25, 0.75], "y": [0.5], "x": [0.5]},
    ...                 attrs=DEFAULT_CLASSES.attrs())
    >>> ds["facies_code"] = (("z", "y", "x"), np.array([[[0]], [[0]]], dtype=np.int8))
    >>> float(facies_column_maps(ds)["thickness_storage"].item())
    1.0
    """
    ds = require_model(ds)
    out: dict[str, xr.DataArray] = {}
    if "facies_code" not in ds:
        return out
    dz = float(np.abs(np.diff(ds["z"].values[:2]))[0]) if ds.sizes["z"] > 1 else 1.0
    inside = ds["mask"].any("z") if "mask" in ds else xr.ones_like(ds["facies_code"].isel(z=0))
    for code, name in enumerate(FaciesClasses.from_attrs(ds.attrs).names):
        thickness = ((ds["facies_code"] == code).sum("z") * dz).where(inside)
        out[f"thickness_{name}"] = thickness.assign_attrs(units="m")
        prob = f"prob_{name}"
        if prob in ds:
            out[f"mean_prob_{name}"] = ds[prob].mean("z", skipna=True).where(inside)
    return out
