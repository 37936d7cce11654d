"""Plausibility checks and resource estimates run by ``geo3d check`` (and so by every run).

The readers refuse malformed files; these checks look at well-formed data that is probably
wrong (coordinates in degrees, swapped axes, a unit mix-up, a dead sensor, a dissipation test
below its log, a degenerate layout of borings...) and at settings that cannot work or would not
fit in the machine. Each check returns :class:`Finding` objects: an *error* stops the run before
any work, a *warning* is shown and the run goes on. Every finding names the file, the row or
line, the column, what was found and what was expected, and carries a short name in brackets
(``[flow-units]``) that users can search the documentation for.

:func:`check_site` runs them all; :func:`report` turns the findings into warnings and one
:class:`PlausibilityError`.
"""

from __future__ import annotations

import warnings
from collections.abc import Iterable, Sequence
from typing import Any

from geo3d.checks import coordinates, logs, records, resources, settings
from geo3d.checks.findings import Finding, PlausibilityError
from geo3d.errors import Geo3dWarning

__all__ = ["Finding", "PlausibilityError", "check_site", "report", "MODEL_STAGES"]

#: Stages that need a 3D model: geometry, kriging and resource findings are errors only when
#: one of them is planned.
MODEL_STAGES = frozenset({"model", "volumes", "report"})


def check_site(
    site: Any, *, n_realizations: int | None = None, stages: Iterable[str] | None = None
) -> list[Finding]:
    """Run every plausibility check and the resource estimate on a site.

    Parameters
    ----------
    site
        A :class:`geo3d.site.Site`.
    n_realizations
        Overrides ``[simulation] realizations`` in the resource estimate.
    stages
        Stages the run will go through; default every stage. Without a model stage, findings
        about the 3D model (too few borings, kriging settings, resources) are warnings.

    Returns
    -------
    list of Finding
    """
    findings: list[Finding] = []
    findings += settings.check_settings(site)
    findings += coordinates.check_coordinates(site)
    findings += coordinates.check_zones(site)
    findings += coordinates.check_layout(site)
    findings += logs.check_log_values(site)
    findings += logs.check_log_files(site)
    findings += logs.check_depths(site)
    findings += records.check_dissipation(site)
    findings += records.check_slug_tests(site)
    findings += records.check_hydrostatic(site)
    if not any(f.level == "error" and f.check.startswith("setting") for f in findings):
        findings += resources.check_resources(site, n_realizations=n_realizations)
    planned = set(stages) if stages is not None else set(MODEL_STAGES)
    if not planned & MODEL_STAGES:
        findings = [_soften(f) if f.check in _MODEL_ONLY else f for f in findings]
    return findings


_MODEL_ONLY = {
    "too-few-borings",
    "collinear-borings",
    "coincident-borings",
    "setting-kriging",
    "resources-cells",
    "resources-memory",
    "resources-time",
}


def _soften(finding: Finding) -> Finding:
    return Finding("warning", finding.check, finding.place, finding.found, finding.expected)


def report(findings: Sequence[Finding], *, stacklevel: int = 2) -> None:
    """Show warning findings as :class:`~geo3d.errors.Geo3dWarning` and raise on errors.

    Raises
    ------
    PlausibilityError
        If any finding is an error.
    """
    for finding in findings:
        if finding.level == "warning":
            warnings.warn(finding.message, Geo3dWarning, stacklevel=stacklevel + 1)
    errors = [f for f in findings if f.level == "error"]
    if errors:
        raise PlausibilityError(errors)
