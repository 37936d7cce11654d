"""A layer-cake voxel model with an analytic answer, shared by the analysis tests.

Flat layers of known thickness and log10 K under a flat ground at 10 m elevation, base at 0 m;
probabilities from a zero kriging variance, so every cell is certain.
"""

import numpy as np
import shapely

from geo3d.facies import DEFAULT_CLASSES, FaciesClasses
from geo3d.grid import make_grid
from geo3d.model import facies_probabilities

# The default classes of the site template: storage < -7 <= transitional < -5 <= transmissive
# (common practice); porosities after Freeze & Cherry (1979) Table 2.4.
CLASSES = list(DEFAULT_CLASSES)

# Layers as (top depth, bottom depth, log10 K), in m below a flat ground at 10 m.
LAYERS = [(0, 3, -6.0), (3, 5, -8.0), (5, 8, -4.0), (8, 10, -8.0)]


def layer_cake(*, size=(20.0, 10.0), cell=(1.0, 1.0, 0.5), realizations=None, ground=10.0):
    """Return the layer-cake VoxelModel over a ``size`` (x, y) box with its corner at 0, 0."""
    ds = make_grid(shapely.box(0, 0, *size), cell_size=cell, top=ground, base=0.0)
    shape = tuple(ds.sizes[d] for d in "zyx")
    ds["ground_elev"] = (("y", "x"), np.full(shape[1:], ground))
    depth = ground - ds["z"].values
    column = np.full(depth.shape, np.nan)
    for top, bottom, value in LAYERS:
        column[(depth > top) & (depth < bottom)] = value
    field = np.broadcast_to(column[:, None, None], shape).copy()
    table = FaciesClasses.from_items(CLASSES)
    dims = ("z", "y", "x")
    ds["mask"] = (dims, np.isfinite(field))
    ds["log10_k"] = (dims, field)
    ds["log10_k_var"] = (dims, np.zeros(shape))
    ds["k"] = 10.0 ** ds["log10_k"]
    ds["facies_code"] = (dims, table.classify(field))
    prob = facies_probabilities(field, np.zeros(shape), table)
    for i, name in enumerate(table.names):
        ds[f"prob_{name}"] = (dims, prob[i])
    ds.attrs.update(table.attrs())
    ds.attrs["crs"] = "EPSG:32633"
    if realizations is not None:
        ds["realizations"] = (("realization", *dims), realizations)
    return ds
