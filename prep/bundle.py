"""The forward-model bundle: a JSON manifest plus ``.npy`` arrays.

A bundle is a directory (or the same layout in one ``.zip`` file)::

    manifest.json
    arrays/<name>.npy

The manifest records the schema version, units, frames, the head->anatomy
transform, the head model, every input's sha256, the plugins used, parameters,
all findings, and each array's sha256, shape and dtype. Loading verifies every
checksum and the schema and never unpickles. Writing is atomic. The format is
specified in ``docs/bundle-format.md``.
"""
from __future__ import annotations

import io
import json
import os
import zipfile
from collections.abc import Mapping
from dataclasses import dataclass, field
from datetime import datetime, timezone
from pathlib import Path
from typing import Any

import numpy as np

from .atomic import atomic_dir, atomic_file, sha256_bytes
from .errors import BundleError, UsageError
from .model import Finding, LeadField, Patches, Sensors, Transform, VolumeConductor, _jsonable

__all__ = ["FORMAT", "SCHEMA_VERSION", "ArraySpec", "Bundle", "write_bundle", "load_bundle",
           "verify_bundle", "open_unverified"]

FORMAT = "headprep-bundle"
SCHEMA_VERSION = 1
MANIFEST = "manifest.json"
ARRAY_DIR = "arrays"
_ALLOWED_DTYPES = {"float64", "float32", "int64", "int32", "int8", "uint8", "bool"}
#: manifest keys that must be present, with their JSON types
REQUIRED: dict[str, type | tuple[type, ...]] = {
    "format": str, "schema_version": int, "kit": dict, "units": dict, "frame": str,
    "sensors": dict, "arrays": dict, "findings": list, "inputs": list, "plugins": list,
    "parameters": dict,
}
UNITS = {"length": "m", "conductivity": "S/m", "leadfield": "V/(A*m)", "area": "m^2",
         "angle": "rad", "potential": "V", "dipole_moment": "A*m"}


@dataclass(frozen=True)
class ArraySpec:
    """An array to store, with its unit and a one-line description."""

    data: np.ndarray
    unit: str = ""
    description: str = ""


@dataclass
class Bundle:
    """A loaded (and verified) bundle.

    Attributes
    ----------
    manifest : dict
        The parsed ``manifest.json``.
    arrays : dict of str -> ndarray
        Read-only arrays, SI units as the manifest says.
    path : Path or None
    """

    manifest: dict[str, Any]
    arrays: dict[str, np.ndarray]
    path: Path | None = None
    findings_on_load: list[Finding] = field(default_factory=list)

    # -------------------------------------------------------------- accessors
    @property
    def findings(self) -> list[Finding]:
        return [Finding.from_dict(d) for d in self.manifest.get("findings", [])]

    @property
    def sensor_labels(self) -> tuple[str, ...]:
        return tuple(self.manifest["sensors"]["labels"])

    def sensors(self) -> Sensors:
        """Electrodes as used by the forward model (anatomy frame, metres)."""
        s = self.manifest["sensors"]
        fids = {k: np.asarray(v, dtype=float) for k, v in s.get("fiducials", {}).items()}
        return Sensors(labels=tuple(s["labels"]), positions=self.arrays["sensor_positions"],
                       frame=self.manifest["frame"], fiducials=fids, kinds=s.get("kinds"),
                       original_labels=s.get("original_labels"))

    def leadfield(self, orientation: str = "fixed") -> LeadField:
        """The stored lead field: ``"fixed"`` (n_sensors, n_sources) or ``"free"`` (n, m, 3)."""
        name = "leadfield" if orientation == "fixed" else "leadfield_free"
        if name not in self.arrays:
            raise UsageError(f"{self.path}: this bundle has no {orientation}-orientation lead field")
        return LeadField(matrix=self.arrays[name], sensor_labels=self.sensor_labels,
                         source_positions=self.arrays["source_positions"],
                         source_normals=self.arrays["source_normals"] if orientation == "fixed" else None,
                         reference=self.manifest["forward"]["reference"], frame=self.manifest["frame"])

    def patches(self) -> Patches:
        a = self.arrays
        return Patches(centres=a["source_positions"], normals=a["source_normals"],
                       areas=a["source_areas"], spread=a["source_spread"],
                       hemisphere=a["source_hemisphere"], vertex_patch=a.get("source_vertex_patch"),
                       frame=self.manifest["frame"])

    def transform(self) -> Transform | None:
        t = self.manifest.get("transform")
        return Transform.from_dict(t) if t else None

    def conductor(self) -> VolumeConductor:
        """The head model, with layer meshes rebuilt from the stored arrays."""
        from .model import Surface  # local: keeps the import list above short

        hm = self.manifest["head_model"]
        cond = np.asarray(hm["conductivities_S_per_m"], dtype=float)
        if hm["kind"] == "spheres":
            return VolumeConductor(kind="spheres", conductivities=cond, centre=hm["centre_m"],
                                   radii=hm["radii_m"], frame=self.manifest["frame"])
        layers = tuple(Surface(vertices=self.arrays[f"layer{i}_vertices"], faces=self.arrays[f"layer{i}_faces"],
                               role=spec["role"], frame=self.manifest["frame"])
                       for i, spec in enumerate(hm["layers"]))
        return VolumeConductor(kind="layers", conductivities=cond, layers=layers, frame=self.manifest["frame"])


# ------------------------------------------------------------------ writing
def _npy_bytes(arr: np.ndarray) -> bytes:
    buf = io.BytesIO()
    np.save(buf, np.ascontiguousarray(arr), allow_pickle=False)
    return buf.getvalue()


def write_bundle(path: str | os.PathLike[str], manifest: Mapping[str, Any],
                 arrays: Mapping[str, ArraySpec | np.ndarray], *, force: bool = False) -> Path:
    """Write a bundle atomically.

    Parameters
    ----------
    path : path
        A directory to create, or a file ending in ``.zip``.
    manifest : mapping
        Every key of the manifest except ``format``, ``schema_version``,
        ``created_utc``, ``units`` and ``arrays``, which are filled in here.
    arrays : mapping name -> ArraySpec or ndarray
        Names are ``[a-z0-9_]+``; numeric dtypes only (never objects).
    force : bool
        Replace an existing bundle.

    Returns
    -------
    Path
        The final path.
    """
    final = Path(path)
    man = dict(_jsonable(dict(manifest)))
    man["format"] = FORMAT
    man["schema_version"] = SCHEMA_VERSION
    man.setdefault("created_utc", datetime.now(timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ"))
    man["units"] = {**UNITS, **man.get("units", {})}
    blobs: dict[str, bytes] = {}
    table: dict[str, Any] = {}
    for name, spec in sorted(arrays.items()):
        if not isinstance(spec, ArraySpec):
            spec = ArraySpec(np.asarray(spec))
        arr = np.asarray(spec.data)
        if not name.replace("_", "").isalnum() or name.lower() != name:
            raise ValueError(f"array name {name!r} must be lower-case letters, digits and _")
        if arr.dtype.name not in _ALLOWED_DTYPES:
            raise ValueError(f"array {name!r} has dtype {arr.dtype}, not one of {sorted(_ALLOWED_DTYPES)}")
        data = _npy_bytes(arr)
        rel = f"{ARRAY_DIR}/{name}.npy"
        blobs[rel] = data
        table[name] = {"file": rel, "sha256": sha256_bytes(data), "shape": list(arr.shape),
                       "dtype": arr.dtype.name, "unit": spec.unit, "description": spec.description}
    man["arrays"] = table
    missing = [k for k in REQUIRED if k not in man]
    if missing:
        raise ValueError(f"bundle manifest lacks {missing}")
    text = json.dumps(man, indent=2, sort_keys=False, allow_nan=False) + "\n"
    if final.suffix.lower() == ".zip":
        if final.exists() and not force:
            raise UsageError(f"{final}: already exists; use --force to replace it")
        with atomic_file(final, "wb") as fh:
            with zipfile.ZipFile(fh, "w", compression=zipfile.ZIP_STORED) as zf:
                zf.writestr(MANIFEST, text)
                for rel, data in blobs.items():
                    zf.writestr(rel, data)
        return final
    with atomic_dir(final, force=force) as tmp:
        (tmp / ARRAY_DIR).mkdir()
        for rel, data in blobs.items():
            with open(tmp / rel, "wb") as fh:
                fh.write(data)
                fh.flush()
                os.fsync(fh.fileno())
        (tmp / MANIFEST).write_text(text, encoding="utf-8")
    return final


# ------------------------------------------------------------------ reading
class _Source:
    """Uniform byte access to a bundle directory or zip."""

    def __init__(self, path: Path) -> None:
        self.path = path
        self.zip: zipfile.ZipFile | None = None
        if path.is_file():
            try:
                self.zip = zipfile.ZipFile(path)
            except zipfile.BadZipFile as exc:
                raise BundleError(f"{path}: not a bundle (neither a directory nor a zip file)") from exc
        elif not path.is_dir():
            raise BundleError(f"{path}: no such bundle")

    def read(self, rel: str) -> bytes | None:
        if self.zip is not None:
            try:
                return self.zip.read(rel)
            except KeyError:
                return None
        p = self.path / rel
        if not p.is_file() or ".." in Path(rel).parts:
            return None
        return p.read_bytes()

    def close(self) -> None:
        if self.zip is not None:
            self.zip.close()


def _schema_findings(man: Any, where: str) -> list[Finding]:
    out: list[Finding] = []

    def bad(msg: str) -> None:
        out.append(Finding(code="bundle.schema", severity="fail", message=f"{where}: {msg}",
                           subjects=(where,), source="bundle"))

    if not isinstance(man, dict):
        bad("manifest is not a JSON object")
        return out
    for key, typ in REQUIRED.items():
        if key not in man:
            bad(f"manifest lacks '{key}'")
        elif not isinstance(man[key], typ):
            bad(f"manifest '{key}' should be {getattr(typ, '__name__', typ)}, got {type(man[key]).__name__}")
    if out:
        return out
    if man["format"] != FORMAT:
        bad(f"format is {man['format']!r}, expected {FORMAT!r}")
    if man["schema_version"] > SCHEMA_VERSION:
        bad(f"schema version {man['schema_version']} is newer than this kit reads ({SCHEMA_VERSION})")
    for name, spec in man["arrays"].items():
        if not isinstance(spec, dict) or not {"file", "sha256", "shape", "dtype"} <= set(spec):
            bad(f"array entry '{name}' lacks file/sha256/shape/dtype")
        elif spec["dtype"] not in _ALLOWED_DTYPES:
            bad(f"array '{name}' has dtype {spec['dtype']!r}")
    if "labels" not in man["sensors"]:
        bad("sensors lack 'labels'")
    return out


def _load(path: str | os.PathLike[str]) -> tuple[Bundle, list[Finding]]:
    p = Path(path)
    src = _Source(p)
    try:
        raw = src.read(MANIFEST)
        if raw is None:
            raise BundleError(f"{p}: not a bundle (no {MANIFEST})")
        try:
            man = json.loads(raw.decode("utf-8"))
        except (UnicodeDecodeError, json.JSONDecodeError) as exc:
            line = getattr(exc, "lineno", None)
            where = f"{p / MANIFEST}:{line}" if line else str(p / MANIFEST)
            return Bundle(manifest={}, arrays={}, path=p), [Finding(
                code="bundle.schema", severity="fail", message=f"{where}: manifest is not valid JSON ({exc})",
                subjects=(str(p),), source="bundle")]
        findings = _schema_findings(man, str(p / MANIFEST))
        arrays: dict[str, np.ndarray] = {}
        if findings:
            return Bundle(manifest=man if isinstance(man, dict) else {}, arrays={}, path=p), findings
        for name, spec in man["arrays"].items():
            data = src.read(spec["file"])
            if data is None:
                findings.append(Finding(code="bundle.checksum", severity="fail",
                                        message=f"{p}: array '{name}' is missing ({spec['file']})",
                                        subjects=(name,), source="bundle"))
                continue
            digest = sha256_bytes(data)
            if digest != spec["sha256"]:
                findings.append(Finding(code="bundle.checksum", severity="fail",
                                        message=f"{p}: array '{name}' does not match its checksum "
                                                f"({spec['file']} was changed or damaged)",
                                        subjects=(name,), values={"expected": spec["sha256"], "found": digest},
                                        source="bundle"))
                continue
            try:
                arr = np.load(io.BytesIO(data), allow_pickle=False)
            except ValueError as exc:
                findings.append(Finding(code="bundle.schema", severity="fail",
                                        message=f"{p}: array '{name}' cannot be read without unpickling ({exc})",
                                        subjects=(name,), source="bundle"))
                continue
            if list(arr.shape) != list(spec["shape"]) or arr.dtype.name != spec["dtype"]:
                findings.append(Finding(code="bundle.schema", severity="fail",
                                        message=f"{p}: array '{name}' is {arr.dtype.name}{list(arr.shape)}, "
                                                f"manifest says {spec['dtype']}{spec['shape']}",
                                        subjects=(name,), source="bundle"))
                continue
            arr.setflags(write=False)
            arrays[name] = arr
        return Bundle(manifest=man, arrays=arrays, path=p, findings_on_load=findings), findings
    finally:
        src.close()


def verify_bundle(path: str | os.PathLike[str]) -> list[Finding]:
    """Check a bundle's schema and every array's checksum, shape and dtype.

    Returns
    -------
    list of Finding
        Empty when the bundle is intact; ``bundle.checksum`` / ``bundle.schema`` otherwise.

    Raises
    ------
    BundleError
        When ``path`` is not a bundle at all (missing, no manifest).
    """
    return _load(path)[1]


def open_unverified(path: str | os.PathLike[str]) -> tuple[Bundle, list[Finding]]:
    """Load what can be loaded and return it with the verification findings."""
    return _load(path)


def load_bundle(path: str | os.PathLike[str]) -> Bundle:
    """Load a bundle, verifying checksums and schema.

    Raises
    ------
    BundleError
        If the bundle is missing, unreadable or fails verification (the message
        lists the first problems; ``headprep verify`` lists all).
    """
    bundle, findings = _load(path)
    if findings:
        first = "; ".join(f.message for f in findings[:3])
        raise BundleError(f"{path}: bundle failed verification ({len(findings)} problem(s)): {first}")
    return bundle
