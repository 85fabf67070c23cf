"""Hook specifications: the documentation of record for plugin authors.

Every step of the kit is a *registration hook*: a plugin returns a list of
descriptors (see :mod:`prep.descriptors`) and the core owns dispatch. Hooks take
no arguments today; arguments may be added later (pluggy's opt-in arguments),
so implementations keep working. Return ``[]`` when there is nothing to offer.

One marker name everywhere: project name, entry-point group and hook prefix
are all ``headprep``. ``docs/hooks.md`` has a section per hook headed by its
exact signature (a test keeps them in step).
"""
from __future__ import annotations

from typing import TYPE_CHECKING

import pluggy

if TYPE_CHECKING:  # annotations only: specs never import runtime modules
    from .descriptors import (Aligner, Check, Exporter, ForwardSolver, InverseSolver,
                              MontageTemplate, PatchMaker, ReportSection, SensorReader,
                              SensorWriter, SurfaceReader)

PROJECT = "headprep"
hookspec = pluggy.HookspecMarker(PROJECT)
hookimpl = pluggy.HookimplMarker(PROJECT)


# ------------------------------------------------------------------ electrode files
@hookspec
def headprep_register_sensor_readers() -> list[SensorReader]:
    """Electrode-file readers this plugin provides.

    Returns
    -------
    list of SensorReader
        Each turns a file into ``Sensors`` (positions (n, 3) float64 metres,
        frame ``device`` unless the file names another). Return [] if none.

    .. versionadded:: 0.1
    """


@hookspec
def headprep_register_sensor_writers() -> list[SensorWriter]:
    """Electrode-file writers this plugin provides (e.g. canonical BIDS TSV).

    .. versionadded:: 0.1
    """


@hookspec
def headprep_register_montage_templates() -> list[MontageTemplate]:
    """Rules that place a standard electrode system on a scalp mesh.

    .. versionadded:: 0.1
    """


# ------------------------------------------------------------------ meshes
@hookspec
def headprep_register_surface_readers() -> list[SurfaceReader]:
    """Mesh readers: file -> ``Surface`` (vertices (n, 3) metres, faces (k, 3) int64).

    .. versionadded:: 0.1
    """


# ------------------------------------------------------------------ co-registration
@hookspec
def headprep_register_aligners() -> list[Aligner]:
    """Co-registration methods: sensors + scalp -> ``Alignment`` (a Transform and findings).

    .. versionadded:: 0.1
    """


# ------------------------------------------------------------------ sources
@hookspec
def headprep_register_patch_makers() -> list[PatchMaker]:
    """Cortex surfaces -> ``Patches`` (centres, unit normals, areas m^2, spread rad).

    .. versionadded:: 0.1
    """


# ------------------------------------------------------------------ head model
@hookspec
def headprep_register_forward_solvers() -> list[ForwardSolver]:
    """Forward solvers: conductor + sensors -> ``ForwardModel`` evaluable in V/(A*m).

    .. versionadded:: 0.1
    """


# ------------------------------------------------------------------ quality
@hookspec
def headprep_register_checks() -> list[Check]:
    """Checks over one stage's object; each returns findings with stable codes.

    .. versionadded:: 0.1
    """


# ------------------------------------------------------------------ hand-off
@hookspec
def headprep_register_exporters() -> list[Exporter]:
    """Writers of a bundle into another open container (``.mat``, HDF5...).

    .. versionadded:: 0.1
    """


@hookspec
def headprep_register_inverse_solvers() -> list[InverseSolver]:
    """Reference inverse solvers used by self-tests (not the product).

    .. versionadded:: 0.1
    """


@hookspec
def headprep_register_report_sections() -> list[ReportSection]:
    """Sections of the subject report (HTML fragments).

    .. versionadded:: 0.1
    """
