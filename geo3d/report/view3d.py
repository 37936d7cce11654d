"""Off-screen 3D view of the voxel model for the report.

The view shows the lowest-K hydrofacies (storage) and the highest-K one (transmissive) as
solid cell volumes inside the outline of the model, with the borings as tubes.  It is drawn
with pyvista off-screen; where no OpenGL context can be created the caller gets a
:class:`View3DUnavailable` and writes a note instead of the picture.

Coordinates are ``(x, y, z)`` in the site CRS, z the elevation; a vertical exaggeration is a
view setting only, stated in the caption.
"""

from __future__ import annotations

import io
import logging
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd
import xarray as xr

from geo3d.report.figures import facies_colors

__all__ = ["View3D", "View3DUnavailable", "default_exaggeration", "render_model_view"]

logger = logging.getLogger(__name__)


class View3DUnavailable(RuntimeError):
    """The 3D view could not be rendered (no OpenGL, no pyvista, or nothing to draw)."""


@dataclass(frozen=True)
class View3D:
    """A rendered 3D view.

    Attributes
    ----------
    png
        The picture as a PNG file.
    vertical_exaggeration
        Factor applied to elevations in the view.
    shown
        Names of the hydrofacies drawn as volumes.
    """

    png: bytes
    vertical_exaggeration: float
    shown: tuple[str, ...]


def default_exaggeration(model: xr.Dataset) -> float:
    """Vertical exaggeration that makes the model about a third as tall as it is wide.

    Parameters
    ----------
    model
        Voxel model with ``x``, ``y``, ``z`` coordinates.

    Returns
    -------
    float
        A factor between 1 and 20, rounded to a whole number.
    """
    width = max(float(np.ptp(model["x"].values)), float(np.ptp(model["y"].values)), 1e-9)
    height = max(float(np.ptp(model["z"].values)), 1e-9)
    return float(np.clip(round(0.3 * width / height), 1, 20))


def _image_data(model: xr.Dataset):
    import pyvista as pv

    x, y, z = (np.asarray(model[c].values, dtype=float) for c in ("x", "y", "z"))
    spacing = [float(np.diff(c[:2])[0]) if c.size > 1 else 1.0 for c in (x, y, z)]
    image = pv.ImageData(
        dimensions=(x.size + 1, y.size + 1, z.size + 1),
        spacing=spacing,
        origin=(x[0] - spacing[0] / 2, y[0] - spacing[1] / 2, z[0] - spacing[2] / 2),
    )
    codes = np.asarray(model["facies_code"].transpose("z", "y", "x").values, dtype=float)
    if "mask" in model:
        mask = np.asarray(model["mask"].transpose("z", "y", "x").values, dtype=bool)
        codes = np.where(mask, codes, -1.0)
    # VTK orders cells with x fastest, then y, then z: C order of (z, y, x)
    image.cell_data["facies_code"] = codes.ravel(order="C")
    return image


def _boring_tubes(intervals: pd.DataFrame, radius: float):
    import pyvista as pv

    blocks = []
    for _, rows in intervals.groupby("boring_id", sort=True):
        half = 0.5 * (rows["bottom"] - rows["top"]).to_numpy(dtype=float)
        z_mid = rows["z_mid"].to_numpy(dtype=float)
        top, bottom = float(np.max(z_mid + half)), float(np.min(z_mid - half))
        x, y = float(rows["x"].iloc[0]), float(rows["y"].iloc[0])
        if not np.isfinite([x, y, top, bottom]).all() or top <= bottom:
            continue
        blocks.append(pv.Line((x, y, bottom), (x, y, top)).tube(radius=radius, n_sides=12))
    return blocks


def _quiet_vtk() -> None:
    """Keep VTK's warnings out of the terminal.

    Off screen, VTK first tries an X display and logs a warning when there is none before it
    falls back to an off-screen context.
    """
    import vtk

    vtk.vtkLogger.SetStderrVerbosity(vtk.vtkLogger.VERBOSITY_ERROR)


def _screenshot(plotter: Any) -> Any:
    """Set the oblique camera of the view and take the picture."""
    plotter.add_axes(color="black")
    plotter.camera_position = "iso"
    plotter.camera.azimuth = -25.0
    plotter.camera.elevation = 10.0
    plotter.reset_camera()
    plotter.camera.zoom(1.15)
    return plotter.screenshot(return_img=True)


def _add_facies(
    plotter: Any, image: Any, facies_names: Sequence[str], colors: Sequence[str]
) -> list[str]:
    """Add the lowest- and highest-K hydrofacies as surfaces; return the names drawn."""
    shown = []
    last = len(facies_names) - 1
    for code, opacity in ((0, 0.9), (last, 0.3)) if last > 0 else ((0, 0.8),):
        part = image.threshold(
            value=(code - 0.5, code + 0.5), scalars="facies_code", preference="cell"
        )
        if part.n_cells == 0:
            continue
        plotter.add_mesh(
            part.extract_surface(algorithm="dataset_surface"),
            color=colors[code],
            opacity=opacity,
            label=facies_names[code],
            show_scalar_bar=False,
        )
        shown.append(facies_names[code])
    return shown


def render_model_view(
    model: xr.Dataset,
    *,
    facies_names: Sequence[str],
    intervals: pd.DataFrame | None = None,
    vertical_exaggeration: float | None = None,
    window_size: tuple[int, int] = (1100, 760),
) -> View3D:
    """Render the voxel model's storage and transmissive volumes off-screen.

    Parameters
    ----------
    model
        Voxel model with ``facies_code`` (and ``mask``) on dims ``("z", "y", "x")``.
    facies_names
        Class names, lowest K first; the first and the last are drawn.
    intervals
        Composited intervals (``boring_id``, ``x``, ``y``, ``top``, ``bottom``, ``z_mid``);
        each boring is drawn as a tube over its logged length.
    vertical_exaggeration
        Factor on elevations; :func:`default_exaggeration` when None.
    window_size
        Picture size in pixels.

    Returns
    -------
    View3D

    Raises
    ------
    View3DUnavailable
        If pyvista cannot render here or the model has no classified cell.
    """
    if "facies_code" not in model or not len(facies_names):
        msg = "the voxel model has no hydrofacies to draw"
        raise View3DUnavailable(msg)
    exaggeration = vertical_exaggeration or default_exaggeration(model)
    try:
        import pyvista as pv
    except ImportError as exc:  # pyvista is a dependency, but a broken install must not crash
        raise View3DUnavailable(f"pyvista cannot be imported: {exc}") from exc
    colors = facies_colors(len(facies_names))
    image = _image_data(model)
    codes = image.cell_data["facies_code"]
    if not np.any(codes >= 0):
        msg = "the voxel model has no classified cell"
        raise View3DUnavailable(msg)
    last = len(facies_names) - 1
    shown: list[str] = []
    # Any: pyvista types its decorated Plotter methods as plain functions
    plotter: Any = None
    try:
        _quiet_vtk()
        plotter = pv.Plotter(off_screen=True, window_size=list(window_size))
        plotter.set_background("white")
        inside = image.threshold(value=(-0.5, last + 0.5), scalars="facies_code", preference="cell")
        if inside.n_cells:
            plotter.add_mesh(inside.outline(), color="#444444", line_width=1.5)
        shown = _add_facies(plotter, image, facies_names, colors)
        if intervals is not None and len(intervals):
            cell = float(np.nanmean(image.spacing[:2]))
            for tube in _boring_tubes(intervals, radius=max(cell * 0.35, 0.05)):
                plotter.add_mesh(tube, color="#111111")
        plotter.set_scale(zscale=exaggeration)
        if shown:
            plotter.add_legend(bcolor="white", face="rectangle", size=(0.2, 0.08), loc="upper left")
        picture = _screenshot(plotter)
    except View3DUnavailable:
        raise
    except Exception as exc:  # VTK raises assorted errors when no OpenGL context exists
        logger.warning("3D view not rendered: %s", exc)
        raise View3DUnavailable(f"off-screen rendering failed: {exc}") from exc
    finally:
        if plotter is not None:
            plotter.close()
    if picture is None or np.asarray(picture).size == 0:
        raise View3DUnavailable("off-screen rendering returned an empty picture")
    return View3D(
        png=_to_png(np.asarray(picture)), vertical_exaggeration=exaggeration, shown=tuple(shown)
    )


def _to_png(picture: np.ndarray) -> bytes:
    from matplotlib.image import imsave

    buffer = io.BytesIO()
    imsave(buffer, picture.astype(np.uint8), format="png")
    return buffer.getvalue()
