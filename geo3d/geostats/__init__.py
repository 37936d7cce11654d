"""Geostatistics: covariance models, variograms, kriging, cross-validation, simulation.

Coordinates are ``(x, y, z)`` in the site CRS, z the elevation, upward; all functions take plain
arrays.
"""

from geo3d.geostats.covariance import KINDS, CovarianceModel, correlation
from geo3d.geostats.crossval import CrossValidation, leave_one_group_out
from geo3d.geostats.kriging import OrdinaryKriging
from geo3d.geostats.simulation import conditional_simulation, unconditional_fields
from geo3d.geostats.variogram import (
    VariogramFit,
    experimental_horizontal,
    experimental_isotropic,
    experimental_vertical,
    fit_anisotropic,
    fit_model,
)

__all__ = [
    "KINDS",
    "CovarianceModel",
    "CrossValidation",
    "OrdinaryKriging",
    "VariogramFit",
    "conditional_simulation",
    "correlation",
    "experimental_horizontal",
    "experimental_isotropic",
    "experimental_vertical",
    "fit_anisotropic",
    "fit_model",
    "leave_one_group_out",
    "unconditional_fields",
]
