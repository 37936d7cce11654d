"""geo3d.logs."""
