"""``headprep align``: co-register electrodes to the scalp and check their placement."""
from __future__ import annotations

import argparse

from ..errors import UsageError

HELP = "co-register electrodes to the scalp and check their placement"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--json", action="store_true", help="print one JSON document on stdout")


def run(args: argparse.Namespace, ctx) -> int:  # noqa: ANN001
    raise UsageError("'align' is not available in this version of the kit yet")
