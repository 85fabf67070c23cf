"""``headprep report BUNDLE --out report.html``: write the subject's HTML quality report."""
from __future__ import annotations

import argparse
import time

from ..bundle import load_bundle
from ..console import exit_status
from ..report import verdict_of, write_report

HELP = "write the subject's HTML quality report"
DESCRIPTION = """\
Write one self-contained HTML page that answers "can I trust this subject's
forward model?": the verdict first (pass / review / fail, with the findings
that decide it), electrodes on the scalp, cross-sections through the head
layers, the cortex's source patches, the lead-field passport and the
provenance of every input. Pictures are inline; the page opens from disk and
fetches nothing.

The bundle is verified first: a damaged bundle is refused (exit 2) and
nothing is written. The page is written atomically. Exit status as for
every command: 0 when no finding is a fail, 1 when one is (the page is
written either way), 2 for a damaged bundle or an existing FILE without --force.
"""


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("bundle", help="bundle directory or .zip")
    parser.add_argument("--out", required=True, metavar="FILE", help="the HTML page to write, e.g. report.html")
    parser.add_argument("--force", action="store_true", help="replace FILE if it exists")
    parser.add_argument("--json", action="store_true", help="print one JSON document on stdout")


def run(args: argparse.Namespace, ctx) -> int:  # noqa: ANN001
    started = time.perf_counter()
    bundle = load_bundle(args.bundle)
    path = write_report(bundle, ctx.registry, args.out, force=args.force)
    findings = bundle.findings
    verdict = verdict_of(findings)
    seconds = time.perf_counter() - started
    doc = {"bundle": str(args.bundle), "report": str(path), "verdict": verdict,
           "bytes": path.stat().st_size, "seconds": round(seconds, 2),
           "findings": [f.to_dict() for f in findings]}
    ctx.emit(doc, f"{path}: report written ({path.stat().st_size / 1e6:.1f} MB, {seconds:.1f} s); "
                  f"verdict {verdict.upper()}")
    return exit_status(findings)
