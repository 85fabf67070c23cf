"""headprep's built-in plugins (installed as ``prep_plugins``).

Each module is one plugin, registered through the ``headprep`` entry-point
group exactly like a third-party plugin. A plugin imports only ``prep``'s
public API, never another plugin.
"""
