"""Built-in plugin `report_sections` (not yet filled in: provides nothing)."""
