"""Built-in plugin `export_mat` (not yet filled in: provides nothing)."""
