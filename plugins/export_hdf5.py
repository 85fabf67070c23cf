"""Built-in plugin ``export_hdf5``: a bundle as a plain HDF5 file (needs h5py).

Layout (see ``docs/bundle-format.md``): every bundle array as dataset
``/arrays/<name>`` in the bundle's shape (row-major, SI units) with attributes
``unit`` and ``description``; ``/sensor_labels`` (UTF-8 strings); root
attributes ``format`` (``headprep-bundle-hdf5``), ``schema_version``,
``frame``, ``reference`` and ``manifest`` (the bundle's manifest as JSON text).
"""
from __future__ import annotations

import json
from pathlib import Path
from typing import Any

import numpy as np

from prep import Exporter, hookimpl
from prep.atomic import atomic_file
from prep.bundle import Bundle

FORMAT = "headprep-bundle-hdf5"


def export_hdf5(bundle: Bundle, path: str | Path, *, compression: bool = True, **_: Any) -> Path:
    """Write ``bundle`` to ``path`` (.h5) atomically; gzip-compress arrays when ``compression``."""
    import h5py

    man = bundle.manifest
    table = man.get("arrays", {})
    with atomic_file(path, "w+b") as fh, h5py.File(fh, "w") as f:
        f.attrs["format"] = FORMAT
        f.attrs["schema_version"] = int(man.get("schema_version", 0))
        f.attrs["frame"] = str(man.get("frame", ""))
        f.attrs["reference"] = str(man.get("forward", {}).get("reference", ""))
        f.attrs["manifest"] = json.dumps(man, sort_keys=True)
        grp = f.create_group("arrays")
        for name, arr in bundle.arrays.items():
            a = np.asarray(arr)
            ds = grp.create_dataset(name, data=a, compression="gzip" if compression and a.size > 64 else None)
            ds.attrs["unit"] = str(table.get(name, {}).get("unit", ""))
            ds.attrs["description"] = str(table.get(name, {}).get("description", ""))
        f.create_dataset("sensor_labels", data=list(bundle.sensor_labels), dtype=h5py.string_dtype("utf-8"))
    return Path(path)


@hookimpl
def headprep_register_exporters() -> list[Exporter]:
    return [Exporter(name="hdf5", format="hdf5", suffixes=(".h5", ".hdf5"), export=export_hdf5,
                     requires=("h5py",), description="plain HDF5: arrays, labels, manifest as JSON (h5py)",
                     defaults={"compression": True})]
