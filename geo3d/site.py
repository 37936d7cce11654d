"""The site: validated input tables, geometry and settings, in internal units.

:func:`read_site` reads a site folder (``site.toml`` and the files it names), validates every
file, converts units once and returns a :class:`Site`. Problems found in different files are
collected, so one run reports them all (:class:`SiteValidationError`).
"""

from __future__ import annotations

from collections.abc import Iterable

from geo3d.errors import Geo3dError

__all__ = ["SiteValidationError"]


class SiteValidationError(Geo3dError, ValueError):
    """Several problems were found in a site folder.

    Parameters
    ----------
    problems
        One message per problem; each names the file, row or line, column and what was
        expected.
    """

    def __init__(self, problems: Iterable[str]):
        self.problems: list[str] = list(problems)
        count = len(self.problems)
        header = f"{count} problem{'s' if count != 1 else ''} found in the site:"
        super().__init__("\n".join([header, *(f"- {p}" for p in self.problems)]))
