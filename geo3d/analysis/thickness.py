"""Thickness maps of the voxel model: transmissive and storage thickness, main transmissive zone.

Every map is a 2D :class:`xarray.DataArray` with dims ``("y", "x")`` on the model's x, y
coordinates (NaN outside the model).  Depths are measured down from the ground surface of each
column (``ground_elev``), elevations upward.  Maps come from the most likely facies and kriged
log10 K; when the model holds simulations (``realizations``), each map is also given as
``<name>_p10``, ``<name>_p50``, ``<name>_p90`` over the realizations (the 10th, 50th and 90th
percentiles, so P10 <= P50 <= P90).
"""

from __future__ import annotations

import logging
from collections.abc import Sequence

import numpy as np
import xarray as xr

from geo3d.analysis.fields import facies_codes, plan_map, realization_fields, require_model
from geo3d.errors import ModelError
from geo3d.facies import FaciesClasses
from geo3d.grid import height_fraction

__all__ = ["thickness_maps", "depth_range_fraction", "column_runs", "nan_percentiles"]

logger = logging.getLogger(__name__)

_UNITS = {
    "transmissive_thickness": "m",
    "storage_thickness": "m",
    "column_height": "m",
    "transmissive_top_depth": "m",
    "transmissive_bottom_depth": "m",
    "transmissive_top_elev": "m",
    "transmissive_bottom_elev": "m",
    "storage_layers": "1",
    "transmissivity": "m2/s",
}


def depth_range_fraction(ds: xr.Dataset, depth_range: Sequence[float] | None) -> np.ndarray:
    """Fraction of each cell's height inside a depth range (and inside the mask).

    Parameters
    ----------
    ds
        VoxelModel with ``ground_elev`` (needed only when ``depth_range`` is given).
    depth_range
        ``(top_depth, bottom_depth)`` in m below ground, or None for the whole column.

    Returns
    -------
    numpy.ndarray
        Shape ``(nz, ny, nx)``, in ``[0, 1]``, zero outside the mask.
    """
    mask = ds.voxels.mask
    if depth_range is None:
        return mask.astype(float)
    top_depth, bottom_depth = (float(v) for v in depth_range)
    if bottom_depth <= top_depth:
        msg = f"depth range: bottom ({bottom_depth}) must be deeper than top ({top_depth})"
        raise ModelError(msg)
    ground = ds.voxels.ground.values
    _, _, dz = ds.voxels.cell_size
    frac = height_fraction(ds["z"].values, dz, ground - bottom_depth, ground - top_depth)
    return frac * mask


def nan_percentiles(stack: np.ndarray, percentiles: Sequence[float]) -> list[np.ndarray]:
    """Percentiles along the first axis ignoring NaN, vectorised (numpy's linear method).

    Same values as :func:`numpy.nanpercentile` (NaN where a column is all NaN), without its
    per-column loop.

    Examples
    --------
    >>> nan_percentiles(np.array([[1.0, np.nan], [3.0, np.nan], [np.nan, np.nan]]), [50])
    [array([ 2., nan])]
    """
    ordered = np.sort(stack, axis=0)  # NaN last
    count = np.isfinite(ordered).sum(axis=0)
    out = []
    for q in percentiles:
        position = np.maximum(count - 1, 0) * (float(q) / 100.0)
        lower = np.floor(position).astype(int)
        upper = np.minimum(lower + 1, np.maximum(count - 1, 0))
        low = np.take_along_axis(ordered, lower[None], 0)[0]
        high = np.take_along_axis(ordered, upper[None], 0)[0]
        value = low + (high - low) * (position - lower)
        out.append(np.where(count > 0, value, np.nan))
    return out


def column_runs(indicator: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Longest vertical run and run count of a boolean ``(nz, ...)`` indicator.

    Runs are counted along the first axis (z ascending).  Ties between equally long runs go to
    the upper one.

    Returns
    -------
    length, end, count
        Length in cells of the longest run, index of its upper cell (-1 when there is no run),
        and the number of runs, each of shape ``indicator.shape[1:]``.

    Examples
    --------
    >>> length, end, count = column_runs(np.array([1, 1, 0, 1, 1, 1, 0], bool))
    >>> int(length), int(end), int(count)
    (3, 5, 2)
    """
    ind = np.asarray(indicator, bool)
    run = np.zeros(ind.shape[1:], int)
    best = np.zeros(ind.shape[1:], int)
    end = np.full(ind.shape[1:], -1, int)
    count = np.zeros(ind.shape[1:], int)
    previous = np.zeros(ind.shape[1:], bool)
    for k in range(ind.shape[0]):
        run = np.where(ind[k], run + 1, 0)
        longer = run >= best
        longer &= run > 0
        best = np.where(longer, run, best)
        end = np.where(longer, k, end)
        count += ind[k] & ~previous
        previous = ind[k]
    return best, end, count


def _maps_from_codes(
    codes: np.ndarray,
    log10_k: np.ndarray,
    weight: np.ndarray,
    ds: xr.Dataset,
    classes: FaciesClasses,
) -> dict[str, np.ndarray]:
    """Compute the maps of one facies field (``weight``: covered height fraction per cell)."""
    _, _, dz = ds.voxels.cell_size
    z = ds["z"].values
    ground = ds["ground_elev"].values if "ground_elev" in ds else None
    in_range = weight > 0
    present = in_range.any(axis=0)
    transmissive = (codes == classes.transmissive) & in_range
    storage = (codes == classes.storage) & in_range
    out: dict[str, np.ndarray] = {}
    out["column_height"] = (weight * dz).sum(axis=0)
    out["transmissive_thickness"] = (transmissive * weight * dz).sum(axis=0)
    out["storage_thickness"] = (storage * weight * dz).sum(axis=0)
    k = np.where(in_range, 10.0 ** np.nan_to_num(log10_k, nan=-np.inf), 0.0)
    out["transmissivity"] = (k * weight * dz).sum(axis=0)
    length, end, count = column_runs(transmissive)
    has = length > 0
    end_safe = np.clip(end, 0, None)
    start = np.clip(end - length + 1, 0, None)
    # elevation of the top and bottom of the main run, trimmed by partial cells at the limits
    top_frac = np.take_along_axis(weight, end_safe[None], 0)[0]
    bottom_frac = np.take_along_axis(weight, start[None], 0)[0]
    top_elev = z[end_safe] - dz / 2 + top_frac * dz
    bottom_elev = z[start] + dz / 2 - bottom_frac * dz
    out["transmissive_top_elev"] = np.where(has, top_elev, np.nan)
    out["transmissive_bottom_elev"] = np.where(has, bottom_elev, np.nan)
    if ground is not None:
        out["transmissive_top_depth"] = ground - out["transmissive_top_elev"]
        out["transmissive_bottom_depth"] = ground - out["transmissive_bottom_elev"]
    out["storage_layers"] = column_runs(storage)[2].astype(float)
    for name, values in out.items():
        out[name] = np.where(present, values, np.nan)
    return out


def thickness_maps(
    ds: xr.Dataset, *, depth_range: Sequence[float] | None = None
) -> dict[str, xr.DataArray]:
    """Thickness maps of the transmissive and storage material.

    Parameters
    ----------
    ds
        The VoxelModel (its facies classes are read from its attributes).
    depth_range
        ``(top_depth, bottom_depth)`` in m below ground limiting every map (cells cut by the
        limits count by their covered height); None = the whole model column.

    Returns
    -------
    dict of str to xarray.DataArray
        ``transmissive_thickness``, ``storage_thickness``, ``column_height`` (m);
        ``transmissive_top_depth``, ``transmissive_bottom_depth``, ``transmissive_top_elev``,
        ``transmissive_bottom_elev`` of the main (thickest) transmissive zone (NaN where the
        column has none); ``storage_layers`` (number of separate storage layers);
        ``transmissivity`` = sum of K * dz (m2/s).  With realizations, also ``<name>_p10``,
        ``<name>_p50`` and ``<name>_p90`` for each.

    References
    ----------
    .. [1] Freeze, R.A., Cherry, J.A. (1979) Groundwater. Prentice-Hall, section 2.6:
       transmissivity T = K b, summed over layers for a layered aquifer.
    """
    ds = require_model(ds)
    classes = ds.voxels.facies_classes
    weight = depth_range_fraction(ds, depth_range)
    maps = _maps_from_codes(facies_codes(ds), ds["log10_k"].values, weight, ds, classes)
    stacks: dict[str, list[np.ndarray]] = {name: [] for name in maps}
    for field in realization_fields(ds):
        sim = _maps_from_codes(classes.classify(field), field, weight, ds, classes)
        for name, values in sim.items():
            stacks[name].append(values)
    for name, stack in stacks.items():
        if stack:
            p10, p50, p90 = nan_percentiles(np.stack(stack), (10, 50, 90))
            maps[f"{name}_p10"], maps[f"{name}_p50"], maps[f"{name}_p90"] = p10, p50, p90
    result = {}
    for name, values in maps.items():
        base = name.rsplit("_p", 1)[0] if name.endswith(("_p10", "_p50", "_p90")) else name
        result[name] = plan_map(ds, values, name, {"units": _UNITS[base]})
    logger.debug("thickness maps: %s", sorted(result))
    return result
