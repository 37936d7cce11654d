"""Settings that cannot work: non-finite numbers, kriging neighbourhoods, the dask scheduler."""

from __future__ import annotations

import math
from typing import Any

from geo3d.checks.findings import Finding
from geo3d.geostats.kriging import scheduler_problem

__all__ = ["check_settings", "scheduler_problem"]


def _non_finite(value: Any, path: tuple[str, ...]):
    if isinstance(value, float) and not math.isfinite(value):
        yield path, value
    elif isinstance(value, dict):
        for key, item in value.items():
            yield from _non_finite(item, (*path, str(key)))
    elif isinstance(value, list | tuple):
        for item in value:
            yield from _non_finite(item, path)


def _key(path: tuple[str, ...]) -> str:
    return f"[{'.'.join(path[:-1])}] {path[-1]}" if len(path) > 1 else path[0]


def check_settings(site: Any) -> list[Finding]:
    """Flag non-finite settings, kriging neighbourhoods too small, an unreachable scheduler."""
    config = site.config
    toml = f"{site.root}/site.toml"
    findings = []
    for path, value in _non_finite(config.model_dump(), ()):
        place = f"{toml}, {_key(path)}"
        findings.append(
            Finding("error", "setting-non-finite", place, f"{value}", "a finite number")
        )
    kriging = config.kriging
    if kriging.neighbors < 3:
        place = f"{toml}, [kriging] neighbors"
        found = f"neighbors = {kriging.neighbors}"
        expected = (
            "at least 3 samples per estimate (ordinary kriging needs them; 16 to 32 is usual)"
        )
        findings.append(Finding("error", "setting-kriging", place, found, expected))
    n_borings = 0 if site.borings is None else len(site.borings)
    if 0 < kriging.max_per_boring and kriging.max_per_boring * n_borings < 3:
        place = f"{toml}, [kriging] max_per_boring"
        found = f"max_per_boring = {kriging.max_per_boring} with {n_borings} borings"
        expected = "a limit that leaves at least 3 samples per estimate (0 = no limit)"
        findings.append(Finding("error", "setting-kriging", place, found, expected))
    problem = scheduler_problem(kriging.scheduler)
    if problem is not None:
        place = f"{toml}, [kriging] scheduler"
        expected = 'a running dask.distributed scheduler, or "" for local threads'
        findings.append(Finding("error", "setting-scheduler", place, problem, expected))
    return findings
