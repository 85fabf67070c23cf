"""Preparing one subject: read -> align -> patches -> head model -> lead field -> checks -> bundle.

Every step asks the registry for its plugin; the pipeline never names a
built-in. Each heavy step returns a :class:`StepResult` (a JSON document, arrays
and findings) so that it can be stored and reused by :class:`~prep.stepcache.StepCache`
(resumable cohort runs) and poured into the bundle unchanged.
"""
from __future__ import annotations

import os
from collections.abc import Callable
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any

import numpy as np

from . import forward as fwd
from .bundle import ArraySpec, verify_bundle, write_bundle
from .checks import run_checks, validate_check_options
from .errors import UsageError
from .findings import verdict
from .geometry.meshcheck import repair_surface
from .geometry.surface import closest_points
from .model import FIDUCIALS, Finding, Patches, Sensors, Surface, Transform
from .readers import read_sensors, read_surface
from .recipe import Recipe
from .registry import Registry
from .stepcache import StepCache, step_key

__all__ = ["SubjectInputs", "StepResult", "RunResult", "read_inputs", "prepare_subject", "validate_recipe", "verdict"]

Advance = Callable[[str | None], None]


# ------------------------------------------------------------------ results
@dataclass
class SubjectInputs:
    """Everything read from a recipe's files (metres)."""

    sensors: Sensors
    anatomy_fiducials: dict[str, np.ndarray] | None
    scalp: Surface
    outer_skull: Surface | None
    inner_skull: Surface | None
    cortex: list[Surface]
    files: list[dict[str, Any]]
    findings: list[Finding]


@dataclass
class StepResult:
    """One step's output: a JSON-ready document, arrays (SI) and findings."""

    meta: dict[str, Any]
    arrays: dict[str, np.ndarray]
    findings: list[Finding] = field(default_factory=list)

    def to_store(self) -> tuple[dict[str, Any], dict[str, np.ndarray]]:
        return {**self.meta, "findings": [f.to_dict() for f in self.findings]}, self.arrays

    @classmethod
    def from_store(cls, meta: dict[str, Any], arrays: dict[str, np.ndarray]) -> StepResult:
        meta = dict(meta)
        findings = [Finding.from_dict(d) for d in meta.pop("findings", [])]
        return cls(meta=meta, arrays=arrays, findings=findings)


@dataclass
class RunResult:
    """What ``run``/``demo``/``batch`` report for one subject."""

    subject: str
    bundle: Path
    findings: list[Finding]
    summary: dict[str, Any]
    verdict: str
    report: Path | None = None


# ------------------------------------------------------------------ reading
def read_inputs(registry: Registry, recipe: Recipe) -> SubjectInputs:
    """Read every file of the recipe (UsageError/ReadError on unusable input)."""
    inp = recipe.inputs
    findings: list[Finding] = []
    files: list[dict[str, Any]] = []

    def repaired(surf: Surface) -> Surface:
        fixed, notes = repair_surface(surf)
        findings.extend(notes)
        return fixed

    def note_file(role: str, obj: Sensors | Surface) -> None:
        prov = obj.provenance
        files.append({"role": role, "file": prov.file, "sha256": prov.sha256, "reader": prov.reader,
                      "unit": prov.unit, "unit_source": prov.unit_source})
        findings.extend(obj.findings)

    sensors = read_sensors(registry, inp["sensors"], reader=inp.get("sensor_reader"), units=inp.get("sensor_units"))
    note_file("sensors", sensors)
    if inp.get("headshape"):
        hs = read_sensors(registry, inp["headshape"], units=inp.get("sensor_units"))
        note_file("headshape", hs)
        extra = [sensors.headshape, hs.headshape, hs.positions]
        sensors = replace(sensors, headshape=np.vstack([e for e in extra if len(e)]) if any(len(e) for e in extra)
                          else None)
    fids = None
    if inp.get("fiducials"):
        fs = read_sensors(registry, inp["fiducials"], units=inp.get("sensor_units"))
        note_file("fiducials", fs)
        fids = dict(fs.fiducials)
        for label, pos in zip(fs.labels, fs.positions):  # rows labelled like fiducials
            if label.lower() in FIDUCIALS and label.lower() not in fids:
                fids[label.lower()] = pos
        missing = [k for k in FIDUCIALS if k not in fids]
        if missing:
            findings.append(Finding(code="input.fiducial-missing", severity="warn",
                                    message=f"{inp['fiducials']}: anatomy-frame fiducial(s) {', '.join(missing)} "
                                            f"not found; the surface fit starts from principal axes instead",
                                    subjects=tuple(missing), source="pipeline"))
            fids = None
    units = inp.get("mesh_units")
    reader = inp.get("surface_reader")
    scalp = repaired(read_surface(registry, inp["scalp"], "scalp", reader=reader, units=units))
    note_file("scalp", scalp)
    skulls = {}
    for role in ("outer_skull", "inner_skull"):
        skulls[role] = (repaired(read_surface(registry, inp[role], role, reader=reader, units=units))
                        if inp.get(role) else None)
        if skulls[role] is not None:
            note_file(role, skulls[role])
    cortex = []
    n = len(inp["cortex"])
    for i, path in enumerate(inp["cortex"]):
        role = "cortex" if n == 1 else ("cortex_left", "cortex_right")[i] if n == 2 else f"cortex_{i}"
        surf = repaired(read_surface(registry, path, role, reader=reader, units=units))
        note_file(f"cortex[{i}]", surf)
        cortex.append(surf)
    return SubjectInputs(sensors=sensors, anatomy_fiducials=fids, scalp=scalp, outer_skull=skulls["outer_skull"],
                         inner_skull=skulls["inner_skull"], cortex=cortex, files=files, findings=findings)


def _without_nonfinite_channels(inputs: SubjectInputs) -> SubjectInputs:
    """Leave out channels whose coordinates are not finite (the sensor checks report them)."""
    finite = np.isfinite(inputs.sensors.positions).all(axis=1)
    if finite.all():
        return inputs
    return replace(inputs, sensors=inputs.sensors.select(finite))


# ------------------------------------------------------------------ steps
def step_align(registry: Registry, recipe: Recipe, inputs: SubjectInputs) -> StepResult:
    """Co-register, place and check the electrodes; keep the scalp electrodes for the model."""
    from .placement import place_sensors

    method = recipe.method("align")
    desc = registry.get("aligner", method)
    opts = registry.options(desc, recipe.plugin_options("align"), recipe.where("align"))
    res = place_sensors(registry, inputs.sensors, inputs.scalp, inputs.anatomy_fiducials, method=method,
                        options=opts, check_options=recipe.steps.get("checks") or None)
    placed = res.placed
    eeg = placed.eeg_mask
    if eeg.sum() < 3:
        raise UsageError(f"{recipe.inputs['sensors']}: fewer than three scalp (EEG) electrodes to model")
    scalp_eeg = placed.select(eeg)
    on, signed, _ = closest_points(inputs.scalp.vertices, inputs.scalp.faces, scalp_eeg.positions)
    labels = list(scalp_eeg.labels)
    codes: dict[str, list[str]] = {lab: [] for lab in labels}
    for f in res.findings:
        for s in f.subjects:
            if s in codes:
                codes[s].append(f.code)
    per = [{"label": lab, "signed_distance_m": float(d), "shift_m": float(np.linalg.norm(a - b)),
            "codes": sorted(set(codes[lab]))} for lab, d, a, b in zip(labels, signed, scalp_eeg.positions, on)]
    t: Transform = res.alignment.transform
    arrays = {"sensor_digitized": scalp_eeg.positions, "sensor_positions": on,
              "placement_signed_distance": signed}
    if len(placed.headshape):
        arrays["headshape_points"] = placed.headshape
        if res.alignment.headshape_inliers is not None:
            arrays["headshape_inliers"] = np.asarray(res.alignment.headshape_inliers, dtype=bool)
    meta = {
        "transform": t.to_dict(),
        "alignment": {"method": method, "options": opts, "metrics": dict(res.alignment.metrics)},
        "placement": {"per_electrode": per, "metrics": dict(res.report.metrics)},
        "sensors": {"labels": labels,
                    "kinds": list(scalp_eeg.kinds),
                    "original_labels": list(scalp_eeg.original_labels),
                    "fiducials": {k: v.tolist() for k, v in placed.fiducials.items()},
                    "excluded_channels": [lab for lab, m in zip(placed.labels, eeg) if not m]},
    }
    return StepResult(meta=meta, arrays=arrays, findings=list(res.findings))


def step_patches(registry: Registry, recipe: Recipe, inputs: SubjectInputs) -> StepResult:
    """Decimate the cortex into patches and check them against the inner skull."""
    method = recipe.method("patches")
    desc = registry.get("patch_maker", method)
    opts = registry.options(desc, recipe.plugin_options("patches"), recipe.where("patches"))
    patches: Patches = registry.call(desc, "make", inputs.cortex, inner_skull=inputs.inner_skull,
                                     step=f"patch maker '{method}'", **opts)
    if not isinstance(patches, Patches):
        raise UsageError(f"patch maker '{method}' returned {type(patches).__name__}, not Patches")
    report = run_checks(registry, "patches", patches=patches, inner_skull=inputs.inner_skull,
                        options=recipe.steps.get("checks"))
    verts = np.vstack([s.vertices for s in inputs.cortex])
    offsets = np.cumsum([0] + [len(s.vertices) for s in inputs.cortex[:-1]])
    faces = np.vstack([s.faces + o for s, o in zip(inputs.cortex, offsets)])
    arrays = {"source_positions": patches.centres, "source_normals": patches.normals,
              "source_areas": patches.areas, "source_spread": patches.spread,
              "source_hemisphere": patches.hemisphere.astype(np.int8),
              "cortex_vertices": verts, "cortex_faces": faces.astype(np.int64)}
    if patches.vertex_patch is not None:
        arrays["source_vertex_patch"] = patches.vertex_patch
    meta = {"patches": {"method": method, "options": opts, "count": len(patches),
                        "total_area_m2": float(patches.areas.sum()), "metrics": dict(report.metrics)}}
    return StepResult(meta=meta, arrays=arrays, findings=list(patches.findings) + list(report.findings))


def _conductor(registry: Registry, recipe: Recipe, inputs: SubjectInputs, sensor_positions: np.ndarray):
    """The volume conductor the recipe asks for, plus findings about its layers."""
    from .model import VolumeConductor

    hm = recipe.steps.get("head_model", {})
    model = recipe.method("head_model")
    findings: list[Finding] = []
    if model == "spheres":
        radii = hm.get("radii")
        centre = hm.get("centre")
        sigma = hm.get("conductivities")
        layers = [s for s in (inputs.inner_skull, inputs.outer_skull) if s is not None]
        if radii is None and len(layers) == 2 and (sigma is None or len(sigma) == 3):
            # the subject's own layers set the shells: mean distance of each mesh from the centre
            if centre is None:
                centre, _ = fwd.fit_sphere(sensor_positions)
            centre = np.asarray(centre, dtype=float)
            radii = [float(np.linalg.norm(s.vertices - centre, axis=1).mean())
                     for s in (*layers, inputs.scalp)]
        cond = fwd.sphere_conductor(sensor_positions, centre=centre, radii=radii, conductivities=sigma)
        return cond, findings
    if model == "bem":
        from .layers import check_layers, derive_head

        if inputs.inner_skull is None:
            # template-style preparation: remesh the scalp and offset the skull layers inward
            layers, derived = derive_head(inputs.scalp, outer_skull=inputs.outer_skull)
            findings += derived
        else:
            if inputs.outer_skull is None:
                raise UsageError(f"{recipe.where('inputs')}: an inner skull without an outer skull; give both "
                                 f"or neither (then both are derived from the scalp)")
            layers = (inputs.inner_skull, inputs.outer_skull, inputs.scalp)
        findings += check_layers(registry, layers)
        sigma = hm.get("conductivities")
        if sigma is None:
            solver = next(d for d in registry.descriptors("forward_solver") if d.conductor_kind == "layers")
            sigma = solver.defaults.get("conductivities", [0.33, 0.0042, 0.33])
        return VolumeConductor(kind="layers", conductivities=sigma, layers=layers), findings
    raise UsageError(f"{recipe.where('head_model')}: model must be 'spheres' or 'bem', got {model!r}")


def step_forward(registry: Registry, recipe: Recipe, inputs: SubjectInputs, align: StepResult,
                 patches: StepResult) -> StepResult:
    """Build the head model and the lead field at the patches (V/(A*m))."""
    labels = tuple(align.meta["sensors"]["labels"])
    positions = align.arrays["sensor_positions"]
    conductor, findings = _conductor(registry, recipe, inputs, positions)
    if any(f.severity == "fail" and f.code.startswith(("layers.", "mesh.")) for f in findings):
        raise UsageError("the head-model layers failed their checks: "
                         + "; ".join(f.message for f in findings if f.severity == "fail"))
    hm_opts = {k: v for k, v in recipe.plugin_options("head_model").items()}
    ref = recipe.steps["forward"]["reference"]
    fm = fwd.build_forward(registry, conductor, labels, positions, reference=ref, options=hm_opts)
    keep = ~_outside_brain(conductor, patches.arrays["source_positions"])
    if not keep.all():
        out = np.flatnonzero(~keep)
        findings.append(Finding(
            code="patches.outside", severity="warn",
            message=f"{out.size} of {keep.size} patches lie outside the brain compartment of the "
                    f"{conductor.kind} head model and were left out of the lead field",
            subjects=tuple(f"patch {i}" for i in out[:20]), values={"excluded": int(out.size)},
            source="pipeline"))
    centres = patches.arrays["source_positions"][keep]
    normals = patches.arrays["source_normals"][keep]
    arrays: dict[str, np.ndarray] = {"source_keep": keep}
    orient = recipe.steps["forward"]["orientation"]
    if orient in ("fixed", "both"):
        arrays["leadfield"] = fm.leadfield(centres, normals).matrix
    if orient in ("free", "both"):
        arrays["leadfield_free"] = fm.leadfield(centres, None).matrix
    if "leadfield" not in arrays:  # the passport and the bundle's accessors need the fixed one
        arrays["leadfield"] = np.einsum("nmk,mk->nm", arrays["leadfield_free"], normals)
    state, state_arrays = fwd.forward_state(fm)      # ({"forward": {...}}, {"forward_<key>": array})
    arrays.update(state_arrays)
    if conductor.kind == "layers":
        for i, s in enumerate(conductor.layers):
            arrays[f"layer{i}_vertices"] = s.vertices
            arrays[f"layer{i}_faces"] = s.faces
    meta = {"forward": state["forward"], "head_model": conductor.describe()}
    return StepResult(meta=meta, arrays=arrays, findings=findings)


def _outside_brain(conductor, positions: np.ndarray) -> np.ndarray:  # noqa: ANN001 - VolumeConductor
    """(m,) bool: dipoles outside the innermost compartment (a model cannot place them)."""
    if conductor.kind == "spheres":
        return fwd.outside_innermost(conductor, positions)
    from .geometry.layers import inside

    inner = conductor.layers[0]
    return ~np.asarray(inside(positions, inner.vertices, inner.faces), dtype=bool)


def keep_sources(patches: StepResult, keep: np.ndarray) -> StepResult:
    """The patches step's result restricted to the sources the head model kept."""
    if keep.all():
        return patches
    n = keep.size
    arrays = {k: (v[keep] if k.startswith("source_") and k != "source_vertex_patch" and len(v) == n else v)
              for k, v in patches.arrays.items()}
    if "source_vertex_patch" in arrays:
        renumber = np.full(n + 1, -1, dtype=np.int64)
        renumber[:n][keep] = np.arange(int(keep.sum()))
        vp = np.asarray(arrays["source_vertex_patch"])
        arrays["source_vertex_patch"] = renumber[np.where(vp < 0, n, vp)]
    meta = {**patches.meta, "patches": {**patches.meta["patches"], "count": int(keep.sum()),
                                        "excluded_by_head_model": int(n - keep.sum())}}
    return StepResult(meta=meta, arrays=arrays, findings=patches.findings)


def step_passport(registry: Registry, recipe: Recipe, align: StepResult, patches: StepResult,
                  forward: StepResult) -> StepResult:
    """Conditioning passport of the fixed-orientation lead field."""
    from .model import LeadField
    from .passport import run_passport

    lf = LeadField(matrix=forward.arrays["leadfield"], sensor_labels=tuple(align.meta["sensors"]["labels"]),
                   source_positions=patches.arrays["source_positions"],
                   source_normals=patches.arrays["source_normals"],
                   reference=recipe.steps["forward"]["reference"])
    pp = run_passport(registry, lf, align.arrays["sensor_positions"], options=recipe.steps.get("checks") or None)
    arrays = {f"passport_{k}": np.asarray(v) for k, v in pp.arrays.items()}
    return StepResult(meta={"passport": dict(pp.metrics)}, arrays=arrays, findings=list(pp.findings))


# ------------------------------------------------------------------ orchestration
def validate_recipe(registry: Registry, recipe: Recipe) -> None:
    """Check every step's plugin and options before anything is read or computed."""
    for section, kind in (("align", "aligner"), ("patches", "patch_maker")):
        desc = registry.get(kind, recipe.method(section))
        registry.options(desc, recipe.plugin_options(section), recipe.where(section))
    model = recipe.method("head_model")
    kinds = {"spheres": "spheres", "bem": "layers"}
    if model not in kinds:
        raise UsageError(f"{recipe.where('head_model')}: model must be 'spheres' or 'bem', got {model!r}")
    solvers = [d for d in registry.descriptors("forward_solver") if d.conductor_kind == kinds[model]]
    if not solvers:
        raise UsageError(f"{recipe.where('head_model')}: no forward solver for '{model}' is installed")
    registry.options(solvers[0], recipe.plugin_options("head_model"), recipe.where("head_model"))
    validate_check_options(registry, recipe.steps.get("checks"), recipe.where("checks"))


def _cached(cache: StepCache | None, step: str, parts: dict[str, Any],
            compute: Callable[[], StepResult]) -> tuple[StepResult, str]:
    key = step_key(step, parts)
    if cache is not None:
        hit = cache.fetch(step, key)
        if hit is not None:
            return StepResult.from_store(*hit), key
    result = compute()
    if cache is not None:
        cache.store(step, key, *result.to_store())
    return result, key


def _plugin_versions(registry: Registry) -> list[dict[str, str]]:
    return [{"name": r["name"], "distribution": r["distribution"], "version": r["version"]}
            for r in registry.describe_plugins()]


def prepare_subject(registry: Registry, recipe: Recipe, *, out: str | os.PathLike[str] | None = None,
                    force: bool = False, cache: StepCache | None = None, advance: Advance | None = None,
                    report: bool | None = None) -> RunResult:
    """Prepare one subject from its recipe and write a verified bundle.

    Parameters
    ----------
    registry : Registry
    recipe : Recipe
    out : path, optional
        Bundle path; default: the recipe's ``[output] bundle`` or ``out/<subject>-forward``
        beside the recipe.
    force : bool
        Replace an existing bundle.
    cache : StepCache, optional
        Reuse finished steps (cohort runs).
    advance : callable, optional
        Progress callback, called once per step with the step's name.
    report : bool, optional
        Write the HTML report beside the bundle (default: the recipe's ``[output] report``, true).

    Returns
    -------
    RunResult
    """
    step = advance or (lambda label=None: None)
    base = recipe.path.parent if recipe.path else Path.cwd()
    bundle_path = Path(out) if out else Path(recipe.output.get("bundle") or base / "out" / f"{recipe.subject}-forward")
    if recipe.output.get("zip") and bundle_path.suffix != ".zip":
        bundle_path = bundle_path.with_suffix(".zip")
    if bundle_path.exists() and not force:
        raise UsageError(f"{bundle_path}: already exists; use --force to replace it")
    validate_recipe(registry, recipe)
    inputs = read_inputs(registry, recipe)
    step("inputs")
    findings = list(inputs.findings)
    findings += run_checks(registry, "sensors", sensors=inputs.sensors, options=recipe.steps.get("checks")).findings
    for surf in [inputs.scalp, inputs.outer_skull, inputs.inner_skull, *inputs.cortex]:
        if surf is not None:
            findings += run_checks(registry, "surface", surface=surf, options=recipe.steps.get("checks")).findings
    inputs = _without_nonfinite_channels(inputs)
    step("checks of inputs")
    from . import __version__

    versions = {"kit": __version__, "plugins": _plugin_versions(registry)}
    hashes = {f["role"]: f["sha256"] for f in inputs.files}
    align, k_align = _cached(cache, "align", {"files": hashes, "steps": recipe.steps["align"], **versions},
                             lambda: step_align(registry, recipe, inputs))
    step("align")
    patches, k_patch = _cached(cache, "patches", {"files": hashes, "steps": recipe.steps["patches"], **versions},
                               lambda: step_patches(registry, recipe, inputs))
    step("patches")
    forward, k_fwd = _cached(cache, "forward", {"up": [k_align, k_patch], "files": hashes,
                                                "head_model": recipe.steps["head_model"],
                                                "forward": recipe.steps["forward"], **versions},
                             lambda: step_forward(registry, recipe, inputs, align, patches))
    step("lead field")
    patches = keep_sources(patches, np.asarray(forward.arrays.pop("source_keep"), dtype=bool))
    passport, _ = _cached(cache, "passport", {"up": [k_fwd], "checks": recipe.steps.get("checks"), **versions},
                          lambda: step_passport(registry, recipe, align, patches, forward))
    step("passport")
    for part in (align, patches, forward, passport):
        findings += part.findings
    result = _write(registry, recipe, inputs, bundle_path, force, findings, versions,
                    (align, patches, forward, passport))
    step("bundle")
    want_report = recipe.output.get("report", True) if report is None else report
    if want_report and registry.descriptors("report_section"):
        from .bundle import load_bundle
        from .report import write_report

        result.report = write_report(load_bundle(result.bundle), registry,
                                     result.bundle.parent / f"{recipe.subject}-report.html", force=True)
    step("report")
    return result


def _write(registry: Registry, recipe: Recipe, inputs: SubjectInputs, path: Path, force: bool,
           findings: list[Finding], versions: dict[str, Any], parts: tuple[StepResult, ...]) -> RunResult:
    align, patches, forward, passport = parts
    arrays: dict[str, Any] = {}
    for part in parts:
        arrays.update(part.arrays)
    arrays["scalp_vertices"] = inputs.scalp.vertices
    arrays["scalp_faces"] = inputs.scalp.faces
    units = {"leadfield": "V/(A*m)", "leadfield_free": "V/(A*m)", "source_areas": "m^2", "source_spread": "rad"}
    specs = {k: ArraySpec(np.asarray(v), unit=units.get(k, "m" if np.asarray(v).dtype.kind == "f" else ""))
             for k, v in arrays.items()}
    v = verdict(findings)
    manifest: dict[str, Any] = {
        "kit": {"name": "headprep", "version": versions["kit"]},
        "subject": {"id": recipe.subject},
        "frame": "anatomy",
        "frames": {"anatomy": "frame of the subject's meshes",
                   "head": "RAS from fiducials: origin midway between LPA and RPA, +x toward RPA, "
                           "+y toward the nasion, +z up"},
        "sensors": align.meta["sensors"],
        "transform": align.meta["transform"],
        "alignment": align.meta["alignment"],
        "placement": align.meta["placement"],
        "patches": patches.meta["patches"],
        "head_model": forward.meta["head_model"],
        "forward": forward.meta["forward"],
        "passport": passport.meta["passport"],
        "inputs": inputs.files,
        "plugins": versions["plugins"],
        "parameters": {"recipe": str(recipe.path) if recipe.path else None, "steps": recipe.steps,
                       "inputs": {k: v for k, v in recipe.inputs.items() if k not in ("cortex",)}},
        "findings": [f.to_dict() for f in findings],
        "verdict": v,
        "note": "W (leadfield) has far more columns than rows: it is never inverted directly; "
                "use a regularised inverse (see docs/bundle-format.md).",
    }
    write_bundle(path, manifest, specs, force=force)
    problems = verify_bundle(path)
    if problems:  # cannot happen unless the disk lies; say so loudly
        raise UsageError(f"{path}: the bundle just written failed verification: {problems[0].message}")
    lf = arrays["leadfield"]
    cond = passport.meta["passport"]
    summary = {
        "subject": recipe.subject, "bundle": str(path), "verdict": v,
        "sensors": int(lf.shape[0]), "sources": int(lf.shape[1]),
        "fit_rms_mm": _mm(align.meta["alignment"]["metrics"].get("rms_m")),
        "condition_number": _find_number(cond, "condition_number"),
        "localisation_error_median_mm": _find_number(_find(cond, "peak_localisation_error", dict), "p50_mm"),
        "head_model": forward.meta["head_model"]["kind"],
        "flagged_electrodes": sum(bool(e["codes"]) for e in align.meta["placement"]["per_electrode"]),
        "findings": {s: sum(f.severity == s for f in findings) for s in ("fail", "warn", "info")},
    }
    return RunResult(subject=recipe.subject, bundle=path, findings=findings, summary=summary, verdict=v)


def _mm(x: Any) -> float | None:
    return None if x is None else round(float(x) * 1e3, 3)


def _find(doc: Any, key: str, kind: type | tuple[type, ...]) -> Any:
    """First value of type ``kind`` under ``key`` anywhere in a nested dict (passport metrics are keyed by check)."""
    if isinstance(doc, dict):
        if isinstance(doc.get(key), kind) and not isinstance(doc.get(key), bool):
            return doc[key]
        for v in doc.values():
            found = _find(v, key, kind)
            if found is not None:
                return found
    return None


def _find_number(doc: Any, key: str) -> float | None:
    found = _find(doc, key, (int, float))
    return None if found is None else float(found)
