"""Built-in plugin `export_hdf5` (not yet filled in: provides nothing)."""
