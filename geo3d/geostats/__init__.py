"""geo3d.geostats."""
