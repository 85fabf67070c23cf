"""Built-in plugin `check_mesh` (not yet filled in: provides nothing)."""
