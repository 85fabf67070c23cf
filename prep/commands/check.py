"""``headprep check``: measure a lead field's conditioning (the passport)."""
from __future__ import annotations

import argparse

from ..errors import UsageError

HELP = "measure a lead field's conditioning (the passport)"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--json", action="store_true", help="print one JSON document on stdout")


def run(args: argparse.Namespace, ctx) -> int:  # noqa: ANN001
    raise UsageError("'check' is not available in this version of the kit yet")
