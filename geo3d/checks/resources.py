"""Estimate the size, memory and time of the model stage before any work, and refuse what won't fit.

The grid is sized exactly as :func:`geo3d.grid.make_grid` sizes it (the boundary's bounds plus
the padding, from the deepest data or ``[grid] base`` up to the highest collar), without
allocating it. Memory counts the arrays the model holds per cell; time scales the kriging cost
(one ``neighbors``-sized system per estimated cell, each simulated realization kriged again)
by a rate measured on the demo site.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

from geo3d.checks.findings import Finding

__all__ = ["ResourceEstimate", "estimate_resources", "check_resources", "available_memory"]

#: Bytes per grid cell held by the model stage without realizations: measured as the peak
#: resident memory of the demo site's model (about 850 MB for 1.03 million cells and 4
#: realizations, less about 250 MB for the libraries), rounded up.
BYTES_PER_CELL = 500
#: Bytes per cell and realization: the float32 realization array, the float64 simulated values
#: before they are placed in the grid, and a float32 copy while writing.
BYTES_PER_CELL_REALIZATION = 4 + 8 + 4 + 8
#: Seconds per cell for one kriging pass (log10 K and EC are kriged once each) and per cell and
#: realization, measured on the demo site (942,289 cells, 32 neighbours) on 2 cores shared
#: with other work (1.8e-4 and 2.2e-4 s), divided by the load of about 6 at the time; scaled
#: by (neighbors / 32) ** 2 for other neighbourhoods.
SECONDS_PER_CELL_PASS = 3.0e-5
SECONDS_PER_CELL_REALIZATION = 3.7e-5


@dataclass(frozen=True)
class ResourceEstimate:
    """Size, memory and time of the model stage.

    Attributes
    ----------
    shape
        ``(nz, ny, nx)`` cells.
    cells
        ``nz * ny * nx``.
    memory_bytes
        Estimated peak memory of the model stage.
    seconds
        Estimated wall-clock time of the model stage.
    realizations
        Realizations counted.
    """

    shape: tuple[int, int, int]
    cells: int
    memory_bytes: float
    seconds: float
    realizations: int

    def describe(self) -> str:
        """One line for the user."""
        nz, ny, nx = self.shape
        return (
            f"{nx} x {ny} x {nz} = {self.cells:,} cells, {self.realizations} realizations: "
            f"about {_size(self.memory_bytes)} of memory and {_duration(self.seconds)}"
        )


def _size(value: float) -> str:
    for unit in ("B", "kB", "MB", "GB", "TB", "PB"):
        if abs(value) < 1000 or unit == "PB":
            return f"{value:.3g} {unit}"
        value /= 1000
    return f"{value:.3g} PB"


def _duration(seconds: float) -> str:
    if seconds < 120:
        return f"{seconds:.0f} s"
    if seconds < 7200:
        return f"{seconds / 60:.0f} min"
    if seconds < 3 * 86400:
        return f"{seconds / 3600:.1f} h"
    return f"{seconds / 86400:.3g} days"


def available_memory() -> float:
    """Return the memory available to a new allocation now, in bytes (psutil)."""
    import psutil

    return float(psutil.virtual_memory().available)


def _cells(site: Any) -> tuple[int, int, int] | None:
    grid = site.config.grid
    dx, dy, dz = (float(v) for v in grid.cell_size)
    if site.boundary is None or not all(math.isfinite(v) and v > 0 for v in (dx, dy, dz)):
        return None
    minx, miny, maxx, maxy = site.boundary.bounds
    pad = float(grid.padding)
    top = float(site.borings["ground_elev"].max())
    if site.dem is not None:
        import numpy as np

        top = max(top, float(np.nanmax(site.dem[0])))
    if isinstance(grid.base, str):
        base = float(site.samples["elev"].min()) if len(site.samples) else top - dz
    else:
        base = float(grid.base)
    values = (minx, miny, maxx, maxy, pad, top, base)
    if not all(math.isfinite(v) for v in values):
        return None
    nx = max(1, math.ceil((maxx - minx + 2 * pad) / dx - 1e-9))
    ny = max(1, math.ceil((maxy - miny + 2 * pad) / dy - 1e-9))
    nz = max(1, math.ceil((top - base) / dz - 1e-9))
    return nz, ny, nx


def estimate_resources(site: Any, *, n_realizations: int | None = None) -> ResourceEstimate | None:
    """Estimate the model stage's cells, memory and time from the settings.

    Parameters
    ----------
    site
        A :class:`geo3d.site.Site`.
    n_realizations
        Overrides ``[simulation] realizations``.

    Returns
    -------
    ResourceEstimate or None
        None when the grid cannot be sized (non-finite settings, reported elsewhere).
    """
    shape = _cells(site)
    if shape is None:
        return None
    realizations = int(
        site.config.simulation.realizations if n_realizations is None else n_realizations
    )
    cells = shape[0] * shape[1] * shape[2]
    memory = float(cells) * (BYTES_PER_CELL + BYTES_PER_CELL_REALIZATION * realizations)
    neighbours = max(3, int(site.config.kriging.neighbors))
    scale = (neighbours / 32.0) ** 2
    per_cell = 2 * SECONDS_PER_CELL_PASS + realizations * SECONDS_PER_CELL_REALIZATION
    seconds = float(cells) * per_cell * scale
    return ResourceEstimate(shape, cells, memory, seconds, realizations)


def check_resources(site: Any, *, n_realizations: int | None = None) -> list[Finding]:
    """Refuse a model that exceeds the memory available or ``[limits]``; warn of long runs."""
    estimate = estimate_resources(site, n_realizations=n_realizations)
    if estimate is None:
        return []
    limits = site.config.limits
    toml = f"{site.root}/site.toml"
    how = (
        "make [grid] cell_size larger (cells fall with its cube), the boundary smaller, or "
        "[simulation] realizations (or --realizations) smaller"
    )
    findings = []
    if estimate.cells > limits.max_cells:
        found = f"the model would have {estimate.describe()}"
        expected = f"at most [limits] max_cells = {limits.max_cells:,} cells: {how}"
        findings.append(
            Finding("error", "resources-cells", f"{toml}, [grid] cell_size", found, expected)
        )
    available = available_memory()
    cap = available if limits.max_memory == "auto" else float(limits.max_memory) * 1e9
    source = (
        f"the {_size(available)} of memory available now"
        if limits.max_memory == "auto"
        else f"[limits] max_memory = {limits.max_memory} GB"
    )
    if estimate.memory_bytes > cap:
        found = f"the model would need {estimate.describe()}"
        expected = f"at most {source}: {how}"
        by_realizations = BYTES_PER_CELL_REALIZATION * estimate.realizations > BYTES_PER_CELL
        key = "[simulation] realizations" if by_realizations else "[grid] cell_size"
        findings.append(Finding("error", "resources-memory", f"{toml}, {key}", found, expected))
    elif estimate.seconds > limits.warn_time:
        found = f"the model would take {estimate.describe()}"
        expected = f"less than [limits] warn_time = {limits.warn_time:g} s; to go faster, {how}"
        findings.append(
            Finding("warning", "resources-time", f"{toml}, [grid] cell_size", found, expected)
        )
    return findings
