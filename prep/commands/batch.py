"""``headprep batch``: prepare a cohort of subjects, locally or on a Dask cluster."""
from __future__ import annotations

import argparse

from ..errors import UsageError

HELP = "prepare a cohort of subjects, locally or on a Dask cluster"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--json", action="store_true", help="print one JSON document on stdout")


def run(args: argparse.Namespace, ctx) -> int:  # noqa: ANN001
    raise UsageError("'batch' is not available in this version of the kit yet")
