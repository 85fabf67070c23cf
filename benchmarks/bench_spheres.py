"""Benchmark: concentric-spheres lead field, 256 electrodes x 20,000 sources x 3 orientations.

Prints wall and CPU time, peak traced memory (tracemalloc: numpy allocations
are traced) and the peak resident set size, and the ratio to a BLAS floor
measured in the same run: the time of a 2042^3 matrix product (17 GFLOP, the
flop count of the two matrix products of the first, grid-and-interpolation
version at this size, kept fixed so that ratios compare across versions and
machine loads). Target (issue 2): under 2 s on 2 cores.

Sources fill a cortex-like shell between 60 % and 98 % of the innermost radius
(uniform in volume), the range where the series needs the most terms.

Run: ``python benchmarks/bench_spheres.py [--sensors 256] [--sources 20000] [--workers 0]
[--backend auto|numba|numpy]``
"""
from __future__ import annotations

import argparse
import resource
import time
import tracemalloc

import numpy as np

from prep import make_registry
from prep.forward import build_forward, sphere_conductor


def _sensors(n: int, rng: np.random.Generator) -> np.ndarray:
    u = rng.normal(size=(n, 3))
    u[:, 2] = np.abs(u[:, 2])                      # an upper-hemisphere cap, like an EEG montage
    return 0.095 * u / np.linalg.norm(u, axis=1)[:, None]


def _sources(m: int, inner: float, rng: np.random.Generator) -> np.ndarray:
    u = rng.normal(size=(m, 3))
    u /= np.linalg.norm(u, axis=1)[:, None]
    r = inner * rng.uniform(0.6**3, 0.98**3, m) ** (1 / 3)
    return u * r[:, None]


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sensors", type=int, default=256)
    ap.add_argument("--sources", type=int, default=20000)
    ap.add_argument("--workers", type=int, default=0)
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--backend", default="auto", choices=("auto", "numba", "numpy"))
    args = ap.parse_args()
    rng = np.random.default_rng(0)
    sens = _sensors(args.sensors, rng)
    reg = make_registry()
    cond = sphere_conductor(sens)
    fm = build_forward(reg, cond, [f"E{i}" for i in range(len(sens))], sens, options={"workers": args.workers, "backend": args.backend})
    src = cond.centre + _sources(args.sources, float(cond.radii[0]), rng)

    fm.evaluate(src[:256], None)                   # warm-up (imports, thread pool)
    walls, cpus = [], []
    for _ in range(args.repeat):
        t0, c0 = time.perf_counter(), time.process_time()
        lf = fm.evaluate(src, None)
        walls.append(time.perf_counter() - t0)
        cpus.append(time.process_time() - c0)
    tracemalloc.start()
    fm.evaluate(src, None)
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    rss_mb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024

    # BLAS floor: a fixed square matmul (see the module docstring), scaled with the problem size
    side = max(64, int(round(2042 * (args.sources * args.sensors / (20000 * 256)) ** (1 / 3))))
    flops = 2 * side**3
    a = rng.random((side, side))
    a @ a
    blas = min(_timed(lambda: a @ a) for _ in range(3))

    best = min(walls)
    print(f"sphere lead field {lf.shape} (sensors x sources x 3), {len(cond.radii)} shells, "
          f"tolerance {fm.params['tolerance']:g}, backend {args.backend}")
    print(f"  wall time     best {best:.3f} s, median {np.median(walls):.3f} s over {args.repeat} runs "
          f"(target < 2 s on 2 cores)")
    print(f"  cpu time      best {min(cpus):.3f} s (all threads)")
    print(f"  peak memory   {peak / 2**20:.1f} MiB traced (output itself {lf.nbytes / 2**20:.1f} MiB); "
          f"max RSS {rss_mb:.0f} MiB")
    print(f"  BLAS floor    {side}^3 matmul ({flops / 1e9:.2f} GFLOP): {blas:.3f} s")
    print(f"  ratio         {best / blas:.1f} x the BLAS floor")


def _timed(fn) -> float:  # noqa: ANN001
    t0 = time.perf_counter()
    fn()
    return time.perf_counter() - t0


if __name__ == "__main__":
    main()
