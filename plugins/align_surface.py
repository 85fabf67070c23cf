"""Built-in plugin `align_surface` (not yet filled in: provides nothing)."""
