"""Benchmark: the shared mesh kernels of prep.geometry on a 20,480-face closed head-sized surface.

Prints wall-clock figures (median of repeats, warm caches) and their ratio to a
BLAS floor measured in the same run (a 1000 x 1000 float64 matmul), for the
kernels that serve several steps since they were given one home each: vertex
normals and edge counts (meshstats), exact closest points (surface), the inside
test with distances (layers.inside_and_distance, against the winding number it
replaces on single closed pieces) and the ray caster (layers.ray_radii, against
its exhaustive double-precision fallback). The test shape is invented: a bumpy
ellipsoid about 0.19 x 0.23 x 0.17 m.

Run: ``python benchmarks/bench_geometry.py``
"""
from __future__ import annotations

import time
import timeit

import numpy as np

from prep.geometry import layers, meshstats
from prep.geometry.surface import surface_query


def main() -> None:
    unit, faces = layers.icosphere(5)
    bump = 0.08 + 0.006 * np.sin(5 * unit[:, 0]) * np.cos(3 * unit[:, 1])
    vertices = unit * bump[:, None] * np.array([1.0, 1.2, 0.9])
    rng = np.random.default_rng(0)
    points = np.concatenate([rng.normal(size=(2000, 3)) * 0.05,
                             vertices * (1 + 1e-3 * rng.normal(size=(len(vertices), 1)))])
    centre = layers.interior_centre(vertices, faces)
    rays, _ = layers.icosphere(4)

    a = rng.standard_normal((1000, 1000))
    floor = best(lambda: a @ a)
    print(f"mesh: {len(vertices)} vertices, {len(faces)} faces; {len(points)} query points, {len(rays)} rays")
    print(f"BLAS floor (1000x1000 matmul): {floor * 1e3:.1f} ms")

    rows = [
        ("vertex normals (bincount)", lambda: meshstats.vertex_normals(vertices, faces)),
        ("edge counts (1-D edge codes)", lambda: meshstats.edge_counts(faces)),
        ("closest points (warm query)", lambda: surface_query(vertices, faces).query(points)),
        ("inside + distance", lambda: layers.inside_and_distance(points, vertices, faces)),
        ("rays, nearest crossing", lambda: layers.ray_radii(rays, vertices, faces, centre)),
    ]
    for name, fn in rows:
        report(name, best(fn), floor)

    t = time.perf_counter()
    inside_wind = np.abs(layers.solid_angle_sum(points, vertices, faces)) > 2 * np.pi
    report("  winding number (fallback), once", time.perf_counter() - t, floor)
    t = time.perf_counter()
    r_exact = layers.ray_radii_exact(rays, vertices, faces, centre)
    report("  exhaustive ray test (fallback), once", time.perf_counter() - t, floor)
    inside_fast, _ = layers.inside_and_distance(points, vertices, faces)
    r_fast = layers.ray_radii(rays, vertices, faces, centre)
    print(f"inside: {int((inside_fast != inside_wind).sum())} disagreements with the winding number; "
          f"rays: max difference {np.nanmax(np.abs(r_fast - r_exact)):.2e} m")


def best(fn, repeat: int = 3) -> float:  # noqa: ANN001
    """Fastest of ``repeat`` warm calls, seconds (the standard library's timeit)."""
    fn()
    return min(timeit.repeat(fn, number=1, repeat=repeat))


def report(name: str, seconds: float, floor: float) -> None:
    print(f"{name:38s} {seconds * 1e3:9.1f} ms   {seconds / floor:7.1f} x floor")

if __name__ == "__main__":
    main()
