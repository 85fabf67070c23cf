"""Built-in plugin `check_leadfield` (not yet filled in: provides nothing)."""
