"""Where to push next: rank locations for new borings by how much they narrow a design target.

A *target* is a weighted sum of facies indicators over model cells, ``T = sum_i w_i I_i``:

* ``storage``: bulk volume of the storage material in the treatment zones
  (``w_i`` = covered fraction times cell volume);
* ``transmissive``: mean thickness of the transmissive material over each zone
  (``w_i`` = covered cell volume / zone area);
* ``injection``: design injection volume of each zone, ``V = A b n_e f`` of its transmissive
  material (``w_i`` = covered cell volume times ``n_e f``), as in the injection plans.

The criterion is geometric (it needs no new data): the reduction of the kriging variance summed
over the target's cells when one full-depth boring is added at a candidate location (Christakos,
1992, ch. 10; van Groenigen, 1999, the weighted mean kriging variance), or optionally the
reduction of the variance of the target itself (the block variance of the weighted sum). The
spatial model is the one of the voxel model: the fitted covariance of log10 K (normalised to a
unit sill, its nugget share kept) carries the correlation of the indicators, and each cell's
variance is scaled so that, given the existing borings, it equals the indicator variance
``p (1 - p)`` of the model's facies probability. With simple kriging on all data, adding the
points ``B`` of a boring lowers the covariance of any two points ``i, j`` by the low-rank term

``C(i, B | D) C(B, B | D)^-1 C(B, j | D)``

(the conditional covariance of a Gaussian vector; Christakos, 1992), so each candidate costs one
small ``m x m`` Cholesky factor, and a chosen boring updates every candidate with a rank-``m``
correction instead of a new kriging. Borings are chosen greedily, each given the ones before.

The expected P10-P90 width after the new borings is the width of the model's realizations (the
Gaussian width of the block variance when there are none) times the square root of the ratio
of the target's block variance after and before.

References
----------
.. [1] Christakos, G. (1992) Random Field Models in Earth Sciences. Academic Press, ch. 10
   (sampling design: optimal data locations from the estimation variance, which depends on the
   geometry only).
.. [2] van Groenigen, J.W. (1999) Constrained optimisation of spatial sampling: a geostatistical
   approach. PhD thesis, Wageningen University, ITC publication 65 (minimisation of the weighted
   mean kriging variance; greedy and annealing designs under access constraints).
.. [3] Journel, A.G., Huijbregts, C.J. (1978) Mining Geostatistics. Academic Press, ch. V
   (simple kriging, kriging variance, block variance from point discretisation).
"""

from __future__ import annotations

import ast
import logging
import math
import re
import warnings
from collections.abc import Mapping
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
import shapely
import xarray as xr
from scipy.linalg import solve_triangular
from scipy.spatial.distance import cdist

from geo3d.analysis.fields import (
    plan_map,
    probability_stack,
    realization_facies,
    require_model,
)
from geo3d.analysis.volumes import Region, Zones, _regions, region_weights
from geo3d.errors import Geo3dWarning, GeometryError, ModelError
from geo3d.geostats.covariance import CovarianceModel

__all__ = [
    "TARGETS",
    "CRITERIA",
    "TargetCells",
    "BoringAdvice",
    "covariance_from_attrs",
    "target_cells",
    "candidate_grid",
    "column_points",
    "BoringDesign",
    "advise_borings",
]

logger = logging.getLogger(__name__)

#: Design targets the advice can rank for.
TARGETS = ("storage", "transmissive", "injection")
#: Ranking criteria: summed cell variance, or variance of the target (block variance).
CRITERIA = ("summed", "block")
#: z of the standard normal at 90 % (P10-P90 of a Gaussian spans 2 z90 standard deviations).
Z90 = 1.2815515655446004
#: Most candidates ranked at once (memory: support points x candidates x levels doubles).
MAX_CANDIDATES = 1500
#: Relative jitter on the diagonal of the data covariance (keeps the Cholesky factor stable).
_JITTER = 1e-9
#: Floor of the normalised kriging variance used to scale a cell's variance.
_VAR_FLOOR = 1e-3


def covariance_from_attrs(ds: xr.Dataset, key: str = "variogram_log10_k") -> CovarianceModel:
    """Read the fitted covariance model that a voxel model records in its attributes.

    Parameters
    ----------
    ds
        The VoxelModel Dataset (attribute ``variogram_log10_k``, the ``repr`` of a
        :class:`~geo3d.geostats.covariance.CovarianceModel`).
    key
        Attribute name.

    Returns
    -------
    CovarianceModel

    Examples
    --------
    >>> ds = xr.Dataset(attrs={"variogram_log10_k": "CovarianceModel(kind='spherical', "
    ...                        "sill=0.8, nugget=0.2, range_h=30.0, range_v=2.0)"})
    >>> covariance_from_attrs(ds).range_h
    30.0
    """
    text = str(ds.attrs.get(key, ""))
    match = re.fullmatch(r"\s*CovarianceModel\((.*)\)\s*", text, flags=re.S)
    if match is None:
        msg = f"the voxel model has no fitted covariance in attribute {key!r} (got {text!r})"
        raise ModelError(msg)
    call = ast.parse(f"f({match.group(1)})", mode="eval").body
    assert isinstance(call, ast.Call)
    kwargs = {kw.arg: ast.literal_eval(kw.value) for kw in call.keywords if kw.arg}
    return CovarianceModel(**kwargs)


@dataclass
class TargetCells:
    """A design target as cell weights on the voxel model.

    Attributes
    ----------
    name
        ``storage``, ``transmissive`` or ``injection``.
    unit
        Unit of the target value (``m3`` or ``m``).
    weights
        Zone name -> weights ``(nz, ny, nx)`` of the facies indicator (0 outside the zone).
    facies
        Code of the facies whose indicator the target sums.
    variance
        Indicator variance ``p (1 - p)`` per cell ``(nz, ny, nx)`` (0 where unknown), with p
        the facies frequency over the realizations (the ``prob_<facies>`` variable without).
    total
        Name of the combined target (the sum of the zones) in :attr:`weights`.
    """

    name: str
    unit: str
    weights: dict[str, np.ndarray]
    facies: int
    variance: np.ndarray
    total: str = "all zones"

    def realization_values(self, ds: xr.Dataset) -> dict[str, np.ndarray]:
        """Target value of each realization, per zone (empty arrays without realizations)."""
        sims = realization_facies(ds)
        return {
            zone: np.array([float((w * (codes == self.facies)).sum()) for codes in sims])
            for zone, w in self.weights.items()
        }

    def expected_values(self, ds: xr.Dataset) -> dict[str, float]:
        """Return the expected target value per zone, from the facies probabilities."""
        prob = probability_stack(ds)[self.facies]
        return {zone: float((w * prob).sum()) for zone, w in self.weights.items()}


def _zone_regions(ds: xr.Dataset, zones: Zones) -> list[Region]:
    regions = _regions(zones, None, include_site=False)
    if not regions:
        logger.info("no treatment zone: the target is the saturated model")
        regions = [Region("site")]
    return regions


def _indicator_mean(ds: xr.Dataset, facies: int) -> np.ndarray:
    """Probability of a facies per cell: frequency over the realizations, else ``prob_``."""
    sims = realization_facies(ds)
    if len(sims) >= 2:
        return np.mean([codes == facies for codes in sims], axis=0)
    return np.clip(probability_stack(ds)[facies], 0.0, 1.0)


def target_cells(
    ds: xr.Dataset,
    zones: Zones = None,
    target: str = "storage",
    *,
    design_fraction: float | Mapping[str, float] = 0.2,
) -> TargetCells:
    """Map a design target to weighted model cells, per treatment zone and for all zones.

    Parameters
    ----------
    ds
        The VoxelModel Dataset (``prob_<facies>``, ``mask``, ``saturated``).
    zones
        Treatment zones (as :func:`geo3d.analysis.volumes.zone_volumes` takes them); None or
        empty = the saturated part of the whole model, as zone ``site``.
    target
        One of :data:`TARGETS`.
    design_fraction
        Design fraction f of the injection target, one value or per zone name.

    Returns
    -------
    TargetCells
        With one weight array per zone and their sum under ``"all zones"``.
    """
    ds = require_model(ds)
    if target not in TARGETS:
        msg = f"advise: target {target!r} is unknown; expected one of {', '.join(TARGETS)}"
        raise ModelError(msg)
    classes = ds.voxels.facies_classes
    facies = classes.storage if target == "storage" else classes.transmissive
    prob = _indicator_mean(ds, facies)
    cell_volume = ds.voxels.cell_volume
    mask = ds.voxels.mask
    weights: dict[str, np.ndarray] = {}
    areas: dict[str, float] = {}
    for region in _zone_regions(ds, zones):
        weight, colfrac, _ = region_weights(ds, region)
        if region.geometry is None and "saturated" in ds:
            weight = weight * ds["saturated"].values.astype(bool)
        w = weight * cell_volume
        areas[region.name] = float((colfrac * mask.any(axis=0)).sum() * ds.voxels.cell_area)
        if target == "transmissive":
            w = w / areas[region.name] if areas[region.name] > 0 else w * 0.0
        elif target == "injection":
            f = (
                design_fraction.get(region.name, 0.2)
                if isinstance(design_fraction, Mapping)
                else design_fraction
            )
            w = w * float(f) * float(classes.effective_porosity[facies])
        weights[region.name] = w
    total = next(iter(weights))
    if len(weights) > 1:
        # volumes add up over the zones; the mean thickness of all zones is area-weighted
        share = {z: areas[z] / sum(areas.values()) if target == "transmissive" else 1.0
                 for z in weights}  # fmt: skip
        combined = sum(weights[z] * share[z] for z in weights)
        weights, total = {"all zones": np.asarray(combined), **weights}, "all zones"
    unit = "m" if target == "transmissive" else "m3"
    variance = np.where(mask, prob * (1.0 - prob), 0.0)
    return TargetCells(target, unit, weights, int(facies), variance, total)


def candidate_grid(
    boundary: shapely.Geometry,
    spacing: float,
    *,
    existing: np.ndarray | None = None,
    min_distance: float = 0.0,
    accessible: shapely.Geometry | None = None,
    max_candidates: int = MAX_CANDIDATES,
) -> np.ndarray:
    """Candidate boring locations: a square grid inside the site boundary.

    Parameters
    ----------
    boundary
        Site boundary polygon.
    spacing
        Grid spacing (m), > 0.
    existing
        ``(n, 2)`` x, y of the existing borings.
    min_distance
        Candidates closer than this (m) to an existing boring are left out.
    accessible
        Polygon(s) of the accessible areas; candidates outside are left out.
    max_candidates
        More admissible candidates than this is an error (the design holds a matrix of
        support points by candidate points).

    Returns
    -------
    numpy.ndarray
        ``(n, 2)`` x, y; the grid is centred on the boundary's bounding box.

    Examples
    --------
    >>> candidate_grid(shapely.box(0, 0, 10, 10), 5.0).tolist()
    [[2.5, 2.5], [7.5, 2.5], [2.5, 7.5], [7.5, 7.5]]
    """
    if not (math.isfinite(spacing) and spacing > 0):
        msg = f"advise: the candidate spacing must be a positive number of m, got {spacing!r}"
        raise GeometryError(msg)
    xmin, ymin, xmax, ymax = boundary.bounds
    nx = max(int(math.floor((xmax - xmin) / spacing)), 1)
    ny = max(int(math.floor((ymax - ymin) / spacing)), 1)
    if nx * ny > 1_000_000:
        msg = f"advise: spacing {spacing:g} m gives {nx * ny} candidates; expected a coarser one"
        raise GeometryError(msg)
    x0 = xmin + ((xmax - xmin) - (nx - 1) * spacing) / 2
    y0 = ymin + ((ymax - ymin) - (ny - 1) * spacing) / 2
    yy, xx = np.meshgrid(y0 + spacing * np.arange(ny), x0 + spacing * np.arange(nx), indexing="ij")
    xy = np.column_stack([xx.ravel(), yy.ravel()])
    area = boundary if accessible is None else shapely.intersection(boundary, accessible)
    keep = shapely.contains_xy(area, xy[:, 0], xy[:, 1])
    if existing is not None and len(existing) and min_distance > 0:
        keep &= cdist(xy, np.asarray(existing, float)[:, :2]).min(axis=1) >= min_distance
    n = int(keep.sum())
    if n > max_candidates:
        msg = (
            f"advise: {n} candidates at {spacing:g} m spacing; at most {max_candidates} are "
            f"ranked at once (memory); expected a spacing of at least "
            f"{spacing * math.sqrt(n / max_candidates):.3g} m or an accessible-area layer"
        )
        raise GeometryError(msg)
    return xy[keep]


def _nearest(axis: np.ndarray, values: np.ndarray) -> np.ndarray:
    """Index of the nearest value of an ascending axis, for each value."""
    right = np.clip(np.searchsorted(axis, values), 1, max(len(axis) - 1, 1))
    left = right - 1
    closer = np.abs(axis[np.minimum(right, len(axis) - 1)] - values) < np.abs(axis[left] - values)
    return np.where(closer, np.minimum(right, len(axis) - 1), left)


def column_points(ds: xr.Dataset, xy: np.ndarray, *, levels: int = 12) -> np.ndarray:
    """Sample points of full-depth borings: ``levels`` elevations through each saturated column.

    Parameters
    ----------
    ds
        The VoxelModel (``mask``, ``saturated``).
    xy
        ``(n, 2)`` boring locations.
    levels
        Points per boring, evenly spaced from the top to the bottom saturated model cell of
        the column the boring falls in.

    Returns
    -------
    numpy.ndarray
        ``(n, levels, 3)`` x, y, z; NaN where the column holds no saturated model cell.
    """
    x, y, z = (ds[c].values for c in ("x", "y", "z"))
    inside = ds.voxels.mask
    if "saturated" in ds:
        inside = inside & ds["saturated"].values.astype(bool)
    ix, iy = _nearest(x, xy[:, 0]), _nearest(y, xy[:, 1])
    out = np.full((len(xy), levels, 3), np.nan)
    for n, (i, j) in enumerate(zip(ix, iy, strict=True)):
        zs = z[inside[:, j, i]]
        if zs.size == 0:
            continue
        out[n, :, 0], out[n, :, 1] = xy[n, 0], xy[n, 1]
        out[n, :, 2] = np.linspace(zs.max(), zs.min(), levels) if zs.size > 1 else zs[0]
    return out


@dataclass
class SupportPoints:
    """Target cells gathered into blocks, each represented by one point.

    Attributes
    ----------
    points
        ``(n, 3)`` weighted centroids of the blocks.
    weights
        ``(n_zones, n)`` summed cell weights of each zone per block.
    variance
        ``(n,)`` weighted mean indicator variance of the block's cells.
    zones
        Zone names, in the order of :attr:`weights` rows.
    block
        Cells per block along ``(z, y, x)``.
    """

    points: np.ndarray
    weights: np.ndarray
    variance: np.ndarray
    zones: list[str]
    block: tuple[int, int, int]


def _block_sums(values: np.ndarray, block: tuple[int, int, int]) -> np.ndarray:
    """Sum an ``(..., nz, ny, nx)`` array over blocks of cells (padding with zeros)."""
    shape = values.shape[-3:]
    pad = [(0, 0)] * (values.ndim - 3) + [(0, (-n) % b) for n, b in zip(shape, block, strict=True)]
    padded = np.pad(values, pad)
    lead = padded.shape[:-3]
    nz, ny, nx = padded.shape[-3:]
    bz, by, bx = block
    return padded.reshape(*lead, nz // bz, bz, ny // by, by, nx // bx, bx).sum(axis=(-5, -3, -1))


def support_points(ds: xr.Dataset, target: TargetCells, *, max_points: int = 1500) -> SupportPoints:
    """Gather the target's cells into at most ``max_points`` blocks (point discretisation).

    The blocks grow (horizontally first, then vertically) until no more than ``max_points``
    hold a weighted, uncertain cell; each is represented by the centroid of its cells weighted
    by weight times variance (Journel and Huijbregts, 1978, block discretisation).
    """
    zones = list(target.weights)
    stack = np.stack([target.weights[z] for z in zones])
    total = stack[zones.index(target.total)]
    strength = total * target.variance
    if not np.any(strength > 0):
        msg = f"advise: the {target.name} target has no uncertain cell (every p(1-p) is 0)"
        raise ModelError(msg)
    zz, yy, xx = np.meshgrid(ds["z"].values, ds["y"].values, ds["x"].values, indexing="ij")
    block = (1, 1, 1)
    for step in range(64):
        sums = _block_sums(strength, block)
        if np.count_nonzero(sums > 0) <= max_points:
            break
        bz, by, bx = block
        block = (bz + 1, by, bx) if step % 3 == 2 else (bz, by + 1, bx + 1)
    keep = sums > 0
    centroid = [(_block_sums(strength * c, block)[keep] / sums[keep]) for c in (xx, yy, zz)]
    weight_sum = _block_sums(total, block)[keep]
    variance = _block_sums(total * target.variance, block)[keep] / np.where(
        weight_sum > 0, weight_sum, 1.0
    )
    weights = _block_sums(stack, block)[:, keep]
    return SupportPoints(np.column_stack(centroid), weights, variance, zones, block)


class BoringDesign:
    """Greedy design of full-depth borings by kriging-variance reduction (low-rank updates).

    Parameters
    ----------
    covariance
        Covariance model of the field (only its shape and nugget share matter: it is
        normalised to a unit total sill).
    data
        ``(n, 3)`` x, y, z of the existing data (the composited intervals).
    candidates
        ``(n_candidates, m, 3)`` points of each candidate boring (see :func:`column_points`).
    support
        The target's support points (see :func:`support_points`).
    criterion
        ``"summed"``: reduction of the kriging variance summed over the target's cells
        (weighted by the cell weights); ``"block"``: reduction of the variance of the target.
    rank_zone
        Zone (name in ``support.zones``) whose reduction ranks the candidates.
    scale_to_model
        Scale each point's variance so that, given the data, it equals ``support.variance``
        (the model's indicator variance); False keeps the normalised kriging variance (the
        purely geometric criterion).

    Attributes
    ----------
    variance_ : numpy.ndarray
        Normalised simple-kriging variance at each support point, given the data so far.
    block_variance_ : numpy.ndarray
        Variance of each zone's target given the data so far (target units squared).
    chosen_ : list of int
        Candidates chosen so far, in order.

    References
    ----------
    .. [1] Christakos, G. (1992) Random Field Models in Earth Sciences. Academic Press, ch. 10.
    .. [2] van Groenigen, J.W. (1999) Constrained optimisation of spatial sampling: a
       geostatistical approach. PhD thesis, Wageningen University.
    """

    def __init__(
        self,
        covariance: CovarianceModel,
        data: np.ndarray,
        candidates: np.ndarray,
        support: SupportPoints,
        *,
        criterion: str = "summed",
        rank_zone: str | None = None,
        scale_to_model: bool = True,
    ) -> None:
        if criterion not in CRITERIA:
            msg = f"advise: criterion {criterion!r} is unknown; expected one of {CRITERIA}"
            raise ModelError(msg)
        self.model = covariance
        self.criterion = criterion
        self.support = support
        self.rank = support.zones.index(rank_zone) if rank_zone is not None else 0
        self.nc, self.m = candidates.shape[:2]
        self.flat = candidates.reshape(-1, 3)
        data = np.asarray(data, float)
        chol = _cholesky(self._cov(data, data))
        q_points = _lower_solve(chol, self._cov(data, support.points))
        self._q_cand = _lower_solve(chol, self._cov(data, self.flat))
        self.cross = self._cov(support.points, self.flat) - q_points.T @ self._q_cand
        self.variance_ = 1.0 - np.einsum("ij,ij->j", q_points, q_points)
        scale = (
            np.sqrt(support.variance / np.maximum(self.variance_, _VAR_FLOOR))
            if scale_to_model
            else np.ones(len(support.points))
        )
        self.amplitude = support.weights * scale[None]
        self.cell_weight = support.weights[self.rank] * scale**2
        prior = self.amplitude @ self._cov(support.points, support.points)
        q_amp = q_points @ self.amplitude.T
        self.block_variance_ = np.einsum("zi,zi->z", prior, self.amplitude) - np.einsum(
            "dz,dz->z", q_amp, q_amp
        )
        self.blocks = np.empty((self.nc, self.m, self.m))
        for c in range(self.nc):
            part = self.flat[c * self.m : (c + 1) * self.m]
            q = self._q_cand[:, c * self.m : (c + 1) * self.m]
            self.blocks[c] = self._cov(part, part) - q.T @ q
        self._history: list[np.ndarray] = []
        self.chosen_: list[int] = []

    def _cov(self, a: np.ndarray, b: np.ndarray) -> np.ndarray:
        """Covariance normalised to a unit total sill (nugget only at zero distance)."""
        model = self.model
        h = cdist(model.scaled(a), model.scaled(b))
        return model.covariance(h) / model.total_sill

    @property
    def summed_variance(self) -> float:
        """Weighted sum of the cell variances of the ranking zone (target units squared)."""
        return float(self.cell_weight @ self.variance_)

    def _solve(self, cands: np.ndarray) -> np.ndarray:
        """``L_c^-1 C(B_c, P | data)`` for candidates ``cands``: ``(k, m, n_points)``."""
        m = self.m
        blocks = self.blocks[cands] + _JITTER * np.eye(m)[None]
        chol = np.linalg.cholesky(blocks)
        cross = self.cross.reshape(len(self.support.points), self.nc, m)[:, cands, :]
        return np.linalg.solve(chol, cross.transpose(1, 2, 0))

    def reductions(self, cands: np.ndarray | None = None, *, chunk: int = 128) -> np.ndarray:
        """Variance reduction of the ranking criterion for each candidate.

        Returns
        -------
        numpy.ndarray
            ``(k,)``: summed (``criterion='summed'``) or block variance reduction.
        """
        cands = np.arange(self.nc) if cands is None else np.asarray(cands, int)
        out = np.empty(len(cands))
        for start in range(0, len(cands), chunk):
            part = cands[start : start + chunk]
            solved = self._solve(part)
            if self.criterion == "summed":
                out[start : start + chunk] = np.einsum("kmi,kmi,i->k", solved, solved,
                                                       self.cell_weight)  # fmt: skip
            else:
                proj = solved @ self.amplitude[self.rank]
                out[start : start + chunk] = np.einsum("km,km->k", proj, proj)
        return out

    def add(self, cand: int) -> np.ndarray:
        """Add candidate ``cand`` as data; return the reduction of each support point's variance.

        Every candidate's cross-covariance and covariance block is corrected by the rank-``m``
        term of the new boring (the conditional covariance of a Gaussian vector).
        """
        m, idx = self.m, slice(cand * self.m, (cand + 1) * self.m)
        part = self.flat[idx]
        row = self._cov(part, self.flat) - self._q_cand[:, idx].T @ self._q_cand
        for previous in self._history:
            row -= previous[:, idx].T @ previous
        chol = np.linalg.cholesky(row[:, idx] + _JITTER * np.eye(m))
        update = np.linalg.solve(chol, row)
        solved = np.linalg.solve(chol, self.cross[:, idx].T)
        self.cross -= solved.T @ update
        stacked = update.reshape(m, self.nc, m)
        self.blocks -= np.einsum("kci,kcj->cij", stacked, stacked)
        drop = np.einsum("mi,mi->i", solved, solved)
        self.variance_ = self.variance_ - drop
        proj = solved @ self.amplitude.T
        self.block_variance_ = self.block_variance_ - np.einsum("mz,mz->z", proj, proj)
        self._history.append(update)
        self.chosen_.append(int(cand))
        return drop


def _cholesky(matrix: np.ndarray) -> np.ndarray:
    """Lower Cholesky factor with a small relative jitter on the diagonal."""
    jitter = _JITTER * max(float(np.mean(np.diag(matrix))), 1.0)
    return np.linalg.cholesky(matrix + jitter * np.eye(len(matrix)))


def _lower_solve(chol: np.ndarray, rhs: np.ndarray) -> np.ndarray:
    return solve_triangular(chol, rhs, lower=True, check_finite=False)


@dataclass
class BoringAdvice:
    """Proposed borings, every candidate's score and the expected narrowing per zone.

    Attributes
    ----------
    proposed
        One row per proposed boring, in order: ``rank``, ``x``, ``y``, ``variance_reduction``
        (of the ranking criterion, target units squared), ``reduction_share`` (of what was left
        before this boring), ``p10_p90_before`` and ``p10_p90_after`` (expected width of the
        ranking zone's target band before and after this boring, the ones before it counted),
        ``driver_zone`` (the zone whose band this boring narrows most), ``driver_top`` and
        ``driver_bottom`` (elevations, m, holding the central 80 % of the reduction).
    candidates
        Every admissible candidate: ``x``, ``y``, ``variance_reduction`` for the first boring.
    zones
        One row per zone: ``zone``, ``expected`` (target value), ``p10_p90_before`` and the
        expected width after each proposed boring (``p10_p90_after_<k>``), ``width_source``
        (``realizations`` or ``gaussian``).
    target, unit, criterion, rank_zone
        What was ranked.
    existing
        ``(n, 2)`` x, y of the existing borings.
    uncertainty
        Map ``(y, x)`` of the target's indicator variance summed down each column (weighted
        as the target: where the target is uncertain).
    """

    proposed: pd.DataFrame
    candidates: pd.DataFrame
    zones: pd.DataFrame
    target: str
    unit: str
    criterion: str
    rank_zone: str
    existing: np.ndarray = field(default_factory=lambda: np.empty((0, 2)))
    uncertainty: xr.DataArray | None = None


def _band(values: np.ndarray, weights: np.ndarray, share: float = 0.8) -> tuple[float, float]:
    """Range of ``values`` holding the central ``share`` of the positive ``weights``."""
    order = np.argsort(values)
    cum = np.cumsum(np.clip(weights[order], 0.0, None))
    if cum[-1] <= 0:
        return math.nan, math.nan
    lo = np.searchsorted(cum, (1 - share) / 2 * cum[-1])
    hi = np.searchsorted(cum, (1 + share) / 2 * cum[-1])
    return float(values[order][min(hi, len(cum) - 1)]), float(values[order][lo])


def _widths(target: TargetCells, ds: xr.Dataset, block_variance: np.ndarray) -> tuple:
    """P10-P90 width per zone: from the realizations, else Gaussian from the block variance."""
    sims = target.realization_values(ds)
    widths, sources = [], []
    for k, zone in enumerate(target.weights):
        values = sims[zone]
        if values.size >= 2:
            p10, p90 = np.percentile(values, (10, 90))
            widths.append(float(p90 - p10))
            sources.append("realizations")
        else:
            widths.append(2 * Z90 * math.sqrt(max(float(block_variance[k]), 0.0)))
            sources.append("gaussian")
    return np.array(widths), sources


def _greedy(
    design: BoringDesign, xy: np.ndarray, n_borings: int, min_distance: float
) -> tuple[list[dict], np.ndarray, list[np.ndarray]]:
    """Choose ``n_borings`` candidates one by one; return their rows and variance history."""
    available = np.ones(len(xy), bool)
    first = design.reductions()
    rows, history = [], [design.block_variance_.copy()]
    for rank in range(1, n_borings + 1):
        if not available.any():
            logger.warning("advise: only %d admissible candidates left", rank - 1)
            break
        cands = np.flatnonzero(available)
        scores = first[cands] if rank == 1 else design.reductions(cands)
        best = int(cands[int(np.argmax(scores))])
        before = (
            design.summed_variance
            if design.criterion == "summed"
            else float(design.block_variance_[design.rank])
        )
        drop = design.add(best)
        history.append(design.block_variance_.copy())
        gain = float(scores.max())
        zone_drop = history[-2] - history[-1]
        support = design.support
        top, bottom = _band(support.points[:, 2], drop * design.cell_weight)
        rows.append({
            "rank": rank, "x": float(xy[best, 0]), "y": float(xy[best, 1]),
            "variance_reduction": gain, "reduction_share": gain / before if before > 0 else 0.0,
            "driver_zone": _driver(support.zones, zone_drop), "driver_top": top,
            "driver_bottom": bottom,
        })  # fmt: skip
        distance = np.hypot(xy[:, 0] - xy[best, 0], xy[:, 1] - xy[best, 1])
        available &= distance >= max(min_distance, 1e-9)
    return rows, first, history


def _driver(zones: list[str], drop: np.ndarray) -> str:
    """Return the zone (not the combined one) whose target variance a boring lowers most."""
    single = [k for k, z in enumerate(zones) if z != "all zones"]
    return zones[max(single, key=lambda k: drop[k])] if single else zones[0]


def _expected_width(before: float, var_before: np.ndarray, var_after: np.ndarray) -> np.ndarray:
    ratio = np.where(var_before > 0, np.clip(var_after, 0.0, None) / var_before, 1.0)
    return before * np.sqrt(ratio)


def _thin(data: np.ndarray, max_data: int) -> np.ndarray:
    """Every k-th data point, so that at most ``max_data`` remain (all when fewer)."""
    data = np.asarray(data, float)
    data = data[np.all(np.isfinite(data), axis=1)]
    if len(data) <= max_data:
        return data
    step = math.ceil(len(data) / max_data)
    logger.info("advise: %d data points thinned to every %d-th", len(data), step)
    return data[::step]


def _candidates(
    ds: xr.Dataset,
    boundary: shapely.Geometry,
    spacing: float | None,
    existing: np.ndarray,
    min_distance: float,
    accessible: shapely.Geometry | None,
    levels: int,
    *,
    given: np.ndarray | None = None,
) -> tuple[np.ndarray, np.ndarray]:
    """Admissible candidates over saturated model cells, and the points of their borings."""
    if given is not None:
        xy = np.asarray(given, float).reshape(-1, 2)
    else:
        spacing = math.sqrt(boundary.area / 400.0) if spacing is None else spacing
        xy = candidate_grid(boundary, spacing, existing=existing, min_distance=min_distance,
                            accessible=accessible)  # fmt: skip
    columns = column_points(ds, xy, levels=levels)
    usable = np.all(np.isfinite(columns), axis=(1, 2))
    if not usable.any():
        msg = (
            "advise: no admissible candidate (inside the boundary and the accessible areas, "
            f"at least {min_distance:g} m from the borings, over saturated model cells); "
            "expected a finer spacing, a smaller minimum distance or larger accessible areas"
        )
        raise GeometryError(msg)
    return xy[usable], columns[usable]


def _ensure_uncertain(ds: xr.Dataset, cells: TargetCells, zone: str) -> None:
    """Fall back on the kriging variance alone when the model leaves the target certain."""
    if np.any(cells.weights[zone] * cells.variance > 0):
        return
    warnings.warn(
        f"advise: the model leaves the {cells.name} target of {zone} without uncertainty (its "
        "facies probabilities are 0 or 1 in every cell); ranking by the kriging variance alone",
        Geo3dWarning,
        stacklevel=3,
    )
    cells.variance = ds.voxels.mask.astype(float)


def advise_borings(
    ds: xr.Dataset,
    data: np.ndarray,
    existing: np.ndarray,
    boundary: shapely.Geometry,
    *,
    n_borings: int = 3,
    covariance: CovarianceModel | None = None,
    zones: Zones = None,
    target: str = "storage",
    spacing: float | None = None,
    min_distance: float = 0.0,
    accessible: shapely.Geometry | None = None,
    candidates: np.ndarray | None = None,
    criterion: str = "summed",
    rank_zone: str | None = None,
    design_fraction: float | Mapping[str, float] = 0.2,
    levels: int = 12,
    max_points: int = 1500,
    max_data: int = 2000,
) -> BoringAdvice:
    """Rank candidate locations and choose ``n_borings`` new borings greedily.

    Parameters
    ----------
    ds, data
        The VoxelModel Dataset; ``(n, 3)`` x, y, z of its data (interval midpoints).
    existing
        ``(n, 2)`` x, y of the existing borings.
    boundary
        Site boundary polygon (candidates lie inside it).
    n_borings
        Borings to propose (>= 1).
    covariance
        Covariance of the field; default the one in ``ds.attrs``.
    zones, target, design_fraction
        The design target (see :func:`target_cells`).
    spacing
        Candidate grid spacing (m); default about 400 candidates over the boundary.
    candidates
        ``(n, 2)`` x, y of given candidate locations, instead of the grid and its
        constraints (spacing, minimum distance from the existing borings, accessible areas).
    min_distance
        Minimum distance (m) of a proposed boring from existing and other proposed borings.
    accessible
        Polygon(s) of the accessible areas.
    criterion
        ``"summed"`` (summed cell kriging variance) or ``"block"`` (variance of the target).
    rank_zone
        Zone whose target ranks the candidates; default all zones together.
    levels, max_points, max_data
        Points per candidate boring, support points of the target, data points used.

    Returns
    -------
    BoringAdvice
        (Method and sources: the module docstring.)
    """
    ds = require_model(ds)
    if int(n_borings) < 1:
        msg = f"advise: the number of borings must be at least 1, got {n_borings}"
        raise ModelError(msg)
    covariance = covariance_from_attrs(ds) if covariance is None else covariance
    cells = target_cells(ds, zones, target, design_fraction=design_fraction)
    rank_zone = cells.total if rank_zone is None else rank_zone
    if rank_zone not in cells.weights:
        msg = f"advise: zone {rank_zone!r} is unknown; expected one of {list(cells.weights)}"
        raise GeometryError(msg)
    existing = np.asarray(existing, float).reshape(-1, 2)
    xy, columns = _candidates(ds, boundary, spacing, existing, min_distance, accessible, levels,
                              given=candidates)  # fmt: skip
    _ensure_uncertain(ds, cells, rank_zone)
    support = support_points(ds, cells, max_points=max_points)
    design = BoringDesign(covariance, _thin(data, max_data), columns, support,
                          criterion=criterion, rank_zone=rank_zone)  # fmt: skip
    logger.info("advise: %d candidates, %d target points (blocks of %s cells)",
                len(xy), len(support.points), support.block)  # fmt: skip
    rows, first, history = _greedy(design, xy, int(n_borings), float(min_distance))
    return _advice(cells, ds, design, xy, first, rows, history, existing)


def _advice(
    cells: TargetCells,
    ds: xr.Dataset,
    design: BoringDesign,
    xy: np.ndarray,
    first: np.ndarray,
    rows: list[dict],
    history: list[np.ndarray],
    existing: np.ndarray,
) -> BoringAdvice:
    """Assemble the tables of :class:`BoringAdvice`."""
    widths, sources = _widths(cells, ds, history[0])
    expected = cells.expected_values(ds)
    zones = pd.DataFrame({"zone": list(cells.weights), "expected": list(expected.values()),
                          "p10_p90_before": widths})  # fmt: skip
    for k in range(1, len(history)):
        zones[f"p10_p90_after_{k}"] = _expected_width(widths, history[0], history[k])
    zones["width_source"] = sources
    rank = design.rank
    proposed = pd.DataFrame(rows)
    if len(proposed):
        proposed.insert(5, "p10_p90_before", [
            float(_expected_width(widths[rank], history[0][rank], history[k - 1][rank]))
            for k in proposed["rank"]])  # fmt: skip
        proposed.insert(6, "p10_p90_after", [
            float(_expected_width(widths[rank], history[0][rank], history[k][rank]))
            for k in proposed["rank"]])  # fmt: skip
    candidates = pd.DataFrame({"x": xy[:, 0], "y": xy[:, 1], "variance_reduction": first})
    weight = cells.weights[design.support.zones[rank]]
    uncertainty = plan_map(
        ds,
        (weight * cells.variance).sum(axis=0),
        "target_variance",
        {"long_name": f"{cells.name} target: weighted indicator variance"},
    )
    return BoringAdvice(proposed, candidates, zones, cells.name, cells.unit, design.criterion,
                        design.support.zones[rank], existing, uncertainty)  # fmt: skip
