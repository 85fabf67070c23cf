"""Benchmark: co-registration and placement QC of 128 electrodes + 300 head-shape points on a 20k-face scalp.

Prints wall-clock figures (median of repeats, warm caches) and their ratio to a
BLAS floor measured in the same run (a 1000 x 1000 float64 matmul). Target
(issue 4): align + all placement checks under 1 s on 2 cores.

Run: ``python benchmarks/bench_align.py``
"""
from __future__ import annotations

import statistics
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests"))

from aligners.synthetic_heads import layout, subject  # noqa: E402  (test data generator)
from checks.test_placement_qc import FakeTemplate  # noqa: E402

from prep import make_registry  # noqa: E402
from prep.geometry.surface import SurfaceQuery, surface_query  # noqa: E402
from prep.placement import place_sensors  # noqa: E402
from prep_plugins import align_fiducial, align_surface, check_placement  # noqa: E402


def timed(fn, repeat: int = 5) -> float:  # noqa: ANN001
    times = []
    for _ in range(repeat):
        t = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t)
    return statistics.median(times)


def main() -> None:
    labels, _ = layout(step_deg=11.0, max_polar_deg=100.0)
    s = subject("bumpy", 0, step_deg=11.0)
    keep = min(128, len(labels))
    sensors = s.sensors.select(np.arange(len(s.sensors)) < keep)
    print(f"electrodes {len(sensors)}, head-shape points {len(sensors.headshape)}, "
          f"scalp faces {len(s.scalp.faces)}")
    a = np.random.default_rng(0).normal(size=(1000, 1000))
    floor = timed(lambda: a @ a)
    print(f"BLAS floor (1000x1000 matmul)           {floor * 1e3:8.1f} ms")

    t = time.perf_counter()
    SurfaceQuery(s.scalp.vertices, s.scalp.faces)
    print(f"surface query build (cold, per mesh)    {(time.perf_counter() - t) * 1e3:8.1f} ms")
    q = surface_query(s.scalp.vertices, s.scalp.faces)
    pts = np.vstack([sensors.positions, sensors.headshape]) @ s.truth[:3, :3].T + s.truth[:3, 3]
    exact = timed(lambda: q.query(pts), repeat=20)
    approx = timed(lambda: q.query(pts, exact=False), repeat=20)
    print(f"closest points, {len(pts)} pts exact          {exact * 1e3:8.1f} ms")
    print(f"closest points, {len(pts)} pts near-only      {approx * 1e3:8.1f} ms")
    try:
        import trimesh

        mesh = trimesh.Trimesh(s.scalp.vertices, s.scalp.faces, process=False)
        pq = trimesh.proximity.ProximityQuery(mesh)
        pq.on_surface(pts)
        ref = timed(lambda: pq.on_surface(pts), repeat=3)
        print(f"  trimesh ProximityQuery (reference)     {ref * 1e3:8.1f} ms")
    except ImportError:
        pass

    reg = make_registry(entry_points=False, plugins=[align_fiducial, align_surface, check_placement, FakeTemplate()])
    for method in ("surface", "fiducial"):
        place_sensors(reg, sensors, s.scalp, s.anatomy_fiducials, method=method)  # warm
        total = timed(lambda m=method: place_sensors(reg, sensors, s.scalp, s.anatomy_fiducials, method=m))
        al = timed(lambda m=method: reg.call(reg.get("aligner", m), "align", sensors, s.scalp, s.anatomy_fiducials))
        print(f"{method:8s} align                        {al * 1e3:8.1f} ms  ({al / floor:6.1f} x floor)")
        print(f"{method:8s} align + placement checks     {total * 1e3:8.1f} ms  ({total / floor:6.1f} x floor)"
              f"  target < 1000 ms")
    full = make_registry()
    if full.descriptors("montage_template"):
        name = full.descriptors("montage_template")[0].name
        place_sensors(full, sensors, s.scalp, s.anatomy_fiducials)
        total = timed(lambda: place_sensors(full, sensors, s.scalp, s.anatomy_fiducials), repeat=3)
        print(f"surface  align + checks, installed template '{name}' {total * 1e3:8.1f} ms  "
              f"({total / floor:6.1f} x floor)  (template placement included)")
    unknown = timed(lambda: align_surface.align(sensors, s.scalp, None), repeat=3)
    print(f"surface  align, no anatomy fiducials    {unknown * 1e3:8.1f} ms  ({unknown / floor:6.1f} x floor)")


if __name__ == "__main__":
    main()
