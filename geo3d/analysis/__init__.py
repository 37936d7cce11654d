"""geo3d.analysis."""
