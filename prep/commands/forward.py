"""``headprep forward``: compute a lead field for given sources with a chosen head model."""
from __future__ import annotations

import argparse

from ..errors import UsageError

HELP = "compute a lead field for given sources with a chosen head model"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--json", action="store_true", help="print one JSON document on stdout")


def run(args: argparse.Namespace, ctx) -> int:  # noqa: ANN001
    raise UsageError("'forward' is not available in this version of the kit yet")
