"""geo3d.report."""
