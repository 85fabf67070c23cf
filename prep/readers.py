"""Reading inputs through the registry: pick the reader, call it, fill in provenance.

Commands and the pipeline call these instead of choosing readers themselves.
"""
from __future__ import annotations

import os
from dataclasses import replace
from pathlib import Path
from typing import Any

from .atomic import sha256_file
from .errors import ReadError, UsageError
from .model import Provenance, Sensors, Surface
from .registry import Registry

__all__ = ["read_sensors", "read_surface", "check_input_file"]


def check_input_file(path: str | os.PathLike[str], what: str = "input") -> Path:
    """``path`` as a Path if it is a readable file; UsageError naming it otherwise."""
    p = Path(path)
    if not p.exists():
        raise UsageError(f"{p}: {what} file not found")
    if p.is_dir():
        raise UsageError(f"{p}: is a folder, not a {what} file")
    if not p.is_file():
        raise UsageError(f"{p}: {what} is not a regular file")
    if not os.access(p, os.R_OK):
        raise UsageError(f"{p}: {what} file is not readable")
    return p


def _provenance(old: Provenance, path: Path, reader: str) -> Provenance:
    return replace(old, file=str(path), reader=reader, sha256=sha256_file(path))


def _read(registry: Registry, kind: str, expected: type, path: str | os.PathLike[str], what: str,
          reader: str | None, units: str | None) -> tuple[Any, Path, Any]:
    """Pick the reader of ``kind`` for ``path``, call it (with the units override) and check its result."""
    p = check_input_file(path, what)
    desc = registry.for_file(kind, p, reader)
    kwargs = {}
    if units is not None:
        if not registry.accepts(desc.read, "units"):
            raise UsageError(f"{kind.replace('_', ' ')} '{desc.name}' does not take a units override")
        kwargs["units"] = units
    obj = registry.call(desc, "read", p, step=f"{kind.replace('_', ' ')} '{desc.name}' reading {p}", **kwargs)
    if not isinstance(obj, expected):
        raise ReadError(p, None, f"reader '{desc.name}' returned {type(obj).__name__}, not {expected.__name__}")
    return obj, p, desc


def read_sensors(registry: Registry, path: str | os.PathLike[str], *, reader: str | None = None,
                 units: str | None = None) -> Sensors:
    """Read an electrode file with the matching (or named) sensor reader.

    Parameters
    ----------
    registry : Registry
    path : path
    reader : str, optional
        Force a reader by name (``--reader``).
    units : str, optional
        The user's statement of the file's length unit, overriding the file.

    Returns
    -------
    Sensors
        Metres; provenance has file, reader name and sha256.
    """
    sensors, p, desc = _read(registry, "sensor_reader", Sensors, path, "electrode", reader, units)
    return replace(sensors, provenance=_provenance(sensors.provenance, p, desc.name))


def read_surface(registry: Registry, path: str | os.PathLike[str], role: str, *, reader: str | None = None,
                 units: str | None = None, frame: str = "anatomy") -> Surface:
    """Read a mesh with the matching (or named) surface reader and give it its role.

    Returns
    -------
    Surface
        Vertices in metres; ``role`` and ``frame`` set; provenance filled in.
    """
    surf, p, desc = _read(registry, "surface_reader", Surface, path, f"{role} mesh", reader, units)
    return replace(surf, role=role, frame=frame, provenance=_provenance(surf.provenance, p, desc.name))
