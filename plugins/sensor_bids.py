"""Built-in plugin `sensor_bids` (not yet filled in: provides nothing)."""
