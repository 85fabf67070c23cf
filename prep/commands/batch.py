"""``headprep batch``: a cohort of subjects, resumable, locally or on a Dask cluster."""
from __future__ import annotations

import argparse

HELP = "prepare a cohort of subjects (resumable), locally or on a Dask cluster"
DESCRIPTION = """Prepare every subject of a cohort with the same pipeline as `headprep run`.

COHORT is a TOML file ([cohort], [shared.<step>], [[subjects]]) or a folder of
sub-* subject folders (each with a recipe.toml, or with standard file names).
Finished steps are kept in the work folder and reused on the next run, so a
run killed half-way resumes where it stopped. A bad subject is recorded with
its finding codes or error and never stops the others.

Scale out with --workers N (local processes), --cluster local (a Dask cluster
on this machine) or --scheduler tcp://HOST:8786 (an existing Dask cluster whose
workers see the same file system). See docs/cohorts.md.

Exit 0 when every subject was prepared without a fail finding, 1 when any
subject failed a check or could not be prepared, 2 when the cohort itself
cannot be used."""


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("cohort", help="cohort TOML file or folder of sub-* folders")
    parser.add_argument("--workers", type=int, default=1, help="parallel subjects (default 1)")
    where = parser.add_mutually_exclusive_group()
    where.add_argument("--scheduler", metavar="ADDRESS", help="address of a running Dask scheduler")
    where.add_argument("--cluster", choices=["local"], help="start a Dask cluster on this machine")
    parser.add_argument("--work", help="work folder (default: from the cohort, or ./headprep-work beside it)")
    parser.add_argument("--out", help="bundle folder (default: from the cohort, or ./headprep-bundles beside it)")
    parser.add_argument("--no-report", action="store_true", help="do not write subject HTML reports")
    parser.add_argument("--json", action="store_true", help="print one JSON document on stdout")


def run(args: argparse.Namespace, ctx) -> int:  # noqa: ANN001
    from ..cohort import load_cohort, run_cohort, write_cohort_tables
    from ..errors import UsageError

    if args.workers < 1:
        raise UsageError(f"--workers must be at least 1, got {args.workers}")
    cohort = load_cohort(args.cohort, work=args.work, out=args.out)
    with ctx.progress(len(cohort.tasks), f"cohort {cohort.name}") as advance:
        results = run_cohort(cohort, workers=args.workers, scheduler=args.scheduler,
                             local_cluster=args.cluster == "local", report=not args.no_report,
                             on_done=lambda r: advance(f"{r['subject']} {r['status']}"))
    csv_path, html_path = write_cohort_tables(results, cohort.out, cohort.name)
    bad = [r for r in results if r["status"] != "done" or r.get("verdict") == "fail"]

    def human() -> str:
        lines = [f"cohort {cohort.name}: {len(results)} subjects, {len(results) - len(bad)} ready, {len(bad)} need attention"]
        for r in results:
            what = r.get("verdict") if r["status"] == "done" else r["status"]
            extra = f"  {' '.join(r['codes'])}" if r.get("codes") else ""
            err = f"  ({r['error']})" if r.get("error") else ""
            lines.append(f"  {r['subject']:<16} {str(what).upper():<9}{extra}{err}")
        lines += [f"table: {csv_path}", f"page:  {html_path}"]
        return "\n".join(lines)

    ctx.emit({"cohort": cohort.name, "work": str(cohort.work), "out": str(cohort.out), "table": str(csv_path),
              "page": str(html_path), "subjects": results}, human)
    return 1 if bad else 0
