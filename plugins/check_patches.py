"""Built-in plugin `check_patches` (not yet filled in: provides nothing)."""
