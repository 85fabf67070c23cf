"""Benchmark: the full lead-field passport on a 128 x 20,000 lead field.

Target (issue 7): under 20 s on 2 cores and under 4 GB peak memory, with the
resolution metrics of every source (the 20,000^2 resolution matrix is never
formed). Prints wall times, peak resident memory, and the ratio to a BLAS
floor measured in the same run: the matrix products that building every
column of the resolution matrix needs, in the same blocks, with nothing else.

Run: ``.venv/bin/python benchmarks/bench_passport.py [--sensors 128] [--sources 20000]``
"""
from __future__ import annotations

import argparse
import resource
import time

import numpy as np

from prep import LeadField, make_registry
from prep.geometry.linear_inverse import thin_svd
from prep.passport import run_passport


def synthetic_leadfield(n_sensors: int, n_sources: int, seed: int = 0):
    """Infinite-medium dipole potentials (sigma 0.33 S/m), electrodes on a 9 cm cap, average reference."""
    rng = np.random.default_rng(seed)
    i = np.arange(n_sensors) + 0.5
    z = 1 - 1.2 * i / n_sensors
    r = np.sqrt(1 - z * z)
    phi = np.pi * (1 + 5 ** 0.5) * i
    el = 0.09 * np.column_stack([r * np.cos(phi), r * np.sin(phi), z])
    src = rng.normal(size=(n_sources, 3))
    src *= (0.08 * rng.uniform(0.4, 1.0, n_sources) ** (1 / 3) / np.linalg.norm(src, axis=1))[:, None]
    nrm = src / np.linalg.norm(src, axis=1, keepdims=True)
    d = el[:, None, :] - src[None]
    lf = np.einsum("ijk,jk->ij", d, nrm) / (4 * np.pi * 0.33 * np.linalg.norm(d, axis=2) ** 3)
    lf -= lf.mean(axis=0)
    labels = tuple(f"E{k + 1}" for k in range(n_sensors))
    return LeadField(matrix=lf, sensor_labels=labels, source_positions=src, source_normals=nrm), el


def blas_floor(lf: np.ndarray, chunk: int = 1024) -> float:
    """Seconds for the resolution matrix's column blocks V_f[rows] @ V^T alone."""
    _u, s, vt = thin_svd(lf)
    left = np.ascontiguousarray(vt.T * 0.5)
    t0 = time.perf_counter()
    for start in range(0, vt.shape[1], chunk):
        block = left[start:start + chunk] @ vt
        del block
    return time.perf_counter() - t0


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sensors", type=int, default=128)
    ap.add_argument("--sources", type=int, default=20000)
    ap.add_argument("--per-check", action="store_true", help="also time each check alone")
    args = ap.parse_args()
    lf, el = synthetic_leadfield(args.sensors, args.sources)
    reg = make_registry()
    rss0 = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    t0 = time.perf_counter()
    passport = run_passport(reg, lf, el)
    total = time.perf_counter() - t0
    rss = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    floor = blas_floor(lf.matrix)
    a = 2000
    x = np.random.default_rng(1).random((a, a))
    t1 = time.perf_counter()
    x @ x
    gflops = 2 * a ** 3 / (time.perf_counter() - t1) / 1e9
    res = passport.metrics["leadfield-resolution"]
    print(f"lead field {args.sensors} x {args.sources}: passport {total:.2f} s "
          f"(target < 20 s), peak RSS {rss:.0f} MiB (before: {rss0:.0f} MiB; target < 4096 MiB)")
    print(f"BLAS floor (resolution-matrix column blocks only): {floor:.2f} s; ratio passport/floor "
          f"{total / floor:.2f}; matmul {a}^3 at {gflops:.1f} GFLOP/s")
    print(f"resolution metrics for {res['n_sources']} sources: peak localisation error "
          f"median {res['peak_localisation_error']['p50_mm']:.1f} mm, "
          f"dispersion median {res['spatial_dispersion']['p50_mm']:.1f} mm")
    print("findings:", ", ".join(f.code for f in passport.findings) or "none")
    if args.per_check:
        for d in reg.descriptors("check"):
            if d.target == "leadfield":
                t2 = time.perf_counter()
                d.run(leadfield=lf, sensor_positions=el, **d.defaults)
                print(f"  {d.name:<22}{time.perf_counter() - t2:8.2f} s")


if __name__ == "__main__":
    main()
