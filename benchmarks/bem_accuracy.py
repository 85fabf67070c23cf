"""Accuracy of the boundary-element solver against concentric spheres: the curves and table in docs.

For three mesh sizes (162, 642, 2,562 vertices per layer) and two skull ratios
(0.0042 S/m ~ 1/80, and 1/20) it prints RDM and MAG (Meijs et al. 1989) over
107 electrodes for radial and tangential dipoles at eccentricities 0.1-0.95,
and draws docs/bem-accuracy.png. The reference is the registry's "spheres"
solver when installed, else the Legendre series of the tests.

Run: python benchmarks/bem_accuracy.py [--levels 2 3 4] [--png docs/bem-accuracy.png]
"""
from __future__ import annotations

import argparse
import sys
import tempfile
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from prep.render import figure, save_figure_png  # noqa: E402
from tests.forward_solvers import test_bem as tb  # noqa: E402

ECC = (0.1, 0.3, 0.5, 0.7, 0.8, 0.9, 0.95)


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--levels", type=int, nargs="+", default=[2, 3, 4])
    ap.add_argument("--png", default="docs/bem-accuracy.png")
    args = ap.parse_args(argv)
    ratios = {"skull 0.0042 S/m (~1/80)": tb.SIGMA_80, "skull 1/20": tb.SIGMA_20}
    results = {}
    with tempfile.TemporaryDirectory() as cache:
        for lab, sig in ratios.items():
            for lev in args.levels:
                model = tb._bem(lev, sig, cache)
                n_v = 10 * 4 ** lev + 2
                err = tb.errors(model, sig, ECC)
                results[(lab, n_v)] = err
                for (ecc, orient), (r, m) in sorted(err.items()):
                    sys.stdout.write(f"{lab:26} {n_v:5d} ecc {ecc:4.2f} {orient:10} RDM {r:.4f} MAG {m:.4f}\n")
    fig = figure(figsize=(11, 4.5))
    ax_r, ax_m = fig.add_subplot(1, 2, 1), fig.add_subplot(1, 2, 2)
    styles = {"radial": "-", "tangential": "--"}
    colours = ["#3a8f4b", "#3e6fb0", "#b0413e", "#7a4fa0", "#c08a1e", "#444444"]
    for i, ((lab, n_v), err) in enumerate(results.items()):
        for orient, ls in styles.items():
            r = [err[(e, orient)][0] for e in ECC]
            m = [err[(e, orient)][1] for e in ECC]
            name = f"{n_v} v, {lab}, {orient}"
            ax_r.plot(ECC, r, ls, color=colours[i % len(colours)], marker="o", ms=3, label=name)
            ax_m.plot(ECC, m, ls, color=colours[i % len(colours)], marker="o", ms=3)
    ax_r.set_yscale("log")
    ax_r.set_xlabel("eccentricity")
    ax_r.set_ylabel("RDM")
    ax_r.axhline(0.03, color="k", lw=0.6, ls=":")
    ax_m.set_xlabel("eccentricity")
    ax_m.set_ylabel("MAG")
    ax_m.axhline(1.0, color="k", lw=0.6)
    ax_m.axhspan(0.97, 1.03, color="#dddddd", zorder=0)
    ax_m.set_ylim(0.75, 1.25)  # the coarsest mesh leaves the frame at 0.9-0.95 (see the table)
    ax_r.set_title("relative difference (Meijs et al. 1989)")
    ax_m.set_title("magnification")
    ax_r.legend(fontsize=6, loc="upper left")
    save_figure_png(fig, args.png)
    sys.stdout.write(f"wrote {args.png}\n")
    return 0


if __name__ == "__main__":
    sys.exit(main())
