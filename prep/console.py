"""Console helpers for commands: the per-invocation context, JSON output, progress and exit statuses."""
from __future__ import annotations

import argparse
import contextlib
import json
import sys
from collections.abc import Callable, Iterable, Iterator, Sequence
from typing import Any

from .model import Finding

EXIT_OK, EXIT_FAIL, EXIT_USAGE, EXIT_INTERNAL = 0, 1, 2, 3


class Context:
    """What a command gets besides its arguments: the registry, output and progress."""

    def __init__(self, args: argparse.Namespace) -> None:
        self.args = args
        self.json = bool(getattr(args, "json", False))
        self.debug = bool(getattr(args, "debug", False))
        self._registry = None

    @property
    def registry(self):  # noqa: ANN201 - Registry, imported lazily to keep start-up fast
        if self._registry is None:
            from .registry import make_registry
            self._registry = make_registry(blocked=getattr(self.args, "block", None) or ())
        return self._registry

    # ------------------------------------------------------------- output
    def emit(self, document: dict[str, Any], human: str | Callable[[], str]) -> None:
        """Print ``document`` as JSON under ``--json``, else the human text."""
        if self.json:
            sys.stdout.write(json.dumps(document, indent=2, allow_nan=False, default=_json_default) + "\n")
        else:
            text = human() if callable(human) else human
            if text:
                sys.stdout.write(text.rstrip("\n") + "\n")

    def note(self, text: str) -> None:
        """A line of progress for people (stderr; silent under --json)."""
        if not self.json:
            sys.stderr.write(text + "\n")

    @contextlib.contextmanager
    def progress(self, total: int, description: str) -> Iterator[Callable[[str | None], None]]:
        """A progress bar on a terminal; a no-op under ``--json`` or when stderr is not a TTY.

        Yields ``advance(label=None)``.
        """
        if self.json or not sys.stderr.isatty():
            yield lambda label=None: None
            return
        from rich.progress import BarColumn, Progress, TextColumn, TimeElapsedColumn

        with Progress(TextColumn("{task.description}"), BarColumn(), TextColumn("{task.completed}/{task.total}"),
                      TimeElapsedColumn(), transient=True, console=_stderr_console()) as bar:
            task = bar.add_task(description, total=total)

            def advance(label: str | None = None) -> None:
                bar.update(task, advance=1, description=f"{description}: {label}" if label else description)

            yield advance


def _stderr_console():  # noqa: ANN202
    from rich.console import Console
    return Console(stderr=True)


def _json_default(o: Any) -> Any:
    import numpy as np
    if isinstance(o, np.ndarray):
        return o.tolist()
    if isinstance(o, np.generic):
        return o.item()
    if isinstance(o, Finding):
        return o.to_dict()
    return str(o)


def exit_status(findings: Iterable[Finding]) -> int:
    """1 if any finding is a ``fail``, else 0."""
    return EXIT_FAIL if any(f.severity == "fail" for f in findings) else EXIT_OK


def format_findings(findings: Sequence[Finding]) -> str:
    """Plain-text list of findings, worst first, severity spelled out (never colour alone)."""
    order = {"fail": 0, "warn": 1, "info": 2}
    lines = []
    for f in sorted(findings, key=lambda f: order[f.severity]):
        lines.append(f"  {f.severity.upper():4}  {f.code}: {f.message}")
    return "\n".join(lines)
