"""A random synthetic geology that can be evaluated at any point ``(x, y, z)``.

The geology is a list of geological bodies painted in order (a later body overrides an
earlier one where they overlap):

* ``layers``: a layer cake of 1-5 units with gently undulating contacts;
* ``sheet``: a dipping sheet whose thickness falls linearly to zero along a direction, so it
  pinches out inside the site;
* ``channel``: a sinuous channel with a parabolic cross-section cut into what lies below its
  top, filled with sand or gravel;
* ``lens``: an ellipsoidal lens of clay, silt or sand;
* ``lamina``: a thin (centimetres to decimetres) undulating clay or silt sheet of limited
  lateral extent.

Every site draws its own styles, sizes, orientations and materials from a seed.  Coordinates
are local metres (x east, y north from the site's south-west corner) and ``z`` is elevation.

Lithologies (codes): 0 clay, 1 silt, 2 sand, 3 gravel.  Their log10 K ranges are chosen so
that clay falls in the storage class (< 1e-7 m/s), silt in the transitional class and sand and
gravel in the transmissive class (>= 1e-5 m/s) of the common-practice thresholds, after
Freeze & Cherry (1979) Table 2.2.

References
----------
.. [1] Freeze, R.A., Cherry, J.A. (1979) Groundwater. Prentice-Hall, Table 2.2 (K ranges).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

__all__ = [
    "LITHOLOGIES",
    "STYLES",
    "Surface",
    "Body",
    "Geology",
    "random_geology",
]

#: Lithology names by code.
LITHOLOGIES: tuple[str, ...] = ("clay", "silt", "sand", "gravel")

#: Styles a geology may combine (besides the layer cake every site has).
STYLES: tuple[str, ...] = ("layers", "sheet", "channel", "lens", "lamina")


@dataclass(frozen=True)
class Surface:
    """A smooth random surface ``sum_j a_j cos(k_j . (x, y) + phi_j)`` (m).

    Attributes
    ----------
    amplitude, kx, ky, phase
        One entry per cosine term.
    """

    amplitude: np.ndarray
    kx: np.ndarray
    ky: np.ndarray
    phase: np.ndarray

    @classmethod
    def random(
        cls,
        rng: np.random.Generator,
        *,
        amplitude: float,
        wavelength: tuple[float, float] = (30.0, 150.0),
        terms: int = 3,
    ) -> Surface:
        """Draw a surface whose terms add up to about ``amplitude`` (m) peak to mean."""
        lam = rng.uniform(*wavelength, terms)
        theta = rng.uniform(0.0, np.pi, terms)
        k = 2 * np.pi / lam
        amp = amplitude * rng.dirichlet(np.ones(terms))
        return cls(amp, k * np.cos(theta), k * np.sin(theta), rng.uniform(0, 2 * np.pi, terms))

    def __call__(self, x: np.ndarray, y: np.ndarray) -> np.ndarray:
        """Elevation offset (m) at ``(x, y)`` (broadcast shapes)."""
        x = np.asarray(x, float)
        y = np.asarray(y, float)
        out = np.zeros(np.broadcast(x, y).shape)
        for a, kx, ky, ph in zip(self.amplitude, self.kx, self.ky, self.phase, strict=True):
            out = out + a * np.cos(kx * x + ky * y + ph)
        return out


@dataclass(frozen=True)
class Body:
    """One geological body.

    Attributes
    ----------
    style
        One of :data:`STYLES`.
    lithology
        Lithology code (for ``layers``: one code per layer, from the bottom up).
    params
        Geometry of the body (see :meth:`Geology.lithology_at`).
    surface
        Undulation added to the body's reference elevation.
    """

    style: str
    lithology: tuple[int, ...]
    params: dict[str, Any] = field(default_factory=dict)
    surface: Surface | None = None

    def describe(self) -> dict:
        """Plain description (for truth.json)."""
        return {
            "style": self.style,
            "lithology": [LITHOLOGIES[c] for c in self.lithology],
            **{k: (list(v) if isinstance(v, tuple) else float(v)) for k, v in self.params.items()},
        }


def _rotate(x: np.ndarray, y: np.ndarray, cx: float, cy: float, azimuth: float):
    """Along (``u``) and across (``v``) coordinates of a direction (radians from east)."""
    dx, dy = x - cx, y - cy
    c, s = np.cos(azimuth), np.sin(azimuth)
    return c * dx + s * dy, -s * dx + c * dy


def _undulation(body: Body, x: np.ndarray, y: np.ndarray) -> np.ndarray | float:
    return 0.0 if body.surface is None else body.surface(x, y)


def _inside_layers(body: Body, x, y, z) -> tuple[np.ndarray, np.ndarray]:
    contacts = np.asarray(body.params["contacts"], float)
    shift = _undulation(body, x, y)
    shape = np.broadcast_shapes(np.shape(x), np.shape(y), np.shape(z))
    index = np.zeros(shape, dtype=np.int8)
    for contact in contacts:
        index += z >= contact + shift
    codes = np.asarray(body.lithology)[index]
    return np.ones(shape, bool), codes


def _inside_sheet(body: Body, x, y, z) -> np.ndarray:
    p = body.params
    u, _ = _rotate(x, y, p["cx"], p["cy"], p["pinch_azimuth"])
    base = p["base"] + p["dip_x"] * (x - p["cx"]) + p["dip_y"] * (y - p["cy"])
    base = base + _undulation(body, x, y)
    thickness = p["thickness"] * np.clip(-u / p["taper"], 0.0, 1.0)
    return (z >= base) & (z < base + thickness)


def _inside_channel(body: Body, x, y, z) -> np.ndarray:
    p = body.params
    u, v = _rotate(x, y, p["cx"], p["cy"], p["azimuth"])
    centre = p["amplitude"] * np.sin(2 * np.pi * u / p["wavelength"] + p["phase"])
    centre = centre + 0.3 * p["amplitude"] * np.sin(4 * np.pi * u / p["wavelength"] + p["phase2"])
    r = np.abs(v - centre) / (0.5 * p["width"])
    top = p["top"] + p["slope"] * u
    bottom = top - p["depth"] * (1.0 - r**2)
    return (r < 1.0) & (z < top) & (z >= bottom)


def _inside_lens(body: Body, x, y, z) -> np.ndarray:
    p = body.params
    u, v = _rotate(x, y, p["cx"], p["cy"], p["azimuth"])
    w = (z - p["cz"]) / p["c"]
    return (u / p["a"]) ** 2 + (v / p["b"]) ** 2 + w**2 < 1.0


def _inside_lamina(body: Body, x, y, z) -> np.ndarray:
    p = body.params
    u, v = _rotate(x, y, p["cx"], p["cy"], p["azimuth"])
    footprint = (u / p["a"]) ** 2 + (v / p["b"]) ** 2 < 1.0
    base = p["base"] + _undulation(body, x, y)
    return footprint & (z >= base) & (z < base + p["thickness"])


_PAINTERS = {
    "sheet": _inside_sheet,
    "channel": _inside_channel,
    "lens": _inside_lens,
    "lamina": _inside_lamina,
}


@dataclass(frozen=True)
class Geology:
    """A list of bodies painted in order.

    Attributes
    ----------
    bodies
        The first one is the layer cake; the others paint over it.
    """

    bodies: tuple[Body, ...]

    @property
    def styles(self) -> list[str]:
        """Styles present, in painting order, without repeats."""
        seen: list[str] = []
        for body in self.bodies:
            if body.style not in seen:
                seen.append(body.style)
        return seen

    def lithology_at(self, x, y, z) -> np.ndarray:
        """Lithology code at points (broadcast shapes of x, y, z)."""
        # keep the plan coordinates unbroadcast: surfaces are evaluated once per column
        x, y, z = (np.asarray(a, float) for a in (x, y, z))
        shape = np.broadcast_shapes(x.shape, y.shape, z.shape)
        _, codes = _inside_layers(self.bodies[0], x, y, z)
        codes = np.broadcast_to(codes, shape)
        for body in self.bodies[1:]:
            inside = _PAINTERS[body.style](body, x, y, z)
            codes = np.where(inside, body.lithology[0], codes)
        return codes.astype(np.int8)


def _layer_cake(rng: np.random.Generator, top: float, base: float) -> Body:
    n = int(rng.integers(2, 6))
    # fine and coarse units alternate, starting at random
    coarse_first = bool(rng.integers(0, 2))
    litho = []
    for i in range(n):
        coarse = (i % 2 == 0) == coarse_first
        litho.append(int(rng.choice([2, 3], p=[0.75, 0.25]) if coarse else rng.choice([0, 1])))
    cuts = np.sort(rng.uniform(base + 1.0, top - 1.0, n - 1)) if n > 1 else np.array([])
    surface = Surface.random(rng, amplitude=rng.uniform(0.1, 1.2))
    return Body("layers", tuple(litho), {"contacts": tuple(cuts.tolist())}, surface)


def _sheet(rng: np.random.Generator, size: tuple[float, float], top: float, base: float) -> Body:
    lx, ly = size
    params = {
        "cx": rng.uniform(0.3, 0.7) * lx,
        "cy": rng.uniform(0.3, 0.7) * ly,
        "pinch_azimuth": rng.uniform(0, 2 * np.pi),
        "base": rng.uniform(base + 0.5, top - 3.0),
        "dip_x": rng.uniform(-0.04, 0.04),
        "dip_y": rng.uniform(-0.04, 0.04),
        "thickness": rng.uniform(0.8, 3.0),
        "taper": rng.uniform(0.3, 0.9) * max(lx, ly),
    }
    litho = (int(rng.choice([0, 1, 2], p=[0.3, 0.2, 0.5])),)
    return Body("sheet", litho, params, Surface.random(rng, amplitude=rng.uniform(0.0, 0.5)))


def _channel(rng: np.random.Generator, size: tuple[float, float], top: float, base: float):
    lx, ly = size
    params = {
        "cx": rng.uniform(0.3, 0.7) * lx,
        "cy": rng.uniform(0.3, 0.7) * ly,
        "azimuth": rng.uniform(0, np.pi),
        "amplitude": rng.uniform(3.0, 15.0),
        "wavelength": rng.uniform(40.0, 120.0),
        "phase": rng.uniform(0, 2 * np.pi),
        "phase2": rng.uniform(0, 2 * np.pi),
        "width": rng.uniform(5.0, 18.0),
        "depth": rng.uniform(0.8, 3.0),
        "top": rng.uniform(base + 3.0, top - 0.5),
        "slope": rng.uniform(-0.01, 0.01),
    }
    litho = (int(rng.choice([2, 3], p=[0.5, 0.5])),)
    return Body("channel", litho, params)


def _lens(rng: np.random.Generator, size: tuple[float, float], top: float, base: float) -> Body:
    lx, ly = size
    params = {
        "cx": rng.uniform(0, lx),
        "cy": rng.uniform(0, ly),
        "cz": rng.uniform(base + 0.5, top - 0.5),
        "azimuth": rng.uniform(0, np.pi),
        "a": rng.uniform(4.0, 20.0),
        "b": rng.uniform(3.0, 12.0),
        "c": rng.uniform(0.3, 1.5),
    }
    litho = (int(rng.choice([0, 1, 2], p=[0.45, 0.2, 0.35])),)
    return Body("lens", litho, params)


def _lamina(rng: np.random.Generator, size: tuple[float, float], top: float, base: float):
    lx, ly = size
    params = {
        "cx": rng.uniform(0.2, 0.8) * lx,
        "cy": rng.uniform(0.2, 0.8) * ly,
        "azimuth": rng.uniform(0, np.pi),
        "a": rng.uniform(15.0, 60.0),
        "b": rng.uniform(10.0, 40.0),
        "base": rng.uniform(base + 0.5, top - 1.0),
        "thickness": rng.uniform(0.08, 0.35),
    }
    litho = (int(rng.choice([0, 1], p=[0.7, 0.3])),)
    return Body("lamina", litho, params, Surface.random(rng, amplitude=rng.uniform(0.0, 0.4)))


_MAKERS = {"sheet": _sheet, "channel": _channel, "lens": _lens, "lamina": _lamina}
_COUNTS = {"sheet": (1, 2), "channel": (1, 3), "lens": (2, 8), "lamina": (1, 5)}


def random_geology(
    rng: np.random.Generator,
    *,
    size: tuple[float, float],
    top: float,
    base: float,
    styles: Sequence[str] | None = None,
) -> Geology:
    """Draw a geology for a site of plan size ``size`` (m) between elevations ``base`` and ``top``.

    Parameters
    ----------
    rng
        Random generator.
    size
        ``(lx, ly)`` extent of the site (m).
    top, base
        Elevations (m) the bodies are placed between (the ground and the model base).
    styles
        Styles to combine besides the layer cake; None = each of sheet, channel, lens and
        lamina with probability 1/2, at least one.

    Returns
    -------
    Geology
    """
    if styles is None:
        extra = [s for s in _MAKERS if rng.random() < 0.5]
        if not extra:
            extra = [str(rng.choice(list(_MAKERS)))]
    else:
        extra = [s for s in styles if s != "layers"]
        unknown = set(extra) - set(_MAKERS)
        if unknown:
            msg = f"unknown geology style(s) {sorted(unknown)}; expected some of {list(STYLES)}"
            raise ValueError(msg)
    bodies = [_layer_cake(rng, top, base)]
    for style in extra:
        low, high = _COUNTS[style]
        for _ in range(int(rng.integers(low, high + 1))):
            bodies.append(_MAKERS[style](rng, size, top, base))
    return Geology(tuple(bodies))
