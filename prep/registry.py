"""The plugin registry: one factory, no module-level instance.

Built-in plugins are declared in headprep's own ``[project.entry-points.headprep]``
and load exactly like third-party ones. The registry collects descriptors from
the ``headprep_register_*`` hooks, tags each with its plugin, sorts by name and
owns dispatch, so a crashing plugin is always named (with its distribution and
version) instead of surfacing as a bare traceback.
"""
from __future__ import annotations

import importlib.metadata
import importlib.util
import inspect
import os
import sys
from collections.abc import Callable, Iterable, Mapping
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any

import pluggy

from . import hookspecs
from .descriptors import (Aligner, Check, Descriptor, Exporter, ForwardSolver, InverseSolver,
                          MontageTemplate, PatchMaker, ReportSection, SensorReader, SensorWriter,
                          SurfaceReader)
from .errors import HeadprepError, PluginError, UsageError

__all__ = ["KINDS", "KindSpec", "Registry", "make_registry"]


@dataclass(frozen=True)
class KindSpec:
    """One plugin kind: its hook, its descriptor class and a human name."""

    hook: str
    cls: type[Descriptor]
    label: str


#: every plugin kind, keyed by the short name used in code and in ``plugins --json``.
KINDS: dict[str, KindSpec] = {
    "sensor_reader": KindSpec("headprep_register_sensor_readers", SensorReader, "sensor reader"),
    "sensor_writer": KindSpec("headprep_register_sensor_writers", SensorWriter, "sensor writer"),
    "montage_template": KindSpec("headprep_register_montage_templates", MontageTemplate, "montage template"),
    "surface_reader": KindSpec("headprep_register_surface_readers", SurfaceReader, "surface reader"),
    "aligner": KindSpec("headprep_register_aligners", Aligner, "aligner"),
    "patch_maker": KindSpec("headprep_register_patch_makers", PatchMaker, "patch maker"),
    "forward_solver": KindSpec("headprep_register_forward_solvers", ForwardSolver, "forward solver"),
    "check": KindSpec("headprep_register_checks", Check, "check"),
    "exporter": KindSpec("headprep_register_exporters", Exporter, "exporter"),
    "inverse_solver": KindSpec("headprep_register_inverse_solvers", InverseSolver, "inverse solver"),
    "report_section": KindSpec("headprep_register_report_sections", ReportSection, "report section"),
}


def _missing_modules(requires: Iterable[str]) -> list[str]:
    missing = []
    for mod in requires:
        try:
            if importlib.util.find_spec(mod) is None:
                missing.append(mod)
        except (ImportError, ValueError):
            missing.append(mod)
    return missing


class Registry:
    """Plugins loaded for one invocation, and dispatch to their descriptors.

    Build it with :func:`make_registry`. Descriptors are collected lazily per
    kind and cached.
    """

    def __init__(self, pm: pluggy.PluginManager) -> None:
        self.pm = pm
        self._cache: dict[str, tuple[list[Descriptor], list[tuple[Descriptor, list[str]]]]] = {}

    # ------------------------------------------------------------ plugin info
    def plugin_names(self) -> list[str]:
        return sorted(n for n, p in self.pm.list_name_plugin() if p is not None)

    def distribution(self, plugin_name: str) -> tuple[str, str]:
        """(distribution, version) of a plugin, ``("unregistered", "")`` if added by hand."""
        plugin = self.pm.get_plugin(plugin_name)
        for p, dist in self.pm.list_plugin_distinfo():
            if p is plugin:
                meta = getattr(dist, "metadata", None)
                name = meta["name"] if meta is not None else getattr(dist, "project_name", "?")
                return str(name), str(dist.version)
        return "unregistered", ""

    def dist_label(self, plugin_name: str) -> str:
        name, version = self.distribution(plugin_name)
        return f"{name}=={version}" if version else name

    # ------------------------------------------------------------ descriptors
    def _collect(self, kind: str) -> tuple[list[Descriptor], list[tuple[Descriptor, list[str]]]]:
        if kind in self._cache:
            return self._cache[kind]
        spec = KINDS[kind]
        caller = getattr(self.pm.hook, spec.hook)
        found: dict[str, Descriptor] = {}
        unavailable: list[tuple[Descriptor, list[str]]] = []
        for impl in caller.get_hookimpls():
            pname = impl.plugin_name
            try:
                items = impl.function()
            except HeadprepError:
                raise
            except Exception as exc:
                raise PluginError(pname, self.dist_label(pname), f"{spec.hook}()", exc) from exc
            if items is None:
                items = []
            if not isinstance(items, (list, tuple)):
                raise PluginError(pname, self.dist_label(pname),
                                  f"{spec.hook}(): returned {items!r}, expected a list of {spec.cls.__name__}")
            for item in items:
                if not isinstance(item, spec.cls):
                    raise PluginError(pname, self.dist_label(pname),
                                      f"{spec.hook}(): returned {item!r}, expected {spec.cls.__name__}")
                item = replace(item, plugin=pname)
                if item.name in found:
                    other = found[item.name].plugin
                    raise PluginError(pname, self.dist_label(pname),
                                      f"{spec.hook}(): {spec.label} name '{item.name}' is also provided "
                                      f"by plugin '{other}'; block one with --block")
                missing = _missing_modules(item.requires)
                if missing:
                    unavailable.append((item, missing))
                else:
                    found[item.name] = item
        result = ([found[k] for k in sorted(found)], sorted(unavailable, key=lambda t: t[0].name))
        self._cache[kind] = result
        return result

    def descriptors(self, kind: str) -> list[Any]:
        """Usable descriptors of one kind, sorted by name."""
        return list(self._collect(kind)[0])

    def unavailable(self, kind: str) -> list[tuple[Any, list[str]]]:
        """Descriptors whose required modules are missing, with those modules."""
        return list(self._collect(kind)[1])

    def get(self, kind: str, name: str) -> Any:
        """The descriptor ``name`` of ``kind``; UsageError listing the choices otherwise."""
        for d in self.descriptors(kind):
            if d.name == name:
                return d
        for d, missing in self.unavailable(kind):
            if d.name == name:
                raise UsageError(f"{KINDS[kind].label} '{name}' (plugin '{d.plugin}') is unavailable: "
                                 f"missing module(s) {', '.join(missing)}")
        names = ", ".join(d.name for d in self.descriptors(kind)) or "none installed"
        raise UsageError(f"no {KINDS[kind].label} named '{name}' (available: {names})")

    def for_file(self, kind: str, path: str | os.PathLike[str], name: str | None = None) -> Any:
        """Pick the reader of ``kind`` for ``path``: by ``name`` if given, else by suffix and sniffing.

        The longest matching suffix wins; two readers claiming the same file is an
        error listing the candidates (the user chooses with ``--reader NAME``).
        """
        if name:
            return self.get(kind, name)
        p = Path(path)
        fname = p.name.lower()
        scored: list[tuple[int, Any]] = []
        for d in self.descriptors(kind):
            lengths = [len(s) for s in d.suffixes if fname.endswith(s.lower())]
            if not lengths:
                continue
            if d.sniff is not None and p.is_file():
                if not self.call(d, "sniff", p, step=f"{KINDS[kind].label} '{d.name}' sniffing {p}"):
                    continue
            scored.append((max(lengths), d))
        if not scored:
            known = sorted({s for d in self.descriptors(kind) for s in d.suffixes})
            raise UsageError(f"{path}: no {KINDS[kind].label} recognises this file name "
                             f"(known endings: {', '.join(known)}); choose one with --reader NAME")
        best = max(s for s, _ in scored)
        winners = [d for s, d in scored if s == best]
        if len(winners) > 1:
            cands = ", ".join(f"{d.name} (plugin {d.plugin})" for d in winners)
            raise UsageError(f"{path}: several {KINDS[kind].label}s claim this file: {cands}; "
                             f"choose one with --reader NAME")
        return winners[0]

    # ------------------------------------------------------------ dispatch
    def call(self, descriptor: Descriptor, attr: str, /, *args: Any, step: str | None = None,
             **kwargs: Any) -> Any:
        """Call ``descriptor.<attr>(*args, **kwargs)``; wrap a crash as PluginError.

        The kit's own exceptions (ReadError, UsageError...) pass through: they
        describe the user's input, not a bug.
        """
        fn: Callable[..., Any] = getattr(descriptor, attr)
        try:
            return fn(*args, **kwargs)
        except HeadprepError:
            raise
        except Exception as exc:
            what = step or f"{type(descriptor).__name__} '{descriptor.name}'.{attr}"
            raise PluginError(descriptor.plugin, self.dist_label(descriptor.plugin), what, exc) from exc

    @staticmethod
    def options(descriptor: Descriptor, given: Mapping[str, Any] | None, where: str) -> dict[str, Any]:
        """Merge ``given`` options over ``descriptor.defaults``, refusing unknown keys and wrong types.

        ``where`` names the place for the message (``"recipe.toml [patches]"``).
        """
        out = dict(descriptor.defaults)
        for key, value in (given or {}).items():
            if key not in descriptor.defaults:
                known = ", ".join(sorted(descriptor.defaults)) or "none"
                raise UsageError(f"{where}: unknown option '{key}' for '{descriptor.name}' (known: {known})")
            default = descriptor.defaults[key]
            if default is not None and not _same_kind(value, default):
                raise UsageError(f"{where}: option '{key}' must be {type(default).__name__}, "
                                 f"got {value!r}")
            out[key] = float(value) if isinstance(default, float) and isinstance(value, int) else value
        return out

    @staticmethod
    def accepts(fn: Callable[..., Any], keyword: str) -> bool:
        """Whether ``fn`` takes ``keyword`` (or ``**kwargs``)."""
        try:
            params = inspect.signature(fn).parameters.values()
        except (TypeError, ValueError):
            return True
        return any(p.name == keyword or p.kind is inspect.Parameter.VAR_KEYWORD for p in params)

    # ------------------------------------------------------------ listing
    def describe_plugins(self) -> list[dict[str, Any]]:
        """One dict per plugin: name, distribution, version, built-in, hooks, descriptors.

        The single source for ``headprep plugins``, ``--version`` and the
        bundle manifest's list of plugins.
        """
        rows: dict[str, dict[str, Any]] = {}
        for pname in self.plugin_names():
            dist, version = self.distribution(pname)
            plugin = self.pm.get_plugin(pname)
            hooks = sorted(h.name for h in (self.pm.get_hookcallers(plugin) or []))
            rows[pname] = {"name": pname, "distribution": dist, "version": version,
                           "builtin": dist == "headprep", "hooks": hooks, "provides": [], "unavailable": []}
        for kind in KINDS:
            for d in self.descriptors(kind):
                entry = {"kind": kind, "name": d.name, "description": d.description}
                suffixes = getattr(d, "suffixes", ())
                if suffixes:
                    entry["suffixes"] = list(suffixes)
                rows[d.plugin]["provides"].append(entry)
            for d, missing in self.unavailable(kind):
                rows[d.plugin]["unavailable"].append({"kind": kind, "name": d.name, "missing": missing})
        return [rows[k] for k in sorted(rows)]


def _same_kind(value: Any, default: Any) -> bool:
    if isinstance(default, bool):
        return isinstance(value, bool)
    if isinstance(default, float):
        return isinstance(value, (int, float)) and not isinstance(value, bool)
    if isinstance(default, int):
        return isinstance(value, int) and not isinstance(value, bool)
    if isinstance(default, (list, tuple)):
        return isinstance(value, (list, tuple))
    return isinstance(value, type(default))


def make_registry(*, entry_points: bool = True, plugins: Iterable[object] = (),
                  blocked: Iterable[str] = ()) -> Registry:
    """Build a fresh registry.

    Parameters
    ----------
    entry_points : bool
        Load plugins from the ``headprep`` entry-point group (built-ins included).
        The environment variable ``HEADPREP_PLUGINS=a,b`` restricts loading to
        those names.
    plugins : iterable of modules or objects
        Registered after the entry points (tests, scripts).
    blocked : iterable of str
        Plugin names never to load (``--block NAME``).

    Raises
    ------
    PluginError
        A plugin failed to import or does not match the hook specs; the message
        names it with its distribution.
    """
    pm = pluggy.PluginManager(hookspecs.PROJECT)
    pm.add_hookspecs(hookspecs)
    for name in blocked:
        pm.set_blocked(name)
    if entry_points:
        allow = os.environ.get("HEADPREP_PLUGINS")
        allowed = {s.strip() for s in allow.split(",") if s.strip()} if allow else None
        eps = importlib.metadata.entry_points(group=hookspecs.PROJECT)
        for ep in sorted(eps, key=lambda e: e.name):
            if allowed is not None and ep.name not in allowed:
                continue
            if pm.is_blocked(ep.name) or pm.get_plugin(ep.name) is not None:
                continue
            try:
                pm.load_setuptools_entrypoints(hookspecs.PROJECT, name=ep.name)
            except Exception as exc:
                dist = ep.dist
                label = f"{dist.metadata['name']}=={dist.version}" if dist is not None else "?"
                raise PluginError(ep.name, label, "loading", exc) from exc
    for obj in plugins:
        name = getattr(obj, "__name__", None)
        try:
            pm.register(obj, name=name.rsplit(".", 1)[-1] if isinstance(name, str) else None)
        except pluggy.PluginValidationError as exc:
            raise PluginError(str(name), "unregistered", "registration", exc) from exc
    try:
        pm.check_pending()
    except pluggy.PluginValidationError as exc:
        pname = pm.get_name(exc.plugin) or "?"
        raise PluginError(pname, "?", "hook validation", exc) from exc
    if os.environ.get("HEADPREP_TRACE_PLUGINS") == "1":
        pm.add_hookcall_monitoring(
            lambda hook, impls, kw: sys.stderr.write(f"[headprep] {hook} -> {[i.plugin_name for i in impls]}\n"),
            lambda outcome, hook, impls, kw: None)
    return Registry(pm)
