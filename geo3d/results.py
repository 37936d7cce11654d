"""What a run computed: the typed results of every stage, handed to the outputs.

:class:`RunResults` gathers the stage results (:class:`~geo3d.site.Site`,
:class:`~geo3d.logs.process.LogResults`, :class:`~geo3d.model.ModelResult`, the maps, volumes
and :class:`~geo3d.analysis.injection.InjectionPlan` of the volumes stage) for the writers of
:mod:`geo3d.io` and the report.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

import pandas as pd
import xarray as xr

from geo3d.analysis.injection import InjectionPlan
from geo3d.facies import DEFAULT_CLASSES, FaciesClasses
from geo3d.logs.process import LogResults
from geo3d.model import ModelResult
from geo3d.site import Site

__all__ = ["RunResults"]


@dataclass
class RunResults:
    """Everything a run computed.

    Attributes
    ----------
    site
        The validated input.
    logs
        Result of the logs stage.
    model
        Result of the model stage.
    maps
        2D maps on the model's ``(y, x)`` grid: thickness maps, water table, depth to water.
    facies_maps
        Column summaries of each hydrofacies on the same grid, shown by the report
        (:func:`geo3d.analysis.facies_maps.facies_column_maps`).
    volumes
        Volumes per zone, depth band and facies (:func:`geo3d.analysis.volumes.zone_volumes`).
    injection
        Zone name -> injection plan.
    log_figures
        Boring id -> PNG of its log figure, drawn once (written by the export stage and
        embedded in the report).
    timings
        Stage -> wall-clock seconds.
    outputs
        Files written, relative to the output folder.
    out_dir
        The output folder (None when nothing was written).
    """

    site: Site
    logs: LogResults | None = None
    model: ModelResult | None = None
    maps: dict[str, xr.DataArray] = field(default_factory=dict)
    facies_maps: dict[str, xr.DataArray] = field(default_factory=dict)
    volumes: pd.DataFrame | None = None
    injection: dict[str, InjectionPlan] = field(default_factory=dict)
    log_figures: dict[str, bytes] = field(default_factory=dict)
    timings: dict[str, float] = field(default_factory=dict)
    outputs: list[Path] = field(default_factory=list)
    out_dir: Path | None = None

    @property
    def dataset(self) -> xr.Dataset | None:
        """The voxel model Dataset (None before the model stage)."""
        return None if self.model is None else self.model.dataset

    @property
    def facies_classes(self) -> FaciesClasses:
        """The hydrofacies classes of the run (the defaults before the logs stage)."""
        return DEFAULT_CLASSES if self.logs is None else self.logs.facies_classes
