"""Built-in plugin `surface_gifti` (not yet filled in: provides nothing)."""
