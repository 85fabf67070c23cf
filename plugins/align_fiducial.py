"""Built-in plugin `align_fiducial` (not yet filled in: provides nothing)."""
