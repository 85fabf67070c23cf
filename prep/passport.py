"""The lead-field passport: every ``leadfield`` check, run once, gathered into one object.

:func:`run_passport` asks the registry for the checks whose target is
``"leadfield"`` and runs each with its options; :func:`passport_pngs` draws the
four pictures (singular spectrum, depth profile, histograms of the
point-spread functions' peak localisation error and spatial dispersion).
The pipeline stores ``Passport.metrics`` in the bundle manifest under
``"passport"`` and ``Passport.arrays`` as ``passport_<name>``.
"""
from __future__ import annotations

import os
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from .atomic import make_dirs
from .descriptors import CheckReport
from .errors import PluginError, UsageError
from .model import Finding, LeadField, _jsonable
from .registry import Registry

__all__ = ["Passport", "run_passport", "passport_pngs", "PNG_NAMES"]

#: picture -> file name written by :func:`passport_pngs`
PNG_NAMES = {"spectrum": "passport-spectrum.png", "depth": "passport-depth.png",
             "peak_error": "passport-peak-error.png", "dispersion": "passport-dispersion.png",
             "peak_error_map": "passport-peak-error-map.png"}


@dataclass(frozen=True, kw_only=True)
class Passport:
    """What the lead-field checks found and measured.

    Parameters
    ----------
    findings : tuple of Finding
    metrics : dict check name -> JSON-ready dict
        Figures of each check (``"skipped"`` says why one did not run).
    arrays : dict name -> ndarray, SI units
        ``singular_values`` (k,) V/(A*m); ``column_norm`` (n_sources,) V/(A*m);
        ``source_depth`` (n_sources,) m; ``peak_localisation_error`` and
        ``spatial_dispersion`` (n_sources,) m. A check that was skipped leaves
        its arrays out.
    """

    findings: tuple[Finding, ...] = ()
    metrics: Mapping[str, Mapping[str, Any]] = field(default_factory=dict)
    arrays: Mapping[str, np.ndarray] = field(default_factory=dict)

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready: metrics and findings (arrays are listed by name, shape and unit)."""
        return {"metrics": _jsonable(dict(self.metrics)), "findings": [f.to_dict() for f in self.findings],
                "arrays": {k: {"shape": list(v.shape), "dtype": v.dtype.name} for k, v in self.arrays.items()}}


def _split_options(registry: Registry, checks: list[Any],
                   options: Mapping[str, Any] | None) -> dict[str, dict[str, Any]]:
    """Per-check option dicts from a flat namespace (the recipe's ``[checks]``) and per-check tables.

    A flat key goes to every lead-field check that declares it; a key that only
    another kind of check declares (placement, meshes...) is left to it. A
    table named after a lead-field check sets that check alone.
    """
    per: dict[str, dict[str, Any]] = {c.name: {} for c in checks}
    everything = registry.descriptors("check")
    other_names = {c.name for c in everything} - set(per)
    other_keys = {k for c in everything if c.name in other_names for k in c.defaults}
    for key, value in (options or {}).items():
        if key in per:
            if not isinstance(value, Mapping):
                raise UsageError(f"passport options: '{key}' must be a table of options for that check")
            per[key].update(value)
            continue
        takers = [c.name for c in checks if key in c.defaults]
        if not takers:
            if key in other_names or key in other_keys:
                continue
            known = sorted({k for c in checks for k in c.defaults} | set(per))
            raise UsageError(f"passport options: unknown option '{key}' (known: {', '.join(known)})")
        for name in takers:
            per[name].setdefault(key, value)
    return per


def run_passport(registry: Registry, leadfield: LeadField, sensor_positions: np.ndarray, *,
                 options: Mapping[str, Any] | None = None) -> Passport:
    """Run every registered ``leadfield`` check.

    Parameters
    ----------
    registry : Registry
    leadfield : LeadField
        Fixed (n_sensors, n_sources) or free (n_sensors, n_sources, 3), V/(A*m).
    sensor_positions : (n_sensors, 3) float64, metres, in ``leadfield.frame``
    options : mapping, optional
        A flat namespace like the recipe's ``[checks]``: ``{option: value}``
        goes to every lead-field check that declares the option
        (``{"snr": 5.0}``); ``{check_name: {option: value}}`` sets one check.
        Keys only other kinds of check declare are ignored; unknown keys are a
        UsageError.

    Returns
    -------
    Passport
    """
    pos = np.asarray(sensor_positions, dtype=np.float64)
    if pos.shape != (leadfield.n_sensors, 3):
        raise UsageError(f"sensor positions are {pos.shape}, the lead field has {leadfield.n_sensors} rows")
    checks = [c for c in registry.descriptors("check") if c.target == "leadfield"]
    per = _split_options(registry, checks, options)
    findings: list[Finding] = []
    metrics: dict[str, Any] = {}
    arrays: dict[str, np.ndarray] = {}
    for check in checks:
        opts = registry.options(check, per[check.name], f"passport options [{check.name}]")
        out = registry.call(check, "run", leadfield=leadfield, sensor_positions=pos,
                            step=f"check '{check.name}' on the lead field", **opts)
        if isinstance(out, CheckReport):
            findings.extend(out.findings)
            metrics[check.name] = _jsonable(dict(out.metrics))
            for name, arr in out.arrays.items():
                if name in arrays:
                    raise PluginError(check.plugin, registry.dist_label(check.plugin), f"check '{check.name}'",
                                      ValueError(f"array name '{name}' is already used by another check"))
                arrays[name] = np.asarray(arr)
        elif isinstance(out, (list, tuple)):
            findings.extend(out)
            metrics[check.name] = {}
        else:
            raise PluginError(check.plugin, registry.dist_label(check.plugin), f"check '{check.name}'",
                              TypeError(f"returned {type(out).__name__}, expected CheckReport or a list"))
    return Passport(findings=tuple(findings), metrics=metrics, arrays=arrays)


# ------------------------------------------------------------------ pictures
def _hist(arr: np.ndarray, title: str, xlabel: str, path: Path) -> Path:
    from .render import figure, save_figure_png

    fig = figure(figsize=(5.5, 3.6))
    ax = fig.add_subplot(1, 1, 1)
    vals = arr[np.isfinite(arr)] * 1e3
    ax.hist(vals, bins=40, color="#3b6e8f", edgecolor="white")
    for p, style in ((50, "-"), (90, "--")):
        if vals.size:
            ax.axvline(np.percentile(vals, p), color="#b04020", linestyle=style, label=f"{p}th percentile")
    ax.set_xlabel(xlabel)
    ax.set_ylabel("sources")
    ax.set_title(title)
    ax.legend(frameon=False)
    return save_figure_png(fig, path)


def _error_map(values: np.ndarray, positions: np.ndarray, path: Path) -> Path:
    """Sources seen from above and from the left, coloured by peak localisation error (mm)."""
    from .render import figure, save_figure_png

    fig = figure(figsize=(9.0, 4.0))
    order = np.argsort(values)  # largest errors drawn last, on top
    p, v = positions[order] * 1e3, values[order] * 1e3
    vmax = float(np.nanpercentile(v, 95)) if np.isfinite(v).any() else 1.0
    views = ((0, 1, "top view (x across, y up the page)"), (1, 2, "side view (y across, z up)"))
    for k, (a, b, title) in enumerate(views):
        ax = fig.add_subplot(1, 2, k + 1)
        sc = ax.scatter(p[:, a], p[:, b], c=v, s=4, cmap="viridis", vmin=0.0, vmax=vmax)
        ax.set_aspect("equal")
        ax.set_title(title, fontsize=9)
        ax.set_xlabel("mm")
    fig.colorbar(sc, ax=fig.axes, label="peak localisation error (mm)", shrink=0.85)
    fig.suptitle("Minimum-norm peak localisation error per source")
    return save_figure_png(fig, path)


def passport_pngs(passport: Passport, outdir: str | os.PathLike[str],
                  source_positions: np.ndarray | None = None) -> list[Path]:
    """Draw the passport's pictures into ``outdir`` (atomically, one PNG each).

    Pictures whose arrays are missing (a check skipped) are not drawn; the map
    of the peak localisation error needs ``source_positions`` (n_sources, 3) m.

    Returns
    -------
    list of Path
        The files written, in the order of :data:`PNG_NAMES`.
    """
    from .render import figure, save_figure_png

    out = make_dirs(outdir)
    a = passport.arrays
    written: list[Path] = []
    if "singular_values" in a:
        s = np.asarray(a["singular_values"])
        spec = passport.metrics.get("leadfield-spectrum", {})
        rank = spec.get("numerical_rank")
        shown = s[:rank] if isinstance(rank, int) and rank > 0 else s  # the reference's zero would swamp the scale
        fig = figure(figsize=(5.5, 3.6))
        ax = fig.add_subplot(1, 1, 1)
        ax.semilogy(np.arange(1, shown.size + 1), np.where(shown > 0, shown, np.nan), ".-", color="#3b6e8f")
        if shown.size < s.size:
            ax.text(0.99, 0.97, f"{s.size - shown.size} numerically zero value(s) not shown", ha="right", va="top",
                    transform=ax.transAxes, fontsize=8)
        floor = spec.get("noise_floor")
        if isinstance(floor, float) and floor > 0:
            ax.axhline(floor, color="#b04020", linestyle="--",
                       label=f"noise floor at SNR {spec.get('snr')}: {spec.get('effective_rank')} above")
            ax.legend(frameon=False)
        ax.set_xlabel("index")
        ax.set_ylabel("singular value (V/(A m))")
        ax.set_title("Lead-field singular spectrum")
        written.append(save_figure_png(fig, out / PNG_NAMES["spectrum"]))
    if "column_norm" in a and "source_depth" in a:
        fig = figure(figsize=(5.5, 3.6))
        ax = fig.add_subplot(1, 1, 1)
        ax.semilogy(np.asarray(a["source_depth"]) * 1e3, a["column_norm"], ".", markersize=2, color="#3b6e8f")
        dep = passport.metrics.get("leadfield-depth", {})
        ax.set_xlabel(f"depth (mm, {dep.get('depth_measure', '')})")
        ax.set_ylabel("column norm (V/(A m))")
        ratio = dep.get("ratio")
        ax.set_title("Depth profile" + (f": superficial/deep ratio {ratio:.3g}" if isinstance(ratio, float) else ""))
        written.append(save_figure_png(fig, out / PNG_NAMES["depth"]))
    if "peak_localisation_error" in a:
        written.append(_hist(np.asarray(a["peak_localisation_error"]), "Point-spread peak localisation error",
                             "error (mm)", out / PNG_NAMES["peak_error"]))
    if "spatial_dispersion" in a:
        written.append(_hist(np.asarray(a["spatial_dispersion"]), "Point-spread spatial dispersion",
                             "dispersion (mm)", out / PNG_NAMES["dispersion"]))
    if "peak_localisation_error" in a and source_positions is not None:
        pos = np.asarray(source_positions, dtype=np.float64)
        if pos.shape == (len(a["peak_localisation_error"]), 3):
            written.append(_error_map(np.asarray(a["peak_localisation_error"]), pos, out / PNG_NAMES["peak_error_map"]))
    return written
