"""geo3d: from direct-push injection logs to a 3D hydrogeological site model."""

from geo3d.errors import Geo3dError, Geo3dWarning

__version__ = "0.1.0"

__all__ = ["Geo3dError", "Geo3dWarning", "__version__"]
