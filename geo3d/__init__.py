"""geo3d: from direct-push injection logs to a 3D hydrogeological site model.

The whole job is :func:`geo3d.run`; each stage is a plain function:

>>> import geo3d
>>> site = geo3d.read_site("demo_site")                      # doctest: +SKIP
>>> logs = geo3d.process_logs(site)                          # doctest: +SKIP
>>> results = geo3d.run("demo_site", "out", overwrite=True)  # doctest: +SKIP

Names are imported on first use, so that ``import geo3d`` (and the command line) stays quick;
``__all__`` lists them all.
"""

from __future__ import annotations

import importlib
from typing import Any

from geo3d.errors import Geo3dError, Geo3dWarning

__version__ = "0.1.0"

_LAZY: dict[str, str] = {
    "Site": "geo3d.site",
    "read_site": "geo3d.site",
    "SiteConfig": "geo3d.config",
    "load_config": "geo3d.config",
    "process_logs": "geo3d.logs.process",
    "LogResults": "geo3d.logs.process",
    "FaciesClass": "geo3d.facies",
    "FaciesClasses": "geo3d.facies",
    "LogsOptions": "geo3d.config",
    "build_voxel_model": "geo3d.model",
    "ModelResult": "geo3d.model",
    "thickness_maps": "geo3d.analysis",
    "zone_volumes": "geo3d.analysis",
    "injection_plan": "geo3d.analysis",
    "run": "geo3d.pipeline",
    "RunResults": "geo3d.results",
    "write_report": "geo3d.report",
}

__all__ = [
    "FaciesClass",
    "FaciesClasses",
    "Geo3dError",
    "Geo3dWarning",
    "LogResults",
    "LogsOptions",
    "ModelResult",
    "RunResults",
    "Site",
    "SiteConfig",
    "__version__",
    "build_voxel_model",
    "injection_plan",
    "load_config",
    "process_logs",
    "read_site",
    "run",
    "thickness_maps",
    "write_report",
    "zone_volumes",
]


def __getattr__(name: str) -> Any:
    if name in _LAZY:
        value = getattr(importlib.import_module(_LAZY[name]), name)
        globals()[name] = value
        return value
    msg = f"module 'geo3d' has no attribute {name!r}"
    raise AttributeError(msg)


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(__all__))
