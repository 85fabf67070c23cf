"""Descriptors: what a plugin returns from a ``headprep_register_*`` hook.

Each descriptor is a small frozen dataclass: a name, the callable that does the
work, a one-line description and the optional modules it needs. The registry
collects them, tags each with the plugin that provided it (``plugin``), sorts
them by name and owns dispatch, so a crash is always reported against the
plugin that owns the code.

Callables receive and return the objects of :mod:`prep.model` (metres, SI units).
"""
from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from .model import Finding, ForwardModel, LeadField, Patches, Sensors, Surface, Transform

__all__ = [
    "Descriptor", "SensorReader", "SensorWriter", "SurfaceReader", "MontageTemplate", "Aligner",
    "Alignment", "PatchMaker", "ForwardSolver", "Check", "CheckReport", "Exporter", "InverseSolver",
    "InverseProblem", "SourceEstimate", "ReportSection",
]


@dataclass(frozen=True, kw_only=True)
class Descriptor:
    """Fields every descriptor has.

    Parameters
    ----------
    name : str
        Unique within its kind; what users type (``--reader NAME``, ``method = "NAME"``).
    description : str
        One line for ``headprep plugins``.
    requires : tuple of str
        Importable modules it needs; if one is missing the descriptor is listed
        as unavailable with that name instead of being used.
    defaults : mapping
        Options it accepts with their default values; recipes may set only these
        keys, with values of the same type (an int where a float is expected is fine).
    plugin : str
        Set by the registry: the plugin that provided it.
    """

    name: str
    description: str = ""
    requires: tuple[str, ...] = ()
    defaults: Mapping[str, Any] = field(default_factory=dict)
    plugin: str = ""


# ----------------------------------------------------------------- files
@dataclass(frozen=True, kw_only=True)
class SensorReader(Descriptor):
    """Reads an electrode file into :class:`~prep.model.Sensors`.

    ``read(path, **options) -> Sensors`` in metres, frame ``device`` unless the
    file says otherwise. Options the core may pass: ``units`` (str, the user's
    override of the file's length unit) when the user gave one. Unusable input
    raises :class:`prep.errors.ReadError` with the line number.

    ``suffixes`` are matched case-insensitively against the end of the file name
    (``"_electrodes.tsv"`` beats ``".tsv"``). ``sniff(path) -> bool``, if given,
    may refuse a file whose suffix matches.
    """

    suffixes: tuple[str, ...] = ()
    read: Callable[..., Sensors]
    sniff: Callable[[Path], bool] | None = None


@dataclass(frozen=True, kw_only=True)
class SensorWriter(Descriptor):
    """Writes :class:`~prep.model.Sensors` to a file: ``write(sensors, path) -> list[Path]``.

    Returns every file written (e.g. a TSV and its JSON sidecar).
    """

    suffixes: tuple[str, ...] = ()
    write: Callable[[Sensors, Path], list[Path]]


@dataclass(frozen=True, kw_only=True)
class SurfaceReader(Descriptor):
    """Reads a triangle mesh: ``read(path, **options) -> Surface`` (metres).

    Options the core may pass: ``units``. The returned role may be
    ``"unknown"``: the caller sets it.
    """

    suffixes: tuple[str, ...] = ()
    read: Callable[..., Surface]
    sniff: Callable[[Path], bool] | None = None


@dataclass(frozen=True, kw_only=True)
class MontageTemplate(Descriptor):
    """Places a standard electrode system on a scalp by rule.

    ``place(scalp, fiducials, **options) -> Sensors`` with ``scalp`` a
    :class:`~prep.model.Surface` and ``fiducials`` a mapping of
    ``nasion``/``lpa``/``rpa`` (and optionally ``inion``) to (3,) metres, both in
    the scalp's frame. Returns sensors in that frame.
    """

    place: Callable[..., Sensors]
    systems: tuple[str, ...] = ()


# ----------------------------------------------------------------- geometry steps
@dataclass(frozen=True, kw_only=True)
class Alignment:
    """Result of an aligner.

    Parameters
    ----------
    transform : Transform
        From the sensors' frame to the scalp's frame.
    findings : tuple of Finding
    headshape_inliers : (m,) bool or None
        Which head-shape points the fit used.
    metrics : mapping
        JSON-ready figures: ``rms_m``, ``fre_m``, uncertainty...
    """

    transform: Transform
    findings: tuple[Finding, ...] = ()
    headshape_inliers: np.ndarray | None = None
    metrics: Mapping[str, Any] = field(default_factory=dict)


@dataclass(frozen=True, kw_only=True)
class Aligner(Descriptor):
    """Co-registers sensors to the scalp.

    ``align(sensors, scalp, anatomy_fiducials, **options) -> Alignment`` where
    ``sensors`` is in any frame, ``scalp`` a Surface in the anatomy frame and
    ``anatomy_fiducials`` a mapping name -> (3,) metres in the anatomy frame or
    None. Raise :class:`prep.errors.UsageError` (code ``input.too-few-points``
    in the message) when the inputs cannot determine a transform.
    """

    align: Callable[..., Alignment]


@dataclass(frozen=True, kw_only=True)
class PatchMaker(Descriptor):
    """Turns cortex surfaces into patches.

    ``make(surfaces, *, inner_skull=None, **options) -> Patches``; ``surfaces``
    is a sequence of Surface (one per hemisphere, role ``cortex_left`` /
    ``cortex_right`` / ``cortex``), ``inner_skull`` a Surface or None. Findings
    (``patches.*``, ``mesh.*``) go into ``Patches.findings``.
    """

    make: Callable[..., Patches]


@dataclass(frozen=True, kw_only=True)
class ForwardSolver(Descriptor):
    """Builds a forward model for one subject.

    ``build(conductor, sensor_labels, sensor_positions, *, reference, **options) -> ForwardModel``
    with ``sensor_positions`` (n, 3) metres in the conductor's frame.
    ``restore(conductor=, sensor_labels=, sensor_positions=, reference=, params=, arrays=) -> ForwardModel``
    rebuilds it from what a bundle stored (``ForwardModel.params`` / ``.arrays``).
    ``conductor_kind`` is ``"spheres"`` or ``"layers"``.
    """

    conductor_kind: str
    build: Callable[..., ForwardModel]
    restore: Callable[..., ForwardModel]


# ----------------------------------------------------------------- checks
@dataclass(frozen=True, kw_only=True)
class CheckReport:
    """What a check returns: findings plus figures and arrays worth keeping.

    ``metrics`` is JSON-ready; ``arrays`` (SI units) may be stored in a bundle.
    """

    findings: tuple[Finding, ...] = ()
    metrics: Mapping[str, Any] = field(default_factory=dict)
    arrays: Mapping[str, np.ndarray] = field(default_factory=dict)


@dataclass(frozen=True, kw_only=True)
class Check(Descriptor):
    """Inspects one stage's object and returns findings.

    ``target`` says what it receives, by keyword:

    - ``"sensors"``: ``run(sensors=Sensors, **options)``
    - ``"surface"``: ``run(surface=Surface, **options)``
    - ``"layers"``: ``run(layers=tuple[Surface, ...], **options)`` inside -> out
    - ``"placement"``: ``run(sensors=Sensors, scalp=Surface, fiducials=mapping | None,
      reference=Sensors | None, **options)``, all in the anatomy frame; ``reference`` is the
      labelled layout a montage template placed on this scalp (None when unavailable)
    - ``"patches"``: ``run(patches=Patches, inner_skull=Surface | None, **options)``
    - ``"leadfield"``: ``run(leadfield=LeadField, sensor_positions=(n,3), **options)``

    ``run`` returns a list of Finding or a :class:`CheckReport`.
    """

    target: str
    run: Callable[..., Any]


# ----------------------------------------------------------------- output
@dataclass(frozen=True, kw_only=True)
class Exporter(Descriptor):
    """Writes a bundle into another open container: ``export(bundle, path, **options) -> Path``."""

    format: str
    suffixes: tuple[str, ...] = ()
    export: Callable[..., Path]


@dataclass(frozen=True, kw_only=True)
class InverseProblem:
    """Input of a reference inverse solver.

    Parameters
    ----------
    leadfield : LeadField
        Fixed orientation, (n_sensors, n_sources), V/(A*m).
    data : (n_sensors, n_times) float64, V
    forward : ForwardModel or None
        To evaluate the model at arbitrary positions (dipole fits).
    noise_cov : (n_sensors, n_sensors) float64, V^2, or None (white)
    snr : float
        Amplitude signal-to-noise ratio used for regularisation.
    """

    leadfield: LeadField
    data: np.ndarray
    forward: ForwardModel | None = None
    noise_cov: np.ndarray | None = None
    snr: float = 3.0


@dataclass(frozen=True, kw_only=True)
class SourceEstimate:
    """Output of a reference inverse solver.

    ``amplitudes`` (n_sources, n_times) for distributed solvers (A*m, or
    unitless statistics when ``unit`` says so); ``positions`` (k, 3) metres and
    ``moments`` (k, 3, n_times) A*m for dipole fits.
    """

    solver: str
    amplitudes: np.ndarray | None = None
    unit: str = "A*m"
    positions: np.ndarray | None = None
    moments: np.ndarray | None = None
    metrics: Mapping[str, Any] = field(default_factory=dict)


@dataclass(frozen=True, kw_only=True)
class InverseSolver(Descriptor):
    """A reference inverse solver, for self-tests: ``solve(problem, **options) -> SourceEstimate``."""

    solve: Callable[..., SourceEstimate]


@dataclass(frozen=True, kw_only=True)
class ReportSection(Descriptor):
    """A section of the subject report: ``render(bundle, assets) -> str`` (an HTML fragment).

    ``order`` sorts sections (lower first). ``assets`` is a helper to inline
    images (see :mod:`prep.report`).
    """

    order: int = 100
    title: str = ""
    render: Callable[..., str]

