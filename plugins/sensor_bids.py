"""Built-in plugin ``sensor_bids``: BIDS ``*_electrodes.tsv`` with its ``*_coordsystem.json``.

Reader ``bids``: the TSV has a header with ``name``, ``x``, ``y``, ``z`` (BIDS
puts them first, we accept any order) and optional ``type``, ``material``,
``impedance``...; ``n/a`` marks a missing value. The sidecar with the same prefix
(``sub-01_space-X_electrodes.tsv`` -> ``sub-01_space-X_coordsystem.json``) gives
``EEGCoordinateUnits``, ``EEGCoordinateSystem``, ``EEGCoordinateSystemDescription``
and the landmarks (``AnatomicalLandmarkCoordinates`` with
``AnatomicalLandmarkCoordinateSystem`` / ``AnatomicalLandmarkCoordinateUnits``).

Writer ``bids``: the canonical form we write (metres, 17 significant digits,
see docs/electrode-files.md).
"""
from __future__ import annotations

import json
import math
from pathlib import Path
from typing import Any

import numpy as np

from prep import ReadError, SensorReader, Sensors, SensorWriter, hookimpl
from prep.atomic import write_text_atomic
from prep.electrodes import Point, assemble, parse_number, parse_unit, text_lines
from prep.labels import KIND_WORDS, fiducial_name, normalise_label
from prep.units import unit_scale

SUFFIX = "_electrodes.tsv"
SIDECAR = "_coordsystem.json"
_LANDMARK_KEYS = (("AnatomicalLandmarkCoordinates", "AnatomicalLandmarkCoordinateSystem",
                   "AnatomicalLandmarkCoordinateUnits"),
                  ("FiducialsCoordinates", "FiducialsCoordinateSystem", "FiducialsCoordinateUnits"))
#: names we write for the landmarks (the BIDS examples' abbreviations).
_LANDMARK_OUT = {"nasion": "NAS", "lpa": "LPA", "rpa": "RPA", "inion": "INI"}


# ------------------------------------------------------------------ sidecar
def sidecar_path(tsv: Path) -> Path:
    """``<prefix>_electrodes.tsv`` -> ``<prefix>_coordsystem.json`` (``electrodes.tsv`` -> ``coordsystem.json``)."""
    name = tsv.name
    low = name.lower()
    stem = name[: -len("electrodes.tsv")] if low.endswith("electrodes.tsv") else tsv.stem + "_"
    stem = stem.rstrip("_")
    return tsv.with_name(f"{stem}{SIDECAR}" if stem else SIDECAR.lstrip("_"))


def _find_sidecar(tsv: Path) -> Path | None:
    exact = sidecar_path(tsv)
    if exact.is_file():
        return exact
    subject = tsv.name.split("_", 1)[0]
    near = sorted(tsv.parent.glob(f"{subject}*{SIDECAR}"))
    return near[0] if len(near) == 1 else None


def _key_line(text: str, key: str) -> int | None:
    idx = text.find(f'"{key}"')
    return text.count("\n", 0, idx) + 1 if idx >= 0 else None


def _load_sidecar(path: Path) -> tuple[dict[str, Any], str]:
    if path.stat().st_size > 2**20:
        raise ReadError(path, None, "coordinate-system JSON larger than 1 MiB")
    try:
        text = path.read_text(encoding="utf-8")
        meta = json.loads(text)
    except UnicodeDecodeError:
        raise ReadError(path, None, "not UTF-8 text") from None
    except json.JSONDecodeError as exc:
        raise ReadError(path, exc.lineno, f"not valid JSON: {exc.msg}") from None
    if not isinstance(meta, dict):
        raise ReadError(path, 1, "the coordinate-system JSON must be an object")
    return meta, text


def _landmarks(meta: dict[str, Any], text: str, path: Path, eeg_unit: str | None,
               eeg_system: Any) -> tuple[dict[str, list[float]], dict[str, Any]]:
    """Fiducials from the sidecar, in the electrodes' unit; and notes for provenance."""
    notes: dict[str, Any] = {}
    for coords_key, system_key, units_key in _LANDMARK_KEYS:
        coords = meta.get(coords_key)
        if coords is None:
            continue
        if not isinstance(coords, dict):
            raise ReadError(path, _key_line(text, coords_key), f"{coords_key} must be an object of name: [x, y, z]")
        system = meta.get(system_key)
        if system not in (None, eeg_system):
            notes[f"{coords_key}_ignored"] = f"{system_key} {system!r} differs from EEGCoordinateSystem {eeg_system!r}"
            continue
        lm_unit = meta.get(units_key)
        lm_unit = parse_unit(lm_unit, path, _key_line(text, units_key)) if isinstance(lm_unit, str) else None
        factor = 1.0
        if lm_unit and eeg_unit and lm_unit != eeg_unit:
            factor = unit_scale(lm_unit) / unit_scale(eeg_unit)
        out: dict[str, list[float]] = {}
        for name, value in coords.items():
            line = _key_line(text, str(name))
            ok = isinstance(value, list) and len(value) == 3 and all(
                isinstance(v, (int, float)) and not isinstance(v, bool) for v in value)
            if not ok:
                raise ReadError(path, line, f"{coords_key}[{name!r}] must be a list of 3 numbers, got {value!r}")
            fid = fiducial_name(str(name))
            if fid is not None and fid not in out:
                out[fid] = [float(v) * factor for v in value]
        if out:
            notes["landmarks_from"] = coords_key
            return out, notes
    return {}, notes


# ------------------------------------------------------------------ reader
def read_bids(path: str | Path, units: str | None = None) -> Sensors:
    """Read a BIDS electrodes file and its coordinate-system sidecar.

    Parameters
    ----------
    path : path to ``*_electrodes.tsv``
    units : str, optional
        Overrides ``EEGCoordinateUnits``.

    Returns
    -------
    Sensors
        Positions (n, 3) float64 in metres, frame ``device``; fiducials from
        ``AnatomicalLandmarkCoordinates`` or from rows named like a fiducial.
    """
    p = Path(path)
    option = parse_unit(units, p, None) if units is not None else None
    side = _find_sidecar(p)
    meta, text = _load_sidecar(side) if side is not None else ({}, "")
    raw_unit = meta.get("EEGCoordinateUnits")
    if raw_unit is not None and not isinstance(raw_unit, str):
        raise ReadError(side, _key_line(text, "EEGCoordinateUnits"),
                        f"EEGCoordinateUnits must be a string (m, mm, cm or n/a), got {raw_unit!r}")
    declared = parse_unit(raw_unit, side, _key_line(text, "EEGCoordinateUnits")) if raw_unit else None
    system = meta.get("EEGCoordinateSystem")
    landmarks, notes = _landmarks(meta, text, side, declared, system) if meta else ({}, {})
    cols: dict[str, int] | None = None
    ncols = 0
    points: list[Point] = []
    for number, line in text_lines(p):
        if not line.strip():
            continue
        cells = [c.strip() for c in line.split("\t")]
        if cols is None:
            names = [c.lower() for c in cells]
            missing = [c for c in ("name", "x", "y", "z") if c not in names]
            if missing:
                raise ReadError(p, number, f"BIDS electrodes header must have name, x, y, z columns "
                                           f"(tab-separated); missing {', '.join(missing)}")
            cols = {c: names.index(c) for c in ("name", "x", "y", "z")}
            if "type" in names:
                cols["type"] = names.index("type")
            ncols = len(cells)
            continue
        if len(cells) != ncols:
            raise ReadError(p, number, f"expected {ncols} tab-separated columns, found {len(cells)}")
        label = cells[cols["name"]]
        if not label or label.lower() == "n/a":
            raise ReadError(p, number, "empty electrode name")
        xyz = tuple(parse_number(cells[cols[a]], p, number, f"{a} value of {label!r}") for a in "xyz")
        kind = cells[cols["type"]] if "type" in cols else None
        kind = kind if kind and kind.lower() in KIND_WORDS else None  # BIDS 'type' is often 'cup', 'ring'...
        points.append(Point(label=label, xyz=xyz, line=number, kind=kind))
    if cols is None:
        raise ReadError(p, None, "empty file: no header and no data rows")
    if not points:
        raise ReadError(p, None, "no data rows after the header")
    extra = {"coordsystem": side.name if side else None, "EEGCoordinateSystem": system,
             "EEGCoordinateSystemDescription": meta.get("EEGCoordinateSystemDescription"), **notes}
    return assemble(p, points, reader="bids", unit=option or declared,
                    unit_source="option" if option else ("declared" if declared else None),
                    landmarks=landmarks, extra=extra)


# ------------------------------------------------------------------ writer
def _fmt(v: float) -> str:
    return "n/a" if not math.isfinite(v) else repr(float(v))


def _type_out(label: str, kind: str) -> str:
    """The ``type`` cell: our kind, ``n/a`` for a scalp electrode whose label says so by itself."""
    if kind == "eeg":
        return "n/a" if normalise_label(label).kind == "eeg" else "eeg"  # e.g. an electrode at Nz
    return kind


def write_bids(sensors: Sensors, path: str | Path) -> list[Path]:
    """Write ``sensors`` as BIDS electrodes.tsv + coordsystem.json (metres, exact floats).

    Columns ``name x y z`` and, when any row is not a scalp electrode, ``type``
    holding our kind (``eog``, ``ref``, ``headshape``...). Head-shape points are
    rows ``HSP0001``... of type ``headshape``. Fiducials go to
    ``AnatomicalLandmarkCoordinates`` (``NAS``, ``LPA``, ``RPA``, ``INI``).

    Returns
    -------
    list of Path
        The TSV and the JSON written.
    """
    p = Path(path)
    rows = [(lab, pos, _type_out(lab, kind)) for lab, pos, kind in
            zip(sensors.labels, sensors.positions, sensors.kinds)]
    rows += [(f"HSP{i + 1:04d}", pos, "headshape") for i, pos in enumerate(sensors.headshape)]
    typed = any(kind != "n/a" for _, _, kind in rows)
    lines = ["name\tx\ty\tz" + ("\ttype" if typed else "")]
    for lab, pos, kind in rows:
        cells = [lab, *(_fmt(v) for v in np.asarray(pos, dtype=float))]
        if typed:
            cells.append(kind)
        lines.append("\t".join(cells))
    meta: dict[str, Any] = {
        "EEGCoordinateSystem": "Other",
        "EEGCoordinateUnits": "m",
        "EEGCoordinateSystemDescription": f"headprep frame '{sensors.frame}'"
        + (": RAS, origin midway between the preauricular points, +x through the right one, "
           "+y toward the nasion" if sensors.frame == "head" else
           ": the frame of the subject's MRI-derived meshes" if sensors.frame == "anatomy" else
           ": as digitized"),
    }
    if sensors.fiducials:
        meta["AnatomicalLandmarkCoordinates"] = {
            _LANDMARK_OUT.get(k, k): [float(v) for v in pos] for k, pos in sensors.fiducials.items()}
        meta["AnatomicalLandmarkCoordinateSystem"] = "Other"
        meta["AnatomicalLandmarkCoordinateUnits"] = "m"
        meta["AnatomicalLandmarkCoordinateSystemDescription"] = meta["EEGCoordinateSystemDescription"]
    side = sidecar_path(p)
    write_text_atomic(p, "\n".join(lines) + "\n")
    write_text_atomic(side, json.dumps(meta, indent=2) + "\n")
    return [p, side]


@hookimpl
def headprep_register_sensor_readers() -> list[SensorReader]:
    # a bare "electrodes.tsv" (what `headprep template --out electrodes.tsv` writes) is ours too
    return [SensorReader(name="bids", suffixes=(SUFFIX, SUFFIX.lstrip("_")), read=read_bids,
                         description="BIDS electrodes.tsv with its coordsystem.json", defaults={"units": ""})]


@hookimpl
def headprep_register_sensor_writers() -> list[SensorWriter]:
    return [SensorWriter(name="bids", suffixes=(SUFFIX, SUFFIX.lstrip("_")), write=write_bids,
                         description="canonical BIDS electrodes.tsv + coordsystem.json, metres")]
