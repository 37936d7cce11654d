"""Errors and warnings raised by geo3d.

Every error a user can cause with bad input is a subclass of :class:`Geo3dError`, and each
subclass also inherits the built-in exception it narrows, so that ``except ValueError`` keeps
working for callers who do not know geo3d.  Messages name the file, the row or line, the column
and what was expected; build them with :func:`where` so they all read alike.
"""

from __future__ import annotations

from collections.abc import Iterable
from os import PathLike

__all__ = [
    "Geo3dError",
    "SiteFileError",
    "SiteValidationError",
    "TableFormatError",
    "LogFormatError",
    "UnitError",
    "CRSError",
    "GeometryError",
    "WaterLevelError",
    "ModelError",
    "OutputExistsError",
    "Geo3dWarning",
    "where",
]


class Geo3dError(Exception):
    """Root of every error geo3d raises on purpose."""


class SiteFileError(Geo3dError, ValueError):
    """``site.toml`` is missing, unreadable or breaks the schema."""


class SiteValidationError(Geo3dError, ValueError):
    """Several problems were found in a site folder.

    Parameters
    ----------
    problems
        One message per problem; each names the file, row or line, column and what was
        expected.

    Examples
    --------
    >>> print(SiteValidationError(["a.csv, line 2: bad", "b.csv, line 3: worse"]))
    2 problems found in the site:
    - a.csv, line 2: bad
    - b.csv, line 3: worse
    """

    def __init__(self, problems: Iterable[str]):
        self.problems: list[str] = list(problems)
        count = len(self.problems)
        header = f"{count} problem{'s' if count != 1 else ''} found in the site:"
        super().__init__("\n".join([header, *(f"- {p}" for p in self.problems)]))


class TableFormatError(Geo3dError, ValueError):
    """A table (borings, dissipation tests, slug tests, sensor checks) is malformed."""


class LogFormatError(Geo3dError, ValueError):
    """An injection log (CSV or LAS) is malformed."""


class UnitError(Geo3dError, ValueError):
    """A unit string is unknown or of the wrong dimension."""


class CRSError(Geo3dError, ValueError):
    """A coordinate reference system is missing or invalid."""


class GeometryError(Geo3dError, ValueError):
    """A boundary or treatment-zone layer is malformed."""


class WaterLevelError(Geo3dError, ValueError):
    """The water table cannot be found from the data given."""


class ModelError(Geo3dError, RuntimeError):
    """A model cannot be built from the data given (too few data, degenerate geometry...)."""


class OutputExistsError(Geo3dError, FileExistsError):
    """The output folder exists and overwriting was not asked for."""


class Geo3dWarning(UserWarning):
    """A result is usable but deserves the user's attention."""


def where(
    path: str | PathLike | None = None,
    *,
    row: int | None = None,
    line: int | None = None,
    column: str | None = None,
) -> str:
    """Describe a place in an input file for an error message.

    Parameters
    ----------
    path
        The file.
    row
        1-based data row (the first row after the header is row 1).
    line
        1-based line in the file (counting header lines).
    column
        Column name.

    Returns
    -------
    str
        Such as ``"borings.csv, line 4, column 'x'"``.

    Examples
    --------
    >>> where("borings.csv", line=4, column="x")
    "borings.csv, line 4, column 'x'"
    """
    parts = []
    if path is not None:
        parts.append(str(path))
    if row is not None:
        parts.append(f"row {row}")
    if line is not None:
        parts.append(f"line {line}")
    if column is not None:
        parts.append(f"column '{column}'")
    return ", ".join(parts) if parts else "input"
