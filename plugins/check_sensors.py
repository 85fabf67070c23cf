"""Built-in plugin `check_sensors` (not yet filled in: provides nothing)."""
