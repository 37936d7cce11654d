"""geo3d.io."""
