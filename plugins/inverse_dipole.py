"""Built-in plugin `inverse_dipole` (not yet filled in: provides nothing)."""
