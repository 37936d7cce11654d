"""Answers from the voxel model: maps, volumes, injection plans, water table, next borings.

Every function takes the VoxelModel (the :class:`xarray.Dataset` made by
:class:`geo3d.model.VoxelModel`) and keyword-only options; the facies classes are read from the
model's attributes (``ds.voxels.facies_classes``).
"""

from geo3d.analysis.advise import BoringAdvice, advise_borings
from geo3d.analysis.facies_maps import facies_column_maps
from geo3d.analysis.injection import InjectionPlan, injection_plan, triangular_layout
from geo3d.analysis.thickness import thickness_maps
from geo3d.analysis.volumes import StoredMassInputs, zone_volumes
from geo3d.analysis.water_table import (
    depth_to_water_map,
    saturated_thickness,
    water_table_gradient,
    water_table_map,
)

__all__ = [
    "BoringAdvice",
    "advise_borings",
    "InjectionPlan",
    "depth_to_water_map",
    "facies_column_maps",
    "water_table_gradient",
    "StoredMassInputs",
    "injection_plan",
    "saturated_thickness",
    "thickness_maps",
    "triangular_layout",
    "water_table_map",
    "zone_volumes",
]
