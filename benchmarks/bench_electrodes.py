"""Speed of electrode reading and template placement, with a BLAS floor measured in the same run.

Run: ``python benchmarks/bench_electrodes.py``. Prints seconds and the ratio to
a 1000 x 1000 float64 matmul (the floor), so figures compare across machines.
"""
from __future__ import annotations

import tempfile
import time
from pathlib import Path

import numpy as np
import trimesh

from prep import Surface, make_registry
from prep.readers import read_sensors


def _best(fn, repeat: int = 3) -> float:
    times = []
    for _ in range(repeat):
        t = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t)
    return min(times)


def main() -> None:
    rng = np.random.default_rng(0)
    a = rng.standard_normal((1000, 1000))
    floor = _best(lambda: a @ a)
    print(f"floor: 1000x1000 matmul {floor * 1e3:.1f} ms")
    reg = make_registry()
    with tempfile.TemporaryDirectory() as tmp:
        for n in (128, 20_000, 200_000):
            p = Path(tmp) / f"pts{n}.csv"
            pts = rng.standard_normal((n, 3)) * 60
            lines = ["# units: mm", "label,x,y,z,kind", "NAS,0,95,0,fiducial", "LPA,-75,0,0,fiducial",
                     "RPA,75,0,0,fiducial"]
            lines += [f"E{i},{x:.3f},{y:.3f},{z:.3f},{'eeg' if i < 128 else 'headshape'}"
                      for i, (x, y, z) in enumerate(pts)]
            p.write_text("\n".join(lines) + "\n")
            t = _best(lambda p=p: read_sensors(reg, p), repeat=2)
            print(f"read table, {n:>7} rows: {t:8.3f} s  ({t / floor:7.1f} x floor, "
                  f"{n / t:,.0f} rows/s, {p.stat().st_size / 2**20:.1f} MiB)")
    (tpl,) = [d for d in reg.descriptors("montage_template") if "10-5" in d.systems]
    for sub in (4, 5, 6):
        mesh = trimesh.creation.icosphere(subdivisions=sub, radius=0.09)
        scalp = Surface(vertices=mesh.vertices, faces=mesh.faces, role="scalp")
        fids = {"nasion": [0, 0.09, 0], "lpa": [-0.09, 0, 0], "rpa": [0.09, 0, 0]}
        for system in ("10-10", "10-5"):
            t = _best(lambda: tpl.place(scalp, fids, system=system), repeat=2)
            print(f"place {system:5} on {len(mesh.faces):>6} faces: {t:6.3f} s  ({t / floor:6.1f} x floor)")


if __name__ == "__main__":
    main()
