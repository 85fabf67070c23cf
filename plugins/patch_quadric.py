"""Built-in plugin `patch_quadric` (not yet filled in: provides nothing)."""
