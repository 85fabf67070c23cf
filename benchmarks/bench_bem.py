"""Benchmark of the boundary-element solver: 3 x 2,562 vertices, 128 electrodes, 8,000 patches.

Prints the time of the layer solve (assembly + factorisation + transfer, each
phase shown), of the lead field, the total, its ratio to scipy.linalg.lu_factor
of a matrix of the same size timed in this run (the BLAS floor), and the
process's peak memory. On a shared machine the load changes within a run, so the
ratio to the solve's own LU (the same factorisation, timed inside the build) is
printed as well. Targets (issue): total < 60 s on 2 cores, ratio <= 3,
peak memory < 6 GB.

The double-layer kernel is compiled by numba when it is installed. The first calls
of its kernels (a compile, or a load from numba's disk cache) are made on a tiny
mesh before the clock starts and printed on their own line: a one-off cost per
machine (compile) or per process (cache load), not solve time.

Run: python benchmarks/bench_bem.py [--subdivisions 4] [--sources 8000] [--electrodes 128] [--cache]
"""
from __future__ import annotations

import argparse
import resource
import sys
import tempfile
import time
from unittest import mock

import numpy as np
import scipy.linalg as sla

from prep import Surface, VolumeConductor, make_registry
from prep.geometry.layers import icosphere
from prep_plugins import forward_bem
from prep_plugins._forward_bem_kernels import LinearDoubleLayer, _compiled, inside_closed


def _points_in_ball(n: int, radius: float, rng: np.random.Generator) -> np.ndarray:
    d = rng.normal(size=(n, 3))
    d /= np.linalg.norm(d, axis=1, keepdims=True)
    return d * radius * rng.uniform(0.2, 1.0, size=(n, 1)) ** (1 / 3)


def _warm_up() -> tuple[str, float, str]:
    """Backend name, seconds of the kernel's first call, and whether it compiled or loaded."""
    kernel = _compiled()
    if kernel is None:
        return "numpy (numba not importable: 3-4x slower assembly)", 0.0, ""
    v, f = icosphere(0)
    t0 = time.perf_counter()
    LinearDoubleLayer(v, f).weights(v * 1.1)
    inside_closed(v * 1.1, v, f)  # the compiled inside test of the lead field
    t = time.perf_counter() - t0
    stats = getattr(kernel, "stats", None)
    how = "compiled" if stats is not None and sum(stats.cache_misses.values()) else "loaded from disk cache"
    return "numba", t, how


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--subdivisions", type=int, default=4, help="icosphere level (4: 2,562 vertices)")
    ap.add_argument("--sources", type=int, default=8000)
    ap.add_argument("--electrodes", type=int, default=128)
    ap.add_argument("--cache", action="store_true",
                    help="time a first build with the disk cache on (transfer for every scalp vertex)")
    args = ap.parse_args(argv)
    rng = np.random.default_rng(7)
    v, f = icosphere(args.subdivisions)
    radii = (0.087, 0.092, 0.100)
    layers = tuple(Surface(vertices=v * r * np.array([0.95, 1.1, 1.0]), faces=f, role=role)
                   for r, role in zip(radii, ("inner_skull", "outer_skull", "scalp")))
    cond = VolumeConductor(kind="layers", conductivities=[0.33, 0.0042, 0.33], layers=layers)
    ele = _points_in_ball(args.electrodes, 1.0, rng)
    ele = ele / np.linalg.norm(ele, axis=1, keepdims=True)
    ele[:, 2] = np.abs(ele[:, 2])
    ele *= 0.1 * np.array([0.95, 1.1, 1.0])
    labels = tuple(f"E{i:03d}" for i in range(len(ele)))
    src = _points_in_ball(args.sources, 0.075, rng)
    nrm = rng.normal(size=src.shape)
    nrm /= np.linalg.norm(nrm, axis=1, keepdims=True)
    n = 3 * len(v)

    a = rng.normal(size=(n, n))
    t0 = time.perf_counter()
    sla.lu_factor(a, overwrite_a=True, check_finite=False)
    t_lu = time.perf_counter() - t0
    del a

    backend, t_jit, how = _warm_up()
    desc = make_registry().get("forward_solver", "bem")
    phases: dict[str, float] = {}
    solve = forward_bem.transfer_to_scalp

    def timed_solve(*a, **kw):  # noqa: ANN002, ANN003, ANN202 - records the solver's phases
        return solve(*a, timings=phases, **kw)

    with tempfile.TemporaryDirectory() as cache, mock.patch.object(forward_bem, "transfer_to_scalp", timed_solve):
        t0 = time.perf_counter()
        model = desc.build(cond, labels, ele, reference="average", cache=args.cache, cache_dir=cache)
        t_build = time.perf_counter() - t0
        t0 = time.perf_counter()
        lf = model.evaluate(src, nrm)
        t_lf = time.perf_counter() - t0
    total = t_build + t_lf
    peak_gb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024 ** 2
    out = sys.stdout
    out.write(f"layers: 3 x {len(v)} vertices ({n} unknowns); {len(ele)} electrodes; {len(src)} sources\n")
    out.write(f"kernel backend: {backend}; disk cache {'on (first build: every scalp vertex)' if args.cache else 'off (electrode rows only)'}\n")
    if how:
        out.write(f"numba first calls ({how}; NOT in the timed total) {t_jit:.2f} s\n")
    out.write(f"scipy lu_factor {n}x{n} (floor)      {t_lu:8.2f} s\n")
    out.write(f"layer solve (assembly+LU+transfer)  {t_build:8.2f} s\n")
    for name in ("assembly", "lu", "solves"):
        if name in phases:
            out.write(f"  {name:<34}{phases[name]:8.2f} s\n")
    out.write(f"lead field ({lf.shape[0]} x {lf.shape[1]})         {t_lf:8.2f} s\n")
    out.write(f"total                               {total:8.2f} s   (target < 60 s)\n")
    out.write(f"ratio total / lu_factor             {total / t_lu:8.2f}     (target <= 3)\n")
    if "lu" in phases:  # the same factorisation timed inside the solve: less exposed to load swings
        out.write(f"ratio total / LU inside the solve   {total / phases['lu']:8.2f}\n")
    out.write(f"peak memory (max RSS)               {peak_gb:8.2f} GB  (target < 6 GB)\n")
    out.write(f"finite: {bool(np.isfinite(lf).all())}\n")
    return 0


if __name__ == "__main__":
    sys.exit(main())
