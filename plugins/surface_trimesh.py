"""Built-in plugin `surface_trimesh` (not yet filled in: provides nothing)."""
