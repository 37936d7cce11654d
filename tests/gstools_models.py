"""The gstools equivalent of a geo3d covariance model, the reference of the geostatistics tests.

gstools rotates the main axis counter-clockwise from +x, so its angle is ``90 - azimuth``
degrees, and its length scales are the practical ranges times a model-dependent factor (1/3
exponential, 1 spherical, sqrt(pi/12) Gaussian; for Matern sqrt(nu) over geo3d's scale).

References
----------
Mueller, S., Schueler, L., Zech, A. and Hesse, F. (2022). GSTools v1.3: a toolbox for
geostatistical modelling in Python. Geosci. Model Dev. 15, 3161-3182.
"""

import math

import gstools as gs

from geo3d.geostats.covariance import CovarianceModel, _matern_scale

_CLASSES = {
    "exponential": gs.Exponential,
    "spherical": gs.Spherical,
    "gaussian": gs.Gaussian,
    "matern": gs.Matern,
}


def len_scales(model: CovarianceModel) -> list[float]:
    """Length scales ``[major, minor, vertical]`` of the equivalent gstools model."""
    if model.kind == "exponential":
        f = 1.0 / 3.0
    elif model.kind == "spherical":
        f = 1.0
    elif model.kind == "gaussian":
        f = math.sqrt(math.pi / 12.0)
    else:
        f = math.sqrt(model.nu) / _matern_scale(float(model.nu))
    return [model.range_h * f, model.range_h * model.minor_ratio * f, model.range_v * f]


def to_gstools(model: CovarianceModel) -> gs.CovModel:
    """Return the same model as a 3D ``gstools.CovModel``."""
    kwargs = {
        "dim": 3,
        "var": model.sill,
        "nugget": model.nugget,
        "len_scale": len_scales(model),
        "angles": math.radians(90.0 - model.azimuth),
    }
    if model.kind == "matern":
        kwargs["nu"] = model.nu
    return _CLASSES[model.kind](**kwargs)
