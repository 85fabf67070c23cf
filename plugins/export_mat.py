"""Built-in plugin ``export_mat``: a bundle as a MATLAB ``.mat`` file.

Version 5 (the default) is written by ``scipy.io.savemat``; version 7.3 (HDF5
with a 512-byte MAT header, for files beyond 2 GB) needs h5py and is asked for
with the option ``version = "7.3"``. Variables: every array of the bundle under
its own name (``leadfield``, ``sensor_positions``, ``source_positions``,
``source_normals``...; same shapes as in the bundle, SI units),
``sensor_labels`` (a cell array of char in v5, a space-padded char matrix in
v7.3), ``frame``, ``reference``, ``leadfield_unit`` and ``manifest_json``
(the bundle's whole manifest as JSON text). Boolean arrays become ``uint8``
in v5 (scipy's choice) and ``logical`` in v7.3. See ``docs/bundle-format.md``.
"""
from __future__ import annotations

import json
import time
from pathlib import Path
from typing import Any

import numpy as np

from prep import Exporter, UsageError, hookimpl
from prep.atomic import atomic_file
from prep.bundle import Bundle

_MATLAB_CLASS = {"float64": "double", "float32": "single", "int64": "int64", "int32": "int32",
                 "int8": "int8", "uint8": "uint8", "bool": "logical"}


def _text_variables(bundle: Bundle) -> dict[str, str]:
    man = bundle.manifest
    return {"frame": str(man.get("frame", "")), "reference": str(man.get("forward", {}).get("reference", "")),
            "leadfield_unit": "V/(A*m)", "manifest_json": json.dumps(man, sort_keys=True)}


def _write_v5(bundle: Bundle, fh: Any) -> None:
    from scipy.io import savemat

    variables: dict[str, Any] = {k: np.asarray(v) for k, v in bundle.arrays.items()}
    variables["sensor_labels"] = np.array(list(bundle.sensor_labels), dtype=object)
    variables.update(_text_variables(bundle))
    savemat(fh, variables, format="5", do_compression=True, oned_as="column")


def _v73_header() -> bytes:
    text = (f"MATLAB 7.3 MAT-file, Platform: headprep, Created on: "
            f"{time.strftime('%a %b %d %H:%M:%S %Y', time.gmtime())} HDF5 schema 1.00 .")
    head = text.encode("ascii")[:116].ljust(116, b" ")
    return head + b"\x00" * 8 + b"\x00\x02" + b"IM"


def _char(group: Any, name: str, text: str | list[str]) -> None:
    """A MATLAB char array: uint16 code points, dimensions reversed (column-major)."""
    rows = [text] if isinstance(text, str) else list(text)
    width = max((len(r) for r in rows), default=0)
    codes = np.array([[ord(c) for c in r.ljust(width)] for r in rows], dtype=np.uint16).reshape(len(rows), width)
    ds = group.create_dataset(name, data=codes.T)
    ds.attrs["MATLAB_class"] = np.bytes_("char")
    ds.attrs["MATLAB_int_decode"] = np.int32(2)


def _write_v73(bundle: Bundle, fh: Any) -> None:
    try:
        import h5py
    except ImportError as exc:
        raise UsageError("MAT version 7.3 needs the h5py package (pip install h5py); version 5 does not") from exc
    with h5py.File(fh, "w", userblock_size=512, libver="earliest") as f:
        for name, arr in bundle.arrays.items():
            a = np.atleast_1d(np.asarray(arr))
            data = a.astype(np.uint8) if a.dtype == bool else a
            # MATLAB is column-major: reversed dimensions; a vector becomes n x 1 as in v5
            ds = f.create_dataset(name, data=data.T if data.ndim > 1 else data[None, :])
            ds.attrs["MATLAB_class"] = np.bytes_(_MATLAB_CLASS[a.dtype.name])
            if a.dtype == bool:
                ds.attrs["MATLAB_int_decode"] = np.int32(1)
        _char(f, "sensor_labels", list(bundle.sensor_labels))
        for name, text in _text_variables(bundle).items():
            _char(f, name, text)
    fh.seek(0)
    fh.write(_v73_header())


def export_mat(bundle: Bundle, path: str | Path, *, version: str = "5", **_: Any) -> Path:
    """Write ``bundle`` to ``path`` (.mat) atomically; ``version`` is ``"5"`` or ``"7.3"``."""
    if version not in ("5", "7.3"):
        raise UsageError(f"MAT version must be '5' or '7.3', got {version!r}")
    with atomic_file(path, "w+b") as fh:
        (_write_v5 if version == "5" else _write_v73)(bundle, fh)
    return Path(path)


@hookimpl
def headprep_register_exporters() -> list[Exporter]:
    return [Exporter(name="mat", format="mat", suffixes=(".mat",), export=export_mat,
                     description="MATLAB .mat (v5 via scipy.io; v7.3 HDF5-based with h5py)",
                     defaults={"version": "5"})]
