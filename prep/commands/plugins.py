"""``headprep plugins``: what is installed, what each plugin provides, what is unavailable."""
from __future__ import annotations

import argparse

HELP = "list installed plugins, what they provide and what is unavailable"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--json", action="store_true", help="print one JSON document on stdout")
    parser.add_argument("--requirements", action="store_true",
                        help="print third-party plugin distributions as pip requirement lines")


def _human(rows: list[dict]) -> str:
    lines = []
    for r in rows:
        where = f"{r['distribution']}=={r['version']}" if r["version"] else r["distribution"]
        tag = "built-in" if r["builtin"] else "third-party"
        lines.append(f"{r['name']}  [{tag}, {where}]")
        for p in r["provides"]:
            suf = f" ({', '.join(p['suffixes'])})" if p.get("suffixes") else ""
            lines.append(f"    {p['kind'].replace('_', ' ')}: {p['name']}{suf} - {p['description']}")
        for u in r["unavailable"]:
            lines.append(f"    UNAVAILABLE {u['kind'].replace('_', ' ')}: {u['name']} "
                         f"(missing: {', '.join(u['missing'])})")
    return "\n".join(lines)


def run(args: argparse.Namespace, ctx) -> int:  # noqa: ANN001
    rows = ctx.registry.describe_plugins()
    if args.requirements:
        reqs = sorted({f"{r['distribution']}=={r['version']}" for r in rows
                       if not r["builtin"] and r["version"]})
        print("\n".join(reqs))
        return 0
    ctx.emit({"plugins": rows}, lambda: _human(rows))
    return 0
