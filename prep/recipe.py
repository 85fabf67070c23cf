"""Subject recipes (TOML): what to read and how to prepare one subject.

A recipe names the subject's files (paths relative to the recipe) and the
method and options of every step. Parsing is strict: an unknown section or
key, a wrong type or a missing required key is a :class:`UsageError` naming the
file and the key, before anything is computed or written. Plugin options are
checked later against the chosen plugin's ``defaults``.

See ``docs/recipes.md`` for the full reference.
"""
from __future__ import annotations

import difflib
import os
import tomllib
from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from .errors import UsageError

__all__ = ["Recipe", "load_recipe", "recipe_from_mapping", "SECTIONS"]

_STR, _LIST, _BOOL = str, list, bool

#: section -> {key: (type, required)}; sections marked open also pass other keys
#: on to the chosen plugin as options.
SECTIONS: dict[str, dict[str, tuple[type | tuple[type, ...], bool]]] = {
    "subject": {"id": (_STR, True)},
    "inputs": {
        "sensors": (_STR, True), "headshape": (_STR, False), "fiducials": (_STR, False),
        "scalp": (_STR, True), "outer_skull": (_STR, False), "inner_skull": (_STR, False),
        "cortex": ((_STR, _LIST), True), "mesh_units": (_STR, False), "sensor_units": (_STR, False),
        "sensor_reader": (_STR, False), "surface_reader": (_STR, False),
    },
    "align": {"method": (_STR, False)},
    "patches": {"method": (_STR, False)},
    "head_model": {"model": (_STR, False), "conductivities": (_LIST, False), "radii": (_LIST, False),
                   "centre": (_LIST, False)},
    "forward": {"reference": (_STR, False), "orientation": (_STR, False)},
    "checks": {},
    "output": {"bundle": (_STR, False), "report": (_BOOL, False), "zip": (_BOOL, False)},
}
#: sections whose extra keys are plugin options (validated against the plugin's defaults)
OPEN_SECTIONS = {"align", "patches", "head_model", "checks"}
#: step defaults
DEFAULTS = {"align": "surface", "patches": "quadric", "head_model": "spheres"}
INPUT_FILES = ("sensors", "headshape", "fiducials", "scalp", "outer_skull", "inner_skull")


@dataclass(frozen=True)
class Recipe:
    """A parsed, structurally valid recipe.

    Attributes
    ----------
    path : Path or None
        The recipe file (paths inside are relative to its folder).
    subject : str
    inputs : dict
        Absolute paths by role (``sensors``, ``scalp``, ``cortex`` -> list...),
        plus ``mesh_units`` etc. as given.
    steps : dict
        Section -> its keys (method and plugin options), as given.
    output : dict
    """

    path: Path | None
    subject: str
    inputs: dict[str, Any]
    steps: dict[str, dict[str, Any]] = field(default_factory=dict)
    output: dict[str, Any] = field(default_factory=dict)

    def method(self, section: str) -> str:
        key = "model" if section == "head_model" else "method"
        return str(self.steps.get(section, {}).get(key, DEFAULTS[section]))

    def plugin_options(self, section: str) -> dict[str, Any]:
        """Keys of ``section`` that are options of the chosen plugin."""
        fixed = SECTIONS[section]
        return {k: v for k, v in self.steps.get(section, {}).items() if k not in fixed}

    def where(self, section: str) -> str:
        return f"{self.path or '<recipe>'} [{section}]"

    def input_files(self) -> list[tuple[str, Path]]:
        """(role, path) of every input file, cortex files as ``cortex[i]``."""
        out = [(r, Path(self.inputs[r])) for r in INPUT_FILES if self.inputs.get(r)]
        out += [(f"cortex[{i}]", Path(p)) for i, p in enumerate(self.inputs["cortex"])]
        return out


def _type_name(t: type | tuple[type, ...]) -> str:
    if isinstance(t, tuple):
        return " or ".join(_type_name(x) for x in t)
    return {"str": "a string", "list": "a list", "bool": "true/false"}.get(t.__name__, t.__name__)


def _known(name: str, known: Iterable[str]) -> str:
    """'did you mean ...? known: ...' for a misspelt section or key."""
    known = list(known)
    near = difflib.get_close_matches(name, known, n=1)
    return (f"did you mean '{near[0]}'? " if near else "") + f"known: {', '.join(known)}"


def recipe_from_mapping(data: Mapping[str, Any], *, path: Path | None = None,
                        base: Path | None = None) -> Recipe:
    """Validate a parsed recipe mapping.

    Parameters
    ----------
    data : mapping
        The TOML document.
    path : Path, optional
        The recipe file, for messages.
    base : Path, optional
        Folder that relative input paths are relative to (default: the recipe's folder).
    """
    where = str(path or "<recipe>")
    base = base or (path.parent if path else Path.cwd())
    for section in data:
        if section not in SECTIONS:
            raise UsageError(f"{where}: unknown section [{section}] ({_known(section, SECTIONS)})")
        if not isinstance(data[section], Mapping):
            raise UsageError(f"{where}: '{section}' must be a [section] table")
    if "subject" not in data:
        raise UsageError(f"{where}: the [subject] section is missing")
    if "inputs" not in data:
        raise UsageError(f"{where}: the [inputs] section is missing")
    for section, keys in SECTIONS.items():
        given = data.get(section, {})
        if section not in OPEN_SECTIONS:  # a misspelt key first: it explains a "missing" one
            for key in given:
                if key not in keys:
                    raise UsageError(f"{where}: [{section}] unknown key '{key}' ({_known(key, keys)})")
        for key, (typ, required) in keys.items():
            if key not in given:
                if required:
                    raise UsageError(f"{where}: [{section}] is missing the required key '{key}'")
                continue
            if not isinstance(given[key], typ) or (typ is not bool and isinstance(given[key], bool)):
                raise UsageError(f"{where}: [{section}] '{key}' must be {_type_name(typ)}, got {given[key]!r}")
    subject = str(data["subject"]["id"]).strip()
    if not subject or any(c in subject for c in "/\\") or subject.startswith("."):
        raise UsageError(f"{where}: [subject] id {subject!r} must be a plain name (no slashes)")
    inputs: dict[str, Any] = dict(data["inputs"])
    for role in INPUT_FILES:
        if inputs.get(role):
            inputs[role] = str((base / os.path.expanduser(inputs[role])).resolve())
    cortex = inputs["cortex"]
    cortex = [cortex] if isinstance(cortex, str) else list(cortex)
    if not cortex or not all(isinstance(c, str) for c in cortex):
        raise UsageError(f"{where}: [inputs] 'cortex' must be a file name or a list of file names")
    inputs["cortex"] = [str((base / os.path.expanduser(c)).resolve()) for c in cortex]
    steps = {s: dict(data.get(s, {})) for s in ("align", "patches", "head_model", "forward", "checks")}
    ref = steps["forward"].get("reference", "average")
    orient = steps["forward"].get("orientation", "fixed")
    if orient not in ("fixed", "free", "both"):
        raise UsageError(f"{where}: [forward] 'orientation' must be fixed, free or both, got {orient!r}")
    steps["forward"] = {"reference": ref, "orientation": orient}
    output = dict(data.get("output", {}))
    if "bundle" in output:
        output["bundle"] = str((base / os.path.expanduser(output["bundle"])).resolve())
    return Recipe(path=path, subject=subject, inputs=inputs, steps=steps, output=output)


def load_recipe(path: str | os.PathLike[str]) -> Recipe:
    """Read and validate a recipe file (UsageError naming file, line or key on any problem)."""
    p = Path(path)
    if not p.is_file():
        raise UsageError(f"{p}: recipe file not found")
    try:
        data = tomllib.loads(p.read_text(encoding="utf-8"))
    except UnicodeDecodeError as exc:
        raise UsageError(f"{p}: not a text file ({exc.reason})") from exc
    except tomllib.TOMLDecodeError as exc:
        raise UsageError(f"{p}: not valid TOML: {exc}") from exc
    return recipe_from_mapping(data, path=p.resolve())
