"""``headprep verify BUNDLE``: schema and every array's checksum."""
from __future__ import annotations

import argparse

from ..bundle import verify_bundle
from ..console import exit_status, format_findings

HELP = "verify a bundle's schema and checksums (exit 0 intact, 1 damaged, 2 not a bundle)"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("bundle", help="bundle directory or .zip")
    parser.add_argument("--json", action="store_true", help="print one JSON document on stdout")


def run(args: argparse.Namespace, ctx) -> int:  # noqa: ANN001
    findings = verify_bundle(args.bundle)
    status = exit_status(findings)
    doc = {"bundle": args.bundle, "intact": not findings, "findings": [f.to_dict() for f in findings]}
    ctx.emit(doc, lambda: f"{args.bundle}: intact (schema and all checksums verified)" if not findings
             else f"{args.bundle}: DAMAGED\n{format_findings(findings)}")
    return status
