"""Built-in plugin `forward_spheres` (not yet filled in: provides nothing)."""
