"""Running every registered check of one target and merging their reports."""
from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from .descriptors import CheckReport
from .errors import PluginError, UsageError
from .model import Finding
from .registry import Registry

__all__ = ["run_checks", "validate_check_options"]


def validate_check_options(registry: Registry, options: Mapping[str, Any] | None, where: str) -> None:
    """Refuse option keys that no registered check accepts (UsageError naming ``where``)."""
    known = {k for d in registry.descriptors("check") for k in d.defaults}
    for key in options or {}:
        if key not in known:
            raise UsageError(f"{where}: unknown check option '{key}' (known: {', '.join(sorted(known)) or 'none'})")


def run_checks(registry: Registry, target: str, *, options: Mapping[str, Any] | None = None,
               **objects: Any) -> CheckReport:
    """Run every check whose ``target`` matches and merge the results.

    Parameters
    ----------
    registry : Registry
    target : str
        ``sensors``, ``surface``, ``layers``, ``placement``, ``patches`` or ``leadfield``.
    options : mapping, optional
        A flat namespace: each check receives the keys its ``defaults`` declare.
    **objects
        The keyword arguments of the target (see :class:`prep.descriptors.Check`).

    Returns
    -------
    CheckReport
        Findings of all checks in name order; ``metrics`` and ``arrays`` keyed
        ``<check name>`` and ``<check name>_<array>``.
    """
    findings: list[Finding] = []
    metrics: dict[str, Any] = {}
    arrays: dict[str, Any] = {}
    for check in registry.descriptors("check"):
        if check.target != target:
            continue
        opts = {k: v for k, v in (options or {}).items() if k in check.defaults}
        opts = registry.options(check, opts, f"check '{check.name}'")
        out = registry.call(check, "run", step=f"check '{check.name}'", **objects, **opts)
        if isinstance(out, CheckReport):
            findings += list(out.findings)
            if out.metrics:
                metrics[check.name] = dict(out.metrics)
            arrays.update({f"{check.name}_{k}": v for k, v in out.arrays.items()})
        elif isinstance(out, (list, tuple)) and all(isinstance(f, Finding) for f in out):
            findings += list(out)
        else:
            raise PluginError(check.plugin, registry.dist_label(check.plugin), f"check '{check.name}'",
                              TypeError(f"returned {type(out).__name__}, expected a list of Finding or CheckReport"))
    return CheckReport(findings=tuple(findings), metrics=metrics, arrays=arrays)
