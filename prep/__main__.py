"""``python -m prep`` is ``headprep``."""
from .cli import entry

entry()
