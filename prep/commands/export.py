"""``headprep export``: write a bundle into another open container (.mat, HDF5)."""
from __future__ import annotations

import argparse
import json
from pathlib import Path

from ..atomic import check_writable
from ..bundle import load_bundle
from ..console import EXIT_OK
from ..errors import UsageError

HELP = "write a bundle into another open container (.mat, HDF5)"
DESCRIPTION = """\
Write a verified bundle into another open container, for solvers in other
languages: the lead field, electrode and source positions, normals, labels and
the manifest's metadata.

  headprep export subject.bundle --to mat --out subject.mat
  headprep export subject.bundle --to mat --option version=7.3 --out subject.mat
  headprep export subject.bundle --to hdf5 --out subject.h5

The file is written atomically and never replaces an existing one without
--force. 'headprep plugins' lists the exporters and their options."""


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("bundle", help="bundle directory or .zip")
    parser.add_argument("--to", required=True, metavar="FORMAT", help="exporter name: mat, hdf5, ...")
    parser.add_argument("--out", required=True, metavar="FILE", help="file to write")
    parser.add_argument("--option", action="append", default=[], metavar="KEY=VALUE",
                        help="exporter option (repeatable), e.g. version=7.3 for mat")
    parser.add_argument("--force", action="store_true", help="replace an existing file")
    parser.add_argument("--json", action="store_true", help="print one JSON document on stdout")


def _parse_options(items: list[str], defaults: dict) -> dict:
    out = {}
    for item in items:
        key, sep, raw = item.partition("=")
        if not sep or not key:
            raise UsageError(f"--option {item!r}: expected KEY=VALUE")
        if isinstance(defaults.get(key), str):
            out[key] = raw
            continue
        try:
            out[key] = json.loads(raw)
        except json.JSONDecodeError:
            out[key] = raw
    return out


def run(args: argparse.Namespace, ctx) -> int:  # noqa: ANN001
    reg = ctx.registry
    exporter = reg.get("exporter", args.to)
    out = Path(args.out)
    if out.exists() and not args.force:
        raise UsageError(f"{out}: already exists; use --force to replace it")
    if out.is_dir():
        raise UsageError(f"{out}: is a directory")
    check_writable(out)
    opts = reg.options(exporter, _parse_options(args.option, dict(exporter.defaults)), f"--option for '{args.to}'")
    bundle = load_bundle(args.bundle)
    written = reg.call(exporter, "export", bundle, out, step=f"exporter '{exporter.name}' writing {out}", **opts)
    doc = {"bundle": args.bundle, "exporter": exporter.name, "options": opts, "out": str(written), "findings": []}
    ctx.emit(doc, f"{args.bundle}: exported with '{exporter.name}' to {written}")
    return EXIT_OK
