"""Cohort throughput on the sphere path: subjects per minute, serial vs 2 worker processes.

Usage: python benchmarks/bench_cohort.py [--subjects 6] [--count 1000]

Each subject is a copy of the demo subject (sphere head model, `--count` patches,
no HTML report). Prints subjects per minute for a serial run and for 2 local worker
processes, the speed-up, and a BLAS floor (a matrix product) timed in the same run
so that figures from busy machines can be compared. Not a test: nothing is asserted.
"""
from __future__ import annotations

import argparse
import shutil
import tempfile
import time
import tomllib
from pathlib import Path

import numpy as np


def blas_floor() -> float:
    a = np.random.default_rng(0).normal(size=(1500, 1500))
    t = time.perf_counter()
    a @ a
    return time.perf_counter() - t


def make_cohort(root: Path, n: int, count: int) -> Path:
    from prep_demo import recipe_path

    demo = recipe_path().parent
    recipe = tomllib.loads(recipe_path().read_text())
    data = root / "data"
    shutil.copytree(demo, data, ignore=shutil.ignore_patterns("out", "__pycache__", "*.py"))
    lines = ['[cohort]\nname = "bench"', f"[shared.patches]\ncount = {count}"]
    for i in range(n):
        lines.append(f'[[subjects]]\nid = "sub-{i:02d}"\n[subjects.inputs]')
        for key, val in recipe["inputs"].items():
            if isinstance(val, list):
                val = [f"data/{v}" for v in val]
            elif isinstance(val, str) and (data / val).is_file():
                val = f"data/{val}"
            lines.append(f"{key} = {val!r}".replace("'", '"'))
    (root / "cohort.toml").write_text("\n".join(lines) + "\n")
    return root / "cohort.toml"


def main() -> None:
    from prep.cohort import load_cohort, run_cohort

    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--subjects", type=int, default=6)
    ap.add_argument("--count", type=int, default=1000)
    args = ap.parse_args()
    floor = blas_floor()
    with tempfile.TemporaryDirectory() as tmp:
        path = make_cohort(Path(tmp), args.subjects, args.count)
        rates = {}
        for workers in (1, 2):
            cohort = load_cohort(path, work=f"{tmp}/work{workers}", out=f"{tmp}/out{workers}")
            t = time.perf_counter()
            results = run_cohort(cohort, workers=workers, report=False)
            dt = time.perf_counter() - t
            ok = sum(r["status"] == "done" for r in results)
            rates[workers] = ok / dt * 60
            print(f"workers={workers}: {ok}/{len(results)} subjects in {dt:.1f} s = {rates[workers]:.1f} subjects/min")
    print(f"speed-up with 2 workers: {rates[2] / rates[1]:.2f}x")
    print(f"BLAS floor (1500^3 matmul): {floor * 1e3:.0f} ms; seconds per subject serial / floor: "
          f"{60 / rates[1] / floor:.0f}x")


if __name__ == "__main__":
    main()
