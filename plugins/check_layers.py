"""Built-in plugin `check_layers` (not yet filled in: provides nothing)."""
