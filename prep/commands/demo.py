"""``headprep demo``: prepare the invented demo subject end to end and verify its bundle."""
from __future__ import annotations

import argparse

from ..errors import UsageError

HELP = "prepare the invented demo subject end to end and verify its bundle"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--json", action="store_true", help="print one JSON document on stdout")


def run(args: argparse.Namespace, ctx) -> int:  # noqa: ANN001
    raise UsageError("'demo' is not available in this version of the kit yet")
