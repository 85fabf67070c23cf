"""Built-in plugin `check_placement` (not yet filled in: provides nothing)."""
