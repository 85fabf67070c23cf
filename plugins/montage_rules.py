"""Built-in plugin `montage_rules` (not yet filled in: provides nothing)."""
