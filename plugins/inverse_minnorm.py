"""Built-in plugin `inverse_minnorm` (not yet filled in: provides nothing)."""
