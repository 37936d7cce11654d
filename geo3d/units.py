"""Unit conversion at the edges of geo3d.

Inside geo3d every quantity is in one internal unit: lengths in m, pressure in kPa, flow in
m3/s, electrical conductivity in mS/m, hydraulic conductivity in m/s, volumes in m3.  Units are
converted once, when a file is read (the site file declares the units of each input) and when a
result is written in the user's units.  Unit strings are parsed by pint; a few spellings that
the trade uses and pint does not know (``us_survey_ft``, ``gpm``) are added as aliases.

References
----------
.. [1] Thompson, A., Taylor, B.N. (2008) Guide for the Use of the International System of Units
   (SI). NIST Special Publication 811: 1 ft = 0.3048 m; 1 US survey ft = 1200/3937 m;
   1 psi = 6.894757 kPa; 1 US gal = 3.785411784 L.
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np
import pint
import pyproj

from geo3d.errors import CRSError, UnitError

__all__ = [
    "INTERNAL",
    "ALLOWED",
    "LENGTH_UNITS",
    "to_internal",
    "from_internal",
    "factor",
    "check_unit",
    "length_unit_of",
    "read_crs",
]

#: Internal unit of each quantity.
INTERNAL: dict[str, str] = {
    "length": "m",
    "pressure": "kPa",
    "flow": "m**3/s",
    "ec": "mS/m",
    "k": "m/s",
    "volume": "m**3",
    "area": "m**2",
    "time": "s",
}

#: Spellings a site file may use for each quantity (case-insensitive).
ALLOWED: dict[str, tuple[str, ...]] = {
    "length": ("m", "ft", "us_survey_ft"),
    "pressure": ("kPa", "psi", "Pa", "bar"),
    "flow": ("mL/min", "L/min", "gal/min", "gpm", "m3/s", "L/s"),
    "ec": ("mS/m", "uS/cm", "S/m", "mS/cm"),
    "k": ("m/s", "cm/s", "ft/d", "m/d"),
    "volume": ("m3", "L", "gal", "ft3"),
    "time": ("s", "min"),
}

_ALIASES = {
    "us_survey_ft": "survey_foot",
    "ftus": "survey_foot",
    "gpm": "gallon/minute",
    "gal/min": "gallon/minute",
    "gal": "gallon",
    "m3/s": "m**3/s",
    "m3": "m**3",
    "ft3": "ft**3",
    "ft/d": "ft/day",
    "m/d": "m/day",
    "us": "microsecond",
}


@lru_cache(maxsize=1)
def _registry() -> pint.UnitRegistry:
    return pint.UnitRegistry()


def _canonical(unit: str) -> str:
    key = unit.strip()
    return _ALIASES.get(key.lower(), key)


@lru_cache(maxsize=256)
def factor(unit: str, quantity: str) -> float:
    """Return the factor that converts ``unit`` to the internal unit of ``quantity``.

    Parameters
    ----------
    unit
        Unit string as written in a site file, e.g. ``"psi"`` or ``"uS/cm"``.
    quantity
        One of the keys of :data:`INTERNAL`.

    Returns
    -------
    float
        Multiply a value in ``unit`` by this to get the internal unit.

    Raises
    ------
    UnitError
        If pint does not know the unit or it has the wrong dimension.

    Examples
    --------
    >>> round(factor("psi", "pressure"), 6)  # NIST SP 811
    6.894757
    """
    if quantity not in INTERNAL:
        msg = f"unknown quantity {quantity!r}; expected one of {sorted(INTERNAL)}"
        raise UnitError(msg)
    ureg = _registry()
    try:
        value = ureg.Quantity(1.0, _canonical(unit)).to(INTERNAL[quantity]).magnitude
    except pint.errors.DimensionalityError:
        msg = (
            f"unit {unit!r} is not a unit of {quantity}; expected one of "
            f"{', '.join(ALLOWED.get(quantity, ()))}"
        )
        raise UnitError(msg) from None
    except (pint.errors.UndefinedUnitError, AttributeError, TypeError, ValueError):
        msg = (
            f"unknown unit {unit!r} for {quantity}; expected one of "
            f"{', '.join(ALLOWED.get(quantity, ()))}"
        )
        raise UnitError(msg) from None
    return float(value)


#: Length units a coordinate axis may have.
LENGTH_UNITS: tuple[str, ...] = ("m", "ft", "us_survey_ft")


def length_unit_of(metres: float) -> str | None:
    """Return the length unit (of :data:`LENGTH_UNITS`) that is ``metres`` m long, else None.

    Examples
    --------
    >>> length_unit_of(1200 / 3937)  # the US survey foot, NIST SP 811
    'us_survey_ft'
    """
    for unit in LENGTH_UNITS:
        if abs(factor(unit, "length") - metres) <= 1e-9 * metres:
            return unit
    return None


def read_crs(text: object, *, place: str = "") -> pyproj.CRS:
    """Read a CRS given as text (``"EPSG:nnnn"``, WKT) or as anything pyproj takes.

    Parameters
    ----------
    text
        The CRS as given.
    place
        Where it was given, the start of the error message (none when empty).

    Returns
    -------
    pyproj.CRS

    Raises
    ------
    CRSError
        When pyproj cannot read it.
    """
    try:
        return pyproj.CRS.from_user_input(text)
    except pyproj.exceptions.CRSError as exc:
        prefix = f"{place}: " if place else ""
        msg = f"{prefix}cannot read CRS {str(text)[:60]!r} ({exc}); expected EPSG:nnnn or WKT"
        raise CRSError(msg) from None


def check_unit(unit: str, quantity: str) -> str:
    """Validate a unit string for a quantity and return it unchanged.

    Raises
    ------
    UnitError
        If the unit is unknown or of the wrong dimension.
    """
    factor(unit, quantity)
    return unit


def to_internal(values, unit: str, quantity: str):
    """Convert values from ``unit`` to the internal unit of ``quantity``.

    Examples
    --------
    >>> round(to_internal(10.0, "ft", "length"), 9)  # 1 ft = 0.3048 m, NIST SP 811
    3.048
    """
    f = factor(unit, quantity)
    if np.isscalar(values):
        return float(values) * f  # type: ignore[arg-type]
    return np.asarray(values, dtype=float) * f


def from_internal(values, unit: str, quantity: str):
    """Convert values from the internal unit of ``quantity`` to ``unit``.

    Examples
    --------
    >>> round(from_internal(1.0, "gal", "volume"), 4)  # 1 US gal = 3.785411784 L
    264.1721
    """
    f = factor(unit, quantity)
    if np.isscalar(values):
        return float(values) / f  # type: ignore[arg-type]
    return np.asarray(values, dtype=float) / f
