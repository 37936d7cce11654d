"""Geostatistics: covariance models, variograms, kriging, cross-validation, simulation.

Coordinates are ``(x, y, z)`` in the site CRS, z the elevation, upward; all functions take plain
arrays.
"""

from geo3d.geostats.covariance import KINDS, CovarianceModel, correlation
from geo3d.geostats.kriging import OrdinaryKriging

__all__ = ["KINDS", "CovarianceModel", "OrdinaryKriging", "correlation"]
