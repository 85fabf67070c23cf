"""Exceptions of the kit.

There are three tiers (see DEVELOPERS.md):

1. A data problem the user can fix is a :class:`prep.model.Finding`, never raised.
2. Input that cannot be used raises :class:`ReadError` (a file) or
   :class:`UsageError` (an invocation or recipe): exit status 2.
3. Anything else raised inside a plugin is a bug: the registry wraps it in
   :class:`PluginError` naming the plugin, its distribution and version: exit 3.
"""
from __future__ import annotations

from os import PathLike


class HeadprepError(Exception):
    """Base class of every exception the kit raises on purpose."""

    exit_status = 3


class UsageError(HeadprepError):
    """The invocation, a recipe or an option cannot be used (exit 2).

    The message is one line naming the file, key or option at fault.
    """

    exit_status = 2


class ReadError(UsageError):
    """An input file cannot be read.

    Parameters
    ----------
    path : path-like or str
        The file at fault.
    line : int or None
        1-based line number (or record number) where reading failed, if known.
    reason : str
        What is wrong, in plain words; include the offending value when short.
    """

    def __init__(self, path: str | PathLike[str], line: int | None, reason: str) -> None:
        self.path = str(path)
        self.line = line
        self.reason = reason
        where = f"{self.path}:{line}" if line is not None else self.path
        super().__init__(f"{where}: {reason}")


class PluginError(HeadprepError):
    """A plugin crashed (a bug in the plugin, not a problem of the data): exit 3.

    Parameters
    ----------
    plugin : str
        Plugin (entry-point) name.
    dist : str
        Distribution that ships it, ``name==version`` when known.
    step : str
        What the kit was doing (``"sensor reader 'bids'"``, ``"loading"``...).
    """

    exit_status = 3

    def __init__(self, plugin: str, dist: str, step: str, cause: BaseException | None = None) -> None:
        self.plugin = plugin
        self.dist = dist
        self.step = step
        detail = f": {type(cause).__name__}: {cause}" if cause is not None else ""
        super().__init__(f"plugin '{plugin}' ({dist}) failed during {step}{detail}")


class BundleError(UsageError):
    """A bundle cannot be opened at all (missing manifest, not JSON): exit 2.

    Damaged content of a readable bundle is reported as findings instead
    (``bundle.checksum``, ``bundle.schema``).
    """
