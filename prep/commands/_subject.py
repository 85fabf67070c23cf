"""What ``run`` and ``demo`` share: run one recipe and print its summary."""
from __future__ import annotations

import argparse
from pathlib import Path

from ..atomic import check_writable
from ..console import Context, exit_status, format_findings
from ..recipe import Recipe

STEPS = 8  # progress ticks of prepare_subject


def add_output_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--force", action="store_true", help="replace an existing bundle")
    parser.add_argument("--no-report", action="store_true", help="do not write the HTML report")
    parser.add_argument("--json", action="store_true", help="print one JSON document on stdout")


def _mm(x: float | None) -> str:
    return "n/a" if x is None else f"{x:.1f} mm"


def human_summary(res) -> str:  # noqa: ANN001 - pipeline.RunResult
    s = res.summary
    fit = f"{s['fit_rms_mm']:.2f} mm" if s.get("fit_rms_mm") is not None else "n/a"
    cond = f"{s['condition_number']:.3g}" if s.get("condition_number") is not None else "n/a"
    counts = s["findings"]
    lines = [
        f"subject {res.subject}: verdict {res.verdict.upper()}",
        f"  electrodes modelled  {s['sensors']}",
        f"  source patches       {s['sources']}",
        f"  head model           {s['head_model']}",
        f"  fit residual (RMS)   {fit}",
        f"  condition number     {cond}",
        f"  localisation error   {_mm(s.get('localisation_error_median_mm'))} (median point-spread peak error, minimum norm)",
        f"  findings             {counts['fail']} fail, {counts['warn']} warn, {counts['info']} info",
        f"  bundle (verified)    {res.bundle}",
    ]
    if res.report:
        lines.append(f"  report               {res.report}")
    shown = [f for f in res.findings if f.severity != "info"]
    if shown:
        lines += ["", format_findings(shown)]
    lines += ["", "The lead field W has more patches than electrodes, so it has no inverse: hand the bundle to a "
              "regularised inverse solver (try `headprep selftest BUNDLE`)."]
    return "\n".join(lines)


def run_one(recipe: Recipe, args: argparse.Namespace, ctx: Context, out: Path | None) -> int:
    from ..pipeline import prepare_subject  # heavy: imported when a subject is prepared

    base = recipe.path.parent if recipe.path else Path.cwd()
    check_writable(out or recipe.output.get("bundle") or base / "out" / f"{recipe.subject}-forward")

    with ctx.progress(STEPS, f"preparing {recipe.subject}") as advance:
        res = prepare_subject(ctx.registry, recipe, out=out, force=args.force, advance=advance,
                              report=False if args.no_report else None)
    doc = {"subject": res.subject, "verdict": res.verdict, "bundle": str(res.bundle),
           "report": str(res.report) if res.report else None, "summary": res.summary,
           "findings": [f.to_dict() for f in res.findings]}
    ctx.emit(doc, lambda: human_summary(res))
    return exit_status(res.findings)
