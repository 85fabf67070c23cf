"""``headprep report``: write the subject's HTML quality report."""
from __future__ import annotations

import argparse

from ..errors import UsageError

HELP = "write the subject's HTML quality report"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--json", action="store_true", help="print one JSON document on stdout")


def run(args: argparse.Namespace, ctx) -> int:  # noqa: ANN001
    raise UsageError("'report' is not available in this version of the kit yet")
