"""The data model: plain frozen dataclasses holding numpy arrays.

All coordinates are metres, float64, C-contiguous and read-only once built.
Every geometric object names its coordinate frame:

``device``
    as read from the digitizer or file;
``head``
    from the fiducials: RAS, origin midway between the preauricular points,
    +x through the right one, +y toward the nasion, +z up;
``anatomy``
    the frame of the MRI-derived meshes.

``__post_init__`` enforces *structure* (shapes agree, indices valid, unit
normals); data *quality* (non-finite values, units that look wrong...) is left
to the checks, which return :class:`Finding` objects.
"""
from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np

from ._typing import ArrayLike, FloatArray, IntArray
from .findings import CODE_PATTERN, SEVERITIES

__all__ = [
    "Finding", "Provenance", "Sensors", "Surface", "Transform", "Patches",
    "VolumeConductor", "LeadField", "ForwardModel", "FIDUCIALS",
]

#: canonical fiducial names; readers map synonyms onto these.
FIDUCIALS = ("nasion", "lpa", "rpa")


# --------------------------------------------------------------------- helpers
def _frozen(a: ArrayLike, dtype: type = np.float64) -> np.ndarray:
    arr = np.array(a, dtype=dtype, order="C", copy=True)
    arr.setflags(write=False)
    return arr


def _points(name: str, a: ArrayLike | None, *, allow_empty: bool = True) -> FloatArray:
    if a is None:
        a = np.zeros((0, 3))
    arr = _frozen(a)
    if arr.ndim == 2 and arr.shape[0] == 0 and allow_empty:
        return arr
    if arr.ndim == 1 and arr.size == 0 and allow_empty:
        return _frozen(np.zeros((0, 3)))
    if arr.ndim != 2 or arr.shape[1] != 3:
        raise ValueError(f"{name} must be (n, 3), got shape {arr.shape}")
    return arr


def _set(obj: object, name: str, value: object) -> None:
    object.__setattr__(obj, name, value)


def _check_frame(frame: str) -> None:
    if not isinstance(frame, str) or not frame:
        raise ValueError(f"frame must be a non-empty string, got {frame!r}")


# --------------------------------------------------------------------- findings
@dataclass(frozen=True, kw_only=True)
class Finding:
    """A data problem (or note) that a user can act on.

    Parameters
    ----------
    code : str
        Stable code such as ``placement.off-scalp`` (see docs/findings.md).
    severity : {'fail', 'warn', 'info'}
    message : str
        Plain words, naming the labels, indices or files concerned.
    subjects : tuple of str
        What it concerns: electrode labels, ``"patch 12"``, file paths...
    values : mapping
        Measured values (JSON-serialisable), SI units unless the key says ``_mm``
        or ``_deg``.
    threshold : float, mapping or None
        The limit that was crossed, same unit as the value it bounds.
    source : str
        The step or plugin that produced it.
    """

    code: str
    severity: str
    message: str
    subjects: tuple[str, ...] = ()
    values: Mapping[str, Any] = field(default_factory=dict)
    threshold: Any = None
    source: str = ""

    def __post_init__(self) -> None:
        if not CODE_PATTERN.match(self.code):
            raise ValueError(f"finding code {self.code!r} is not of the form 'area.name'")
        if self.severity not in SEVERITIES:
            raise ValueError(f"severity must be one of {SEVERITIES}, got {self.severity!r}")
        _set(self, "subjects", tuple(str(s) for s in self.subjects))
        _set(self, "values", dict(self.values))

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready dictionary (the form used in bundles and ``--json``)."""
        return {
            "code": self.code, "severity": self.severity, "message": self.message,
            "subjects": list(self.subjects), "values": _jsonable(self.values),
            "threshold": _jsonable(self.threshold), "source": self.source,
        }

    @classmethod
    def from_dict(cls, d: Mapping[str, Any]) -> Finding:
        return cls(code=d["code"], severity=d["severity"], message=d["message"],
                   subjects=tuple(d.get("subjects", ())), values=d.get("values", {}),
                   threshold=d.get("threshold"), source=d.get("source", ""))


def _jsonable(v: Any) -> Any:
    if isinstance(v, Mapping):
        return {str(k): _jsonable(x) for k, x in v.items()}
    if isinstance(v, (list, tuple)):
        return [_jsonable(x) for x in v]
    if isinstance(v, np.ndarray):
        return _jsonable(v.tolist())
    if isinstance(v, np.generic):
        return v.item()
    if isinstance(v, float) and not np.isfinite(v):
        return str(v)
    return v


# --------------------------------------------------------------------- provenance
@dataclass(frozen=True, kw_only=True)
class Provenance:
    """Where an object came from.

    Parameters
    ----------
    file : str or None
        Path as given by the user.
    reader : str or None
        Name of the reader plugin.
    sha256 : str or None
        Hex digest of the file's bytes.
    unit : str or None
        Length unit of the file before conversion to metres (``"mm"``...).
    unit_source : str or None
        ``"declared"`` (the file or sidecar said so), ``"option"`` (the user said
        so) or ``"assumed"`` (inferred; an ``input.units-suspect`` finding says why).
    """

    file: str | None = None
    reader: str | None = None
    sha256: str | None = None
    unit: str | None = None
    unit_source: str | None = None
    extra: Mapping[str, Any] = field(default_factory=dict)

    def to_dict(self) -> dict[str, Any]:
        return {"file": self.file, "reader": self.reader, "sha256": self.sha256,
                "unit": self.unit, "unit_source": self.unit_source, "extra": _jsonable(self.extra)}


# --------------------------------------------------------------------- sensors
@dataclass(frozen=True, kw_only=True)
class Sensors:
    """Electrode positions of one subject.

    Parameters
    ----------
    labels : tuple of str, length n
        Normalised labels (``T7``, not ``t3``); duplicates are kept for checks.
    positions : (n, 3) float64, metres, in ``frame``
    frame : str
    fiducials : mapping str -> (3,) float64, metres, in ``frame``
        Keys from :data:`FIDUCIALS` plus optionally ``inion``.
    headshape : (m, 3) float64, metres, in ``frame``
        Extra digitized scalp points (may be empty).
    kinds : tuple of str, length n
        ``eeg`` for scalp electrodes, or ``eog``, ``ref``, ``gnd``, ``misc``.
    original_labels : tuple of str, length n
        Labels as written in the file (defaults to ``labels``).
    provenance : Provenance
    findings : tuple of Finding
        Findings raised while reading (they travel with the object).
    """

    labels: tuple[str, ...]
    positions: FloatArray
    frame: str
    fiducials: Mapping[str, FloatArray] = field(default_factory=dict)
    headshape: FloatArray | None = None
    kinds: tuple[str, ...] | None = None
    original_labels: tuple[str, ...] | None = None
    provenance: Provenance = field(default_factory=Provenance)
    findings: tuple[Finding, ...] = ()

    def __post_init__(self) -> None:
        _check_frame(self.frame)
        labels = tuple(str(s) for s in self.labels)
        pos = _points("Sensors.positions", self.positions)
        if pos.shape[0] != len(labels):
            raise ValueError(f"{len(labels)} labels but {pos.shape[0]} positions")
        _set(self, "labels", labels)
        _set(self, "positions", pos)
        fids = {}
        for k, v in dict(self.fiducials).items():
            a = _frozen(v)
            if a.shape != (3,):
                raise ValueError(f"fiducial {k!r} must be (3,), got {a.shape}")
            fids[str(k)] = a
        _set(self, "fiducials", fids)
        _set(self, "headshape", _points("Sensors.headshape", self.headshape))
        kinds = tuple(self.kinds) if self.kinds is not None else ("eeg",) * len(labels)
        if len(kinds) != len(labels):
            raise ValueError(f"{len(labels)} labels but {len(kinds)} kinds")
        _set(self, "kinds", kinds)
        orig = tuple(self.original_labels) if self.original_labels is not None else labels
        if len(orig) != len(labels):
            raise ValueError(f"{len(labels)} labels but {len(orig)} original labels")
        _set(self, "original_labels", orig)
        _set(self, "findings", tuple(self.findings))

    def __len__(self) -> int:
        return len(self.labels)

    @property
    def eeg_mask(self) -> np.ndarray:
        """(n,) bool: scalp electrodes (kind ``eeg``)."""
        return np.array([k == "eeg" for k in self.kinds], dtype=bool)

    def select(self, mask: ArrayLike) -> Sensors:
        """A copy keeping the channels where ``mask`` (n,) bool is true."""
        m = np.asarray(mask, dtype=bool)
        idx = np.flatnonzero(m)
        return replace(self, labels=tuple(self.labels[i] for i in idx), positions=self.positions[m],
                       kinds=tuple(self.kinds[i] for i in idx),
                       original_labels=tuple(self.original_labels[i] for i in idx))

    def transformed(self, transform: Transform) -> Sensors:
        """Positions, fiducials and head shape moved by ``transform``.

        ``transform.from_frame`` must equal ``self.frame``.
        """
        if transform.from_frame != self.frame:
            raise ValueError(f"transform goes from {transform.from_frame!r}, sensors are in {self.frame!r}")
        fids = {k: transform.apply(v[None])[0] for k, v in self.fiducials.items()}
        return replace(self, positions=transform.apply(self.positions), fiducials=fids,
                       headshape=transform.apply(self.headshape), frame=transform.to_frame)

    def with_findings(self, *more: Finding) -> Sensors:
        return replace(self, findings=self.findings + tuple(more))


# --------------------------------------------------------------------- surfaces
@dataclass(frozen=True, kw_only=True)
class Surface:
    """A triangle mesh.

    Parameters
    ----------
    vertices : (n, 3) float64, metres, in ``frame``
    faces : (k, 3) int64
        Vertex indices, counter-clockwise seen from outside for closed surfaces.
    role : str
        ``scalp``, ``outer_skull``, ``inner_skull``, ``cortex``, ``cortex_left``,
        ``cortex_right`` or a name of the user's.
    frame : str
    provenance : Provenance
    findings : tuple of Finding
    """

    vertices: FloatArray
    faces: IntArray
    role: str
    frame: str = "anatomy"
    provenance: Provenance = field(default_factory=Provenance)
    findings: tuple[Finding, ...] = ()

    def __post_init__(self) -> None:
        _check_frame(self.frame)
        v = _points("Surface.vertices", self.vertices)
        f = np.array(self.faces, dtype=np.int64, order="C", copy=True)
        if f.size == 0:
            f = f.reshape(0, 3)
        if f.ndim != 2 or f.shape[1] != 3:
            raise ValueError(f"Surface.faces must be (k, 3), got shape {f.shape}")
        if f.size and (f.min() < 0 or f.max() >= len(v)):
            raise ValueError(f"Surface.faces index vertices outside 0..{len(v) - 1}")
        f.setflags(write=False)
        _set(self, "vertices", v)
        _set(self, "faces", f)
        _set(self, "findings", tuple(self.findings))

    def transformed(self, transform: Transform) -> Surface:
        if transform.from_frame != self.frame:
            raise ValueError(f"transform goes from {transform.from_frame!r}, surface is in {self.frame!r}")
        faces = self.faces if transform.determinant > 0 else self.faces[:, ::-1]
        return replace(self, vertices=transform.apply(self.vertices), faces=faces, frame=transform.to_frame)


# --------------------------------------------------------------------- transform
@dataclass(frozen=True, kw_only=True)
class Transform:
    """An affine map between two named frames (normally rigid, maybe scaled).

    Parameters
    ----------
    matrix : (4, 4) float64
        Homogeneous matrix acting on column vectors, translation in metres.
    from_frame, to_frame : str
    method : str
        How it was obtained (``"fiducials"``, ``"surface-fit"``, ``"identity"``...).
    residuals : mapping
        Fit quality, e.g. ``{"rms_m": 0.002, "fre_m": 0.003}``.
    """

    matrix: FloatArray
    from_frame: str
    to_frame: str
    method: str = ""
    residuals: Mapping[str, Any] = field(default_factory=dict)

    def __post_init__(self) -> None:
        _check_frame(self.from_frame)
        _check_frame(self.to_frame)
        m = _frozen(self.matrix)
        if m.shape != (4, 4):
            raise ValueError(f"Transform.matrix must be (4, 4), got {m.shape}")
        if not np.allclose(m[3], [0, 0, 0, 1]):
            raise ValueError("Transform.matrix last row must be [0, 0, 0, 1]")
        _set(self, "matrix", m)
        _set(self, "residuals", dict(self.residuals))

    @classmethod
    def identity(cls, from_frame: str, to_frame: str) -> Transform:
        return cls(matrix=np.eye(4), from_frame=from_frame, to_frame=to_frame, method="identity")

    @classmethod
    def from_rotation(cls, rotation: ArrayLike, translation: ArrayLike, *, scale: float = 1.0,
                      from_frame: str, to_frame: str, method: str = "",
                      residuals: Mapping[str, Any] | None = None) -> Transform:
        """Build ``x -> scale * R x + t`` from (3, 3) ``rotation`` and (3,) ``translation`` (m)."""
        m = np.eye(4)
        m[:3, :3] = scale * np.asarray(rotation, dtype=float)
        m[:3, 3] = np.asarray(translation, dtype=float)
        return cls(matrix=m, from_frame=from_frame, to_frame=to_frame, method=method,
                   residuals=residuals or {})

    @property
    def rotation(self) -> FloatArray:
        """(3, 3) linear part (rotation times scale)."""
        return self.matrix[:3, :3]

    @property
    def translation(self) -> FloatArray:
        """(3,) translation, metres."""
        return self.matrix[:3, 3]

    @property
    def determinant(self) -> float:
        return float(np.linalg.det(self.matrix[:3, :3]))

    def apply(self, points: ArrayLike) -> FloatArray:
        """Map (n, 3) points (metres, in ``from_frame``) to ``to_frame``."""
        p = np.asarray(points, dtype=np.float64)
        if p.ndim != 2 or p.shape[1] != 3:
            raise ValueError(f"points must be (n, 3), got {p.shape}")
        return p @ self.matrix[:3, :3].T + self.matrix[:3, 3]

    def apply_vectors(self, vectors: ArrayLike) -> FloatArray:
        """Rotate (n, 3) direction vectors (no translation, no renormalisation)."""
        v = np.asarray(vectors, dtype=np.float64)
        return v @ self.matrix[:3, :3].T

    def inverse(self) -> Transform:
        return Transform(matrix=np.linalg.inv(self.matrix), from_frame=self.to_frame,
                         to_frame=self.from_frame, method=f"inverse({self.method})",
                         residuals=self.residuals)

    def then(self, other: Transform) -> Transform:
        """``self`` followed by ``other``; ``other.from_frame`` must be ``self.to_frame``."""
        if other.from_frame != self.to_frame:
            raise ValueError(f"cannot compose: {self.from_frame}->{self.to_frame} then "
                             f"{other.from_frame}->{other.to_frame}")
        return Transform(matrix=other.matrix @ self.matrix, from_frame=self.from_frame,
                         to_frame=other.to_frame, method=f"{self.method}+{other.method}".strip("+"))

    def __matmul__(self, other: Transform) -> Transform:
        """``b @ a`` is ``a`` followed by ``b`` (matrix order)."""
        return other.then(self)

    def to_dict(self) -> dict[str, Any]:
        return {"matrix": self.matrix.tolist(), "from": self.from_frame, "to": self.to_frame,
                "method": self.method, "residuals": _jsonable(self.residuals)}

    @classmethod
    def from_dict(cls, d: Mapping[str, Any]) -> Transform:
        return cls(matrix=np.asarray(d["matrix"], dtype=float), from_frame=d["from"], to_frame=d["to"],
                   method=d.get("method", ""), residuals=d.get("residuals", {}))


# --------------------------------------------------------------------- patches
@dataclass(frozen=True, kw_only=True)
class Patches:
    """Cortical source patches: one fixed-orientation dipole each.

    Parameters
    ----------
    centres : (n, 3) float64, metres, in ``frame``
        A point of the source surface per patch.
    normals : (n, 3) float64, unit
        Area-weighted mean outward normal: the dipole orientation.
    areas : (n,) float64, m^2
    spread : (n,) float64, radians
        Angular dispersion of the member normals about ``normals``.
    hemisphere : (n,) int8
        0 left, 1 right, -1 unknown.
    vertex_patch : (V,) int64
        For every vertex of the source surfaces (concatenated in order), the
        patch it belongs to, or -1 if excluded.
    frame : str
    """

    centres: FloatArray
    normals: FloatArray
    areas: FloatArray
    spread: FloatArray
    hemisphere: np.ndarray
    vertex_patch: IntArray | None = None
    frame: str = "anatomy"
    findings: tuple[Finding, ...] = ()

    def __post_init__(self) -> None:
        _check_frame(self.frame)
        c = _points("Patches.centres", self.centres)
        n = _points("Patches.normals", self.normals)
        a = _frozen(self.areas)
        s = _frozen(self.spread)
        h = _frozen(self.hemisphere, np.int8)
        k = c.shape[0]
        for name, arr in (("normals", n), ("areas", a), ("spread", s), ("hemisphere", h)):
            if arr.shape[0] != k:
                raise ValueError(f"Patches.{name} has {arr.shape[0]} rows, centres has {k}")
        if k and not np.allclose(np.linalg.norm(n, axis=1), 1.0, atol=1e-6):
            raise ValueError("Patches.normals must be unit vectors")
        vp = self.vertex_patch
        if vp is not None:
            vp = _frozen(vp, np.int64)
            if vp.ndim != 1 or (vp.size and vp.max() >= k):
                raise ValueError("Patches.vertex_patch must be (V,) indices below the patch count")
        _set(self, "centres", c)
        _set(self, "normals", n)
        _set(self, "areas", a)
        _set(self, "spread", s)
        _set(self, "hemisphere", h)
        _set(self, "vertex_patch", vp)
        _set(self, "findings", tuple(self.findings))

    def __len__(self) -> int:
        return self.centres.shape[0]


# --------------------------------------------------------------------- conductor
@dataclass(frozen=True, kw_only=True)
class VolumeConductor:
    """The head model's geometry and conductivities.

    Either concentric spheres (``kind="spheres"``: ``centre``, ``radii`` and
    ``conductivities`` inside -> out) or nested closed surfaces
    (``kind="layers"``: ``layers`` inside -> out, e.g. inner skull, outer skull,
    scalp, with the conductivity of the compartment each one bounds).

    Parameters
    ----------
    kind : {'spheres', 'layers'}
    conductivities : (k,) float64, S/m, inside -> out
    centre : (3,) float64, metres
    radii : (k,) float64, metres, increasing
    layers : tuple of Surface, inside -> out
    frame : str
    """

    kind: str
    conductivities: FloatArray
    centre: FloatArray | None = None
    radii: FloatArray | None = None
    layers: tuple[Surface, ...] = ()
    frame: str = "anatomy"

    def __post_init__(self) -> None:
        _check_frame(self.frame)
        c = _frozen(self.conductivities)
        if c.ndim != 1 or c.size == 0 or np.any(c <= 0):
            raise ValueError(f"conductivities must be positive (S/m), got {c.tolist()}")
        _set(self, "conductivities", c)
        if self.kind == "spheres":
            r = _frozen(self.radii)
            ctr = _frozen(self.centre)
            if r.shape != c.shape:
                raise ValueError(f"{c.size} conductivities but {r.size} radii")
            if ctr.shape != (3,):
                raise ValueError(f"centre must be (3,), got {ctr.shape}")
            if np.any(np.diff(r) <= 0) or r[0] <= 0:
                raise ValueError(f"radii must increase from inside out, got {r.tolist()}")
            _set(self, "radii", r)
            _set(self, "centre", ctr)
        elif self.kind == "layers":
            if len(self.layers) != c.size:
                raise ValueError(f"{c.size} conductivities but {len(self.layers)} layers")
            _set(self, "layers", tuple(self.layers))
        else:
            raise ValueError(f"VolumeConductor.kind must be 'spheres' or 'layers', got {self.kind!r}")

    def describe(self) -> dict[str, Any]:
        """JSON-ready description (without the meshes' vertices)."""
        d: dict[str, Any] = {"kind": self.kind, "conductivities_S_per_m": self.conductivities.tolist(),
                             "frame": self.frame}
        if self.kind == "spheres":
            d.update(centre_m=self.centre.tolist(), radii_m=self.radii.tolist())
        else:
            d["layers"] = [{"role": s.role, "n_vertices": len(s.vertices), "n_faces": len(s.faces)}
                           for s in self.layers]
        return d


# --------------------------------------------------------------------- lead field
@dataclass(frozen=True, kw_only=True)
class LeadField:
    """Electrode potentials per unit dipole moment.

    Parameters
    ----------
    matrix : (n_sensors, n_sources) or (n_sensors, n_sources, 3) float64, V/(A*m)
        Fixed orientation (along ``source_normals``) or free (x, y, z of ``frame``).
    sensor_labels : tuple of str, length n_sensors
    source_positions : (n_sources, 3) float64, metres, in ``frame``
    source_normals : (n_sources, 3) float64 or None
        Unit orientations for a fixed lead field; None for free orientation.
    reference : str
        ``"average"`` or the label of the reference electrode.
    frame : str
    """

    matrix: FloatArray
    sensor_labels: tuple[str, ...]
    source_positions: FloatArray
    source_normals: FloatArray | None = None
    reference: str = "average"
    frame: str = "anatomy"

    def __post_init__(self) -> None:
        _check_frame(self.frame)
        m = _frozen(self.matrix)
        labels = tuple(self.sensor_labels)
        pos = _points("LeadField.source_positions", self.source_positions)
        if m.ndim not in (2, 3) or (m.ndim == 3 and m.shape[2] != 3):
            raise ValueError(f"LeadField.matrix must be (n, m) or (n, m, 3), got {m.shape}")
        if m.shape[0] != len(labels):
            raise ValueError(f"LeadField has {m.shape[0]} rows but {len(labels)} sensor labels")
        if m.shape[1] != pos.shape[0]:
            raise ValueError(f"LeadField has {m.shape[1]} columns but {pos.shape[0]} source positions")
        nrm = self.source_normals
        if nrm is not None:
            nrm = _points("LeadField.source_normals", nrm)
            if nrm.shape != pos.shape:
                raise ValueError("LeadField.source_normals must match source_positions")
        if m.ndim == 2 and nrm is None:
            raise ValueError("a fixed-orientation LeadField needs source_normals")
        _set(self, "matrix", m)
        _set(self, "sensor_labels", labels)
        _set(self, "source_positions", pos)
        _set(self, "source_normals", nrm)

    @property
    def orientation(self) -> str:
        """``"fixed"`` or ``"free"``."""
        return "fixed" if self.matrix.ndim == 2 else "free"

    @property
    def n_sensors(self) -> int:
        return self.matrix.shape[0]

    @property
    def n_sources(self) -> int:
        return self.matrix.shape[1]

    def as_2d(self) -> FloatArray:
        """(n_sensors, n_sources) or (n_sensors, 3 * n_sources) with x, y, z per source adjacent."""
        return self.matrix if self.matrix.ndim == 2 else self.matrix.reshape(self.n_sensors, -1)


# --------------------------------------------------------------------- forward model
@dataclass(frozen=True, kw_only=True)
class ForwardModel:
    """A prepared forward model that can be evaluated at any dipole position.

    A forward-solver plugin builds it once per subject (a sphere fit or a
    boundary-element transfer matrix) and the core evaluates it at patches or
    at arbitrary positions (a dipole fit needs this).

    Parameters
    ----------
    solver : str
        Name of the forward-solver descriptor that built it (and can restore it).
    conductor : VolumeConductor
    sensor_labels : tuple of str, length n
    sensor_positions : (n, 3) float64, metres, in ``frame``
        Where the model evaluates the potential (e.g. projected onto the scalp).
    reference : str
        ``"average"`` or a sensor label.
    params : mapping
        JSON-serialisable settings needed to restore the model.
    arrays : mapping str -> ndarray
        State to persist in a bundle (e.g. a transfer matrix), SI units.
    evaluate : callable ``(positions (m,3), normals (m,3) or None) -> ndarray``
        Returns (n, m) for fixed or (n, m, 3) for free orientation, V/(A*m),
        against the model's reference.
    """

    solver: str
    conductor: VolumeConductor
    sensor_labels: tuple[str, ...]
    sensor_positions: FloatArray
    evaluate: Callable[[FloatArray, FloatArray | None], FloatArray] = field(compare=False, repr=False)
    reference: str = "average"
    params: Mapping[str, Any] = field(default_factory=dict)
    arrays: Mapping[str, np.ndarray] = field(default_factory=dict)
    frame: str = "anatomy"

    def __post_init__(self) -> None:
        _check_frame(self.frame)
        pos = _points("ForwardModel.sensor_positions", self.sensor_positions)
        labels = tuple(self.sensor_labels)
        if pos.shape[0] != len(labels):
            raise ValueError(f"{len(labels)} sensor labels but {pos.shape[0]} positions")
        _set(self, "sensor_positions", pos)
        _set(self, "sensor_labels", labels)
        _set(self, "params", dict(self.params))
        _set(self, "arrays", dict(self.arrays))

    def leadfield(self, positions: ArrayLike, normals: ArrayLike | None = None) -> LeadField:
        """Lead field at dipoles ``positions`` (m, 3) metres; fixed if ``normals`` given.

        Returns
        -------
        LeadField
            (n_sensors, m) with ``normals``, else (n_sensors, m, 3), V/(A*m).
        """
        p = _points("positions", positions)
        nrm = None if normals is None else _points("normals", normals)
        mat = self.evaluate(p, nrm)
        return LeadField(matrix=mat, sensor_labels=self.sensor_labels, source_positions=p,
                         source_normals=nrm, reference=self.reference, frame=self.frame)
