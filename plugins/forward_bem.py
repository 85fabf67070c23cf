"""Built-in plugin `forward_bem` (not yet filled in: provides nothing)."""
