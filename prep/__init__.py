"""headprep: prepare EEG subjects for source analysis.

The public API for plugin authors and scripts: the data model, the descriptors
plugins return, the ``hookimpl`` marker, errors, units and the registry factory.
"""
from __future__ import annotations

from . import units
from .descriptors import (Aligner, Alignment, Check, CheckReport, Exporter, ForwardSolver,
                          InverseProblem, InverseSolver, MontageTemplate, PatchMaker, ReportSection,
                          SensorReader, SensorWriter, SourceEstimate, SurfaceReader)
from .errors import BundleError, HeadprepError, PluginError, ReadError, UsageError
from .hookspecs import hookimpl
from .model import (FIDUCIALS, Finding, ForwardModel, LeadField, Patches, Provenance, Sensors, Surface,
                    Transform, VolumeConductor)
from .registry import Registry, make_registry

__all__ = [
    "hookimpl", "make_registry", "Registry", "units",
    "Finding", "Provenance", "Sensors", "Surface", "Transform", "Patches", "VolumeConductor",
    "LeadField", "ForwardModel", "FIDUCIALS",
    "SensorReader", "SensorWriter", "SurfaceReader", "MontageTemplate", "Aligner", "Alignment",
    "PatchMaker", "ForwardSolver", "Check", "CheckReport", "Exporter", "InverseSolver",
    "InverseProblem", "SourceEstimate", "ReportSection",
    "HeadprepError", "UsageError", "ReadError", "PluginError", "BundleError",
    "__version__",
]


def __getattr__(name: str) -> str:
    if name == "__version__":
        from importlib.metadata import PackageNotFoundError, version
        try:
            return version("headprep")
        except PackageNotFoundError:
            return "0+unknown"
    raise AttributeError(name)
