"""Benchmark: time to render each report section, and the whole page.

Usage: ``python benchmarks/bench_report.py [BUNDLE]``. Without a bundle it
builds the synthetic test bundle of ``tests/report/conftest.py`` in a
temporary folder. Prints seconds per section (cold: first render in the
process; warm: a second render) and the ratio to a BLAS floor measured in the
same run (a 1,000 x 1,000 float64 matmul), so that figures from machines of
different speed can be compared.
"""
from __future__ import annotations

import sys
import tempfile
import time
from pathlib import Path

import numpy as np


def _floor() -> float:
    a = np.random.default_rng(0).normal(size=(1000, 1000))
    best = float("inf")
    for _ in range(5):
        t = time.perf_counter()
        a @ a
        best = min(best, time.perf_counter() - t)
    return best


def main(argv: list[str]) -> int:
    from prep.bundle import load_bundle
    from prep.registry import make_registry
    from prep.report import Assets, build_report

    with tempfile.TemporaryDirectory() as tmp:
        if argv:
            path = Path(argv[0])
        else:
            sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests" / "report"))
            from conftest import make_synthetic_bundle

            path = make_synthetic_bundle(Path(tmp) / "bundle")
        t = time.perf_counter()
        bundle = load_bundle(path)
        load_s = time.perf_counter() - t
        registry = make_registry()
        floor = _floor()
        print(f"bundle {path.name}: load and verify {load_s:.2f} s; BLAS floor (1000^2 matmul) {floor * 1e3:.1f} ms")
        print(f"{'section':<12} {'cold s':>8} {'warm s':>8} {'warm/floor':>11}")
        for desc in sorted(registry.descriptors("report_section"), key=lambda d: (d.order, d.name)):
            times = []
            for _ in range(2):
                t = time.perf_counter()
                desc.render(bundle, Assets())
                times.append(time.perf_counter() - t)
            print(f"{desc.name:<12} {times[0]:8.2f} {times[1]:8.2f} {times[1] / floor:11.0f}")
        t = time.perf_counter()
        page = build_report(bundle, registry)
        whole = time.perf_counter() - t
        print(f"whole page (warm) {whole:.2f} s = {whole / floor:.0f} x floor; {len(page) / 1e6:.2f} MB")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
