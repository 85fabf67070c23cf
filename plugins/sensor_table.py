"""Built-in plugin `sensor_table` (not yet filled in: provides nothing)."""
