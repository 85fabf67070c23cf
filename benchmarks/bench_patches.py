"""Benchmark: two ~150k-vertex folded hemispheres -> 2 x 4,000 patches with membership and statistics.

Target (issue 5): under 10 s on 2 cores and under 2 GB peak memory. The patch
maker runs in a fresh child process so that its peak resident memory is
measured alone; a BLAS floor (a 2,000 x 2,000 float64 matmul) is timed in the
same run so that figures from loaded or different machines can be compared.

Run: ``.venv/bin/python benchmarks/bench_patches.py``
"""
from __future__ import annotations

import multiprocessing as mp
import resource
import sys
import time
import tracemalloc

import numpy as np

N_VERTICES = 150_000
COUNT = 8_000


def folded_hemisphere(side: float, seed: int) -> tuple[np.ndarray, np.ndarray]:
    """An invented hemisphere-sized ellipsoid with gyrus-like radial folds, ~150k vertices, metres."""
    import fast_simplification
    import trimesh

    m = trimesh.creation.icosphere(subdivisions=7, radius=1.0)  # 163,842 vertices
    u = m.vertices
    rng = np.random.default_rng(seed)
    k = rng.normal(size=(12, 3)) * 6.0
    phase = rng.uniform(0, 2 * np.pi, 12)
    folds = np.sin(u @ k.T + phase).sum(axis=1) / np.sqrt(12)
    r = 1.0 + 0.06 * folds
    v = u * r[:, None] * [0.035, 0.075, 0.055] + [side * 0.04, 0.0, 0.01]
    v, f = fast_simplification.simplify(v, np.asarray(m.faces), target_count=2 * N_VERTICES - 4)
    return np.asarray(v), np.asarray(f, dtype=np.int64)


def _child(conn, meshes) -> None:  # noqa: ANN001
    from prep.model import Surface
    from prep_plugins import patch_quadric

    roles = ("cortex_left", "cortex_right")
    surfaces = [Surface(vertices=v, faces=f, role=role) for (v, f), role in zip(meshes, roles)]
    base = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    t = time.perf_counter()
    p = patch_quadric.make(surfaces, count=COUNT)
    dt = time.perf_counter() - t
    tracemalloc.start()  # second run only: tracing slows numpy down
    patch_quadric.make(surfaces, count=COUNT)
    traced = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss  # KiB on Linux
    conn.send({"seconds": dt, "traced_peak_mb": traced / 2**20, "peak_rss_mb": peak / 1024, "base_rss_mb": base / 1024, "n_patches": len(p),
               "per_hemisphere": [int((p.hemisphere == h).sum()) for h in (0, 1)],
               "assigned": float((p.vertex_patch >= 0).mean()),
               "area_rel_err": float(abs(p.areas.sum() / sum(_area(v, f) for v, f in meshes) - 1))})


def _area(v: np.ndarray, f: np.ndarray) -> float:
    return float(0.5 * np.linalg.norm(np.cross(v[f[:, 1]] - v[f[:, 0]], v[f[:, 2]] - v[f[:, 0]]), axis=1).sum())


def blas_floor() -> float:
    """Seconds for a 2,000 x 2,000 float64 matmul (multi-threaded BLAS)."""
    a = np.random.default_rng(0).normal(size=(2000, 2000))
    a @ a
    t = time.perf_counter()
    for _ in range(3):
        a @ a
    return (time.perf_counter() - t) / 3


def sort_floor() -> float:
    """Seconds to sort 10 million float64 (single-threaded, like most of the patch maker)."""
    x = np.random.default_rng(0).random(10_000_000)
    t = time.perf_counter()
    np.sort(x)
    return time.perf_counter() - t


def decimation_floor(meshes: list[tuple[np.ndarray, np.ndarray]]) -> float:
    """Seconds for the quadric decimations alone (fast-simplification, both hemispheres to ~4,000 vertices)."""
    import fast_simplification

    t = time.perf_counter()
    for v, f in meshes:
        fast_simplification.simplify(v, f, target_count=2 * COUNT // 2 - 4)
    return time.perf_counter() - t


def main() -> int:
    t = time.perf_counter()
    meshes = [folded_hemisphere(-1.0, 1), folded_hemisphere(1.0, 2)]
    print(f"setup: {[len(v) for v, _ in meshes]} vertices, {[len(f) for _, f in meshes]} faces "
          f"({time.perf_counter() - t:.1f} s, not counted)")
    floor = blas_floor()
    sfloor = sort_floor()
    dfloor = decimation_floor(meshes)
    ctx = mp.get_context("spawn")
    parent, child = ctx.Pipe()
    proc = ctx.Process(target=_child, args=(child, meshes))
    proc.start()
    res = parent.recv()
    proc.join()
    print(f"patches: {res['n_patches']} ({res['per_hemisphere']}), vertices assigned {res['assigned']:.3%}, "
          f"area relative error {res['area_rel_err']:.1e}")
    print(f"time: {res['seconds']:.2f} s (target < 10 s)")
    print(f"peak memory of the child: {res['peak_rss_mb']:.0f} MB (at start {res['base_rss_mb']:.0f} MB; "
          f"target < 2048 MB); peak of Python/numpy allocations during make: {res['traced_peak_mb']:.0f} MB")
    print(f"BLAS floor (2000^3 matmul): {floor:.3f} s; ratio time/floor = {res['seconds'] / floor:.1f}")
    print(f"sort floor (1e7 float64, one thread): {sfloor:.3f} s; ratio time/floor = {res['seconds'] / sfloor:.1f}")
    print(f"decimation alone (library, 2 hemispheres): {dfloor:.2f} s; ratio time/decimation = "
          f"{res['seconds'] / dfloor:.1f}")
    ok = res["seconds"] < 10 and res["peak_rss_mb"] < 2048
    print("within target" if ok else "OUTSIDE target")
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
