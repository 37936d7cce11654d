"""The finding of a plausibility check, and the error that carries the refused ones."""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Literal

from geo3d.errors import Geo3dError

__all__ = ["Finding", "PlausibilityError"]


@dataclass(frozen=True)
class Finding:
    """One problem found by a plausibility check.

    Attributes
    ----------
    level
        ``"error"`` (the run is refused) or ``"warning"`` (shown, the run goes on).
    check
        Short name of the check, such as ``"flow-units"``.
    place
        File, row or line and column (built with :func:`geo3d.errors.where`).
    found
        What was found.
    expected
        What was expected, and how to fix it.
    """

    level: Literal["error", "warning"]
    check: str
    place: str
    found: str
    expected: str

    @property
    def message(self) -> str:
        """The one-line message shown to the user."""
        return f"{self.place}: {self.found}; expected {self.expected} [{self.check}]"


class PlausibilityError(Geo3dError, ValueError):
    """The data are well-formed but implausible, or the settings cannot work.

    Parameters
    ----------
    findings
        The error findings; ``.problems`` lists their messages when there are several.
    """

    def __init__(self, findings: Sequence[Finding]):
        self.findings = list(findings)
        messages = [f.message for f in self.findings]
        self.problems: list[str] = messages if len(messages) > 1 else []
        super().__init__("\n".join(messages))
