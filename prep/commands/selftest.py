"""``headprep selftest``: simulate and recover dipoles with reference solvers to prove a bundle works."""
from __future__ import annotations

import argparse

from ..bundle import load_bundle
from ..console import EXIT_OK
from ..selftest import DIPOLE_MOMENT, SelftestResult, run_selftest

HELP = "simulate and recover dipoles with reference solvers to prove a bundle works"
DESCRIPTION = """\
Prove that a bundle works end to end: put a single dipole on randomly chosen
source patches, compute its scalp map with the bundle's lead field W, add
sensor noise at the given SNR, and ask every installed reference solver where
the dipole is. The distance from the answer to the true patch is the
localisation error (median and 90th percentile per solver, mm).

Why W is never simply inverted: W maps the strengths of the source patches to
the potentials at the electrodes. There are many more patches (thousands) than
electrodes (tens to hundreds), so W is a wide matrix and has no inverse.
Infinitely many patterns of source strength produce exactly the same scalp
map, and noise makes even the closest fit ambiguous. A solver must therefore
choose one pattern among all those that explain the data: minimum norm picks
the weakest overall pattern, with a regularisation term (set by the SNR) that
stops it from fitting the noise; dSPM and sLORETA rescale that answer so deep
and superficial sources compete fairly; the dipole fit assumes a single source
and searches for the position that leaves the least unexplained signal.

The reference solvers are here for this test and for demos; they are not the
product. Exit 0 when the test ran, 2 when the bundle cannot be used."""


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("bundle", help="bundle directory or .zip")
    parser.add_argument("--snr", type=float, default=3.0,
                        help="amplitude signal-to-noise ratio of the simulated data (default 3)")
    parser.add_argument("--n-dipoles", type=int, default=20, help="number of simulated dipoles (default 20)")
    parser.add_argument("--seed", type=int, default=0, help="random seed (default 0)")
    parser.add_argument("--json", action="store_true", help="print one JSON document on stdout")


def _human(res: SelftestResult, bundle: str) -> str:
    lines = [f"{bundle}: {res.true_indices.size} simulated dipoles of {DIPOLE_MOMENT * 1e9:g} nA*m at SNR "
             f"{res.snr:g} (seed {res.seed}); dipole fit used {res.forward}",
             f"  {'solver':<16}{'median (mm)':>12}{'90th pct (mm)':>15}{'max (mm)':>10}"]
    for name, s in res.summary.items():
        lines.append(f"  {name:<16}{s['median_mm']:>12.1f}{s['p90_mm']:>15.1f}{s['max_mm']:>10.1f}")
    return "\n".join(lines)


def run(args: argparse.Namespace, ctx) -> int:  # noqa: ANN001
    bundle = load_bundle(args.bundle)
    n_solvers = len(ctx.registry.descriptors("inverse_solver"))
    with ctx.progress(n_solvers, "self-test") as advance:
        res = run_selftest(ctx.registry, bundle, snr=args.snr, n_dipoles=args.n_dipoles, seed=args.seed,
                           progress=advance)
    ctx.emit({"bundle": args.bundle, **res.to_dict(), "findings": []}, lambda: _human(res, args.bundle))
    return EXIT_OK
