"""Built-in plugin `report_sections`: the sections of the subject report.

Each section is a :class:`prep.ReportSection` whose ``render(bundle, assets)``
returns an HTML fragment (the core puts the verdict above them all). A section
whose data are absent from the bundle says so in one sentence.

Order: electrodes 10, head layers 20, cortex 30, lead-field passport 40,
all findings 80, provenance 90.
"""
from __future__ import annotations

import json
from typing import Any

import numpy as np

from prep import ReportSection, hookimpl
from prep.bundle import Bundle
from prep.report import Assets, Markup, absent, esc, flatten, fmt, severity_badge, table

from . import _report_sections_data as data

#: colour limit of the distance scale (mm): at least this, or the largest |distance|
DISTANCE_LIMIT_MM = 10.0


def _gallery(figures: list[str]) -> str:
    return f'<div class="gallery">{"".join(figures)}</div>'


def _facts(pairs: list[tuple[str, Any]]) -> str:
    items = "".join(f"<dt>{esc(k)}</dt><dd>{v if isinstance(v, Markup) else esc(v)}</dd>" for k, v in pairs)
    return f'<dl class="facts">{items}</dl>'


# ------------------------------------------------------------------ electrodes
def render_electrodes(bundle: Bundle, assets: Assets) -> str:
    """Electrodes on the scalp in four views, then a per-electrode table."""
    el = data.electrodes(bundle)
    if el is None:
        return absent("This bundle stores no electrode positions, so there is nothing to show here.")
    from ._report_sections_views import electrode_views

    scalp = data.scalp(bundle)
    parts = []
    sd = el.signed_distance
    lim = DISTANCE_LIMIT_MM if sd is None else max(DISTANCE_LIMIT_MM, float(np.abs(sd).max()) * 1e3)
    flagged = [el.labels[i] for i in el.flagged]
    summary = (f"{len(el.labels)} electrodes; drawn at their {el.drawn_kind} positions. "
               + (f"Flagged by a check: {', '.join(flagged)}." if flagged else "No electrode is flagged by a check."))
    parts.append(f'<p id="electrode-summary" data-flagged="{len(flagged)}">{esc(summary)}</p>')
    if scalp is None:
        parts.append(absent("This bundle stores no scalp mesh; the electrodes are drawn alone."))
    if sd is None:
        parts.append(absent("This bundle stores no distances to the skin; the electrodes are not coloured."))
    else:
        parts.append(f"<p>Colour: signed distance to the skin in mm, blue inside, green on the skin, "
                     f"orange to red outside (scale \u00b1{lim:.0f} mm). Flagged electrodes are named.</p>")
    parts.append(_gallery(electrode_views(assets, scalp, el, lim, headshape=bundle.arrays.get("headshape_points"))))
    if sd is not None:
        worst = int(np.argmax(np.abs(sd)))
        parts.append(f"<p>Median distance to the skin {np.median(sd) * 1e3:.1f} mm; largest "
                     f"{sd[worst] * 1e3:+.1f} mm at {esc(el.labels[worst])} (outside positive).</p>")
    rows, attrs = [], []
    for i, lab in enumerate(el.labels):
        d = "" if sd is None else f"{sd[i] * 1e3:+.1f}"
        s = "" if el.shift is None else f"{el.shift[i] * 1e3:.1f}"
        rows.append((lab, d, s, ", ".join(el.codes[i]) or "none"))
        attrs.append(f'data-label="{esc(lab)}"' + (' class="flagged"' if el.codes[i] else ""))
    parts.append("<h3>Per electrode</h3>")
    parts.append(table(["label", "distance to skin (mm)", "projected shift (mm)", "findings"], rows,
                       numeric=(1, 2), cls="electrodes", row_attrs=attrs,
                       caption="Distance before projection (outside positive) and how far projection "
                               "moved each electrode; flagged rows are shaded and name their findings."))
    return "".join(parts)


# ------------------------------------------------------------------ layers
def render_layers(bundle: Bundle, assets: Assets) -> str:
    """Cross-sections through the head model's layers with electrodes and sources."""
    from ._report_sections_plots import cross_sections

    meshes = data.layers(bundle)
    sph = data.spheres(bundle)
    scalp = data.scalp(bundle)
    if not meshes and scalp is not None:
        meshes = [scalp]
    if not meshes and sph is None:
        return absent("This bundle stores no head-model layers and no sphere model, so no cross-section "
                      "can be drawn.")
    hm = bundle.manifest.get("head_model") or {}
    if sph is not None:
        centre = sph[0]
    else:
        allv = np.vstack([m.vertices for m in meshes])
        centre = 0.5 * (allv.min(axis=0) + allv.max(axis=0))
    el = data.electrodes(bundle)
    sensors = None if el is None else np.asarray(bundle.arrays["sensor_positions"], float)
    parts = []
    cond = hm.get("conductivities_S_per_m")
    if hm:
        kind = "concentric spheres" if hm.get("kind") == "spheres" else "nested surfaces (boundary elements)"
        roles = ([lay.get("role", "?") for lay in hm.get("layers", [])] if hm.get("kind") != "spheres"
                 else [f"sphere {i + 1}" for i in range(len(cond or []))])
        rows = [(r, fmt(c)) for r, c in zip(roles, cond or [])]
        parts.append(f"<p>Head model: {esc(kind)}, inside to out.</p>")
        if rows:
            parts.append(table(["layer", "conductivity (S/m)"], rows, numeric=(1,)))
    else:
        parts.append(absent("The manifest does not describe the head model; the scalp alone is drawn."))
    parts.append(cross_sections(assets, meshes if sph is None else [m for m in meshes if m.role == "scalp"],
                                sph, centre, sensors, bundle.arrays.get("source_positions")))
    return "".join(parts)


# ------------------------------------------------------------------ cortex
def render_cortex(bundle: Bundle, assets: Assets) -> str:
    """The cortex coloured by the area and by the normal spread of the patch each vertex belongs to."""
    a = bundle.arrays
    areas, spread = a.get("source_areas"), a.get("source_spread")
    if areas is None and spread is None:
        return absent("This bundle stores neither patch areas nor normal spreads.")
    from ._report_sections_views import Colouring, cortex_views, source_cloud_views

    n = len(a["source_positions"])
    facts: list[tuple[str, Any]] = [("patches", n)]
    hemi = a.get("source_hemisphere")
    if hemi is not None:
        facts.append(("left / right / unknown", f"{int(np.sum(hemi == 0))} / {int(np.sum(hemi == 1))} / "
                                                f"{int(np.sum(hemi < 0))}"))
    quantities = []
    if areas is not None:
        mm2 = np.asarray(areas, float) * 1e6
        facts += [("total area", f"{mm2.sum() / 100:.1f} cm\u00b2"),
                  ("patch area, median (5th-95th percentile)",
                   f"{np.median(mm2):.1f} mm\u00b2 ({np.percentile(mm2, 5):.1f}-{np.percentile(mm2, 95):.1f})")]
        quantities.append((mm2, "mm\u00b2", "viridis", "patch area", "mm\u00b2"))
    if spread is not None:
        deg = np.degrees(np.asarray(spread, float))
        facts.append(("normal spread, median (95th percentile)",
                      f"{np.median(deg):.1f}\u00b0 ({np.percentile(deg, 95):.1f}\u00b0)"))
        quantities.append((deg, "deg", "magma_r", "normal spread", "degrees"))
    parts = [_facts(facts)]
    cv, cf, vp = a.get("cortex_vertices"), a.get("cortex_faces"), a.get("source_vertex_patch")
    have_mesh = cv is not None and cf is not None and vp is not None and len(vp) == len(cv)
    if not have_mesh:
        parts.append(absent("This bundle stores no cortex mesh with its patch map; the patch centres are "
                            "drawn instead."))
    if have_mesh:
        ok = vp >= 0
        paints = []
        for values, title, cmap, what, unit in quantities:
            per_vertex = np.full(len(cv), np.nan)
            per_vertex[ok] = values[vp[ok]]
            paints.append(Colouring(per_vertex, title, cmap, what, unit))
        galleries = cortex_views(assets, data.Mesh("cortex", cv, cf), paints)
    else:
        galleries = source_cloud_views(assets, np.asarray(a["source_positions"], float),
                                       [Colouring(*q) for q in quantities])
    for (_, _, _, what, unit), figs in zip(quantities, galleries):
        parts.append(f"<h3>{esc(what.capitalize())} ({esc(unit)})</h3>")
        parts.append(_gallery(figs))
    return "".join(parts)


# ------------------------------------------------------------------ passport
def render_passport(bundle: Bundle, assets: Assets) -> str:
    """Spectrum, depth profile and resolution from the passport's stored arrays and metrics."""
    from . import _report_sections_plots as plots

    a = bundle.arrays
    lf = a["leadfield"]
    s, where = data.singular_values(bundle)
    rank = data.numerical_rank(s, lf.shape)
    cond, how = data.condition_number(bundle)
    parts = [f'<p>Lead field: <span id="lf-shape">{lf.shape[0]} electrodes \u00d7 {lf.shape[1]} sources'
             f'</span>, numerical rank <span id="lf-rank">{rank}</span>, condition number '
             f'<span id="lf-cond" data-value="{cond!r}">{cond:.4g}</span> ({esc(how)}).</p>',
             plots.spectrum(assets, s, max(rank, 1), cond, where)]
    depth, norms = data.passport_array(bundle, "depth"), data.passport_array(bundle, "column_norm")
    if depth is not None and norms is not None and len(depth) == len(norms):
        measure = data.find_metric(bundle.manifest.get("passport") or {}, "depth_measure")
        parts.append(plots.depth_profile(assets, depth, norms, measure=str(measure[1]) if measure else ""))
    else:
        parts.append(absent("The passport stored no source depths with column norms, so no depth profile "
                            "is drawn."))
    ple, sd = data.passport_array(bundle, "ple"), data.passport_array(bundle, "sd")
    if ple is not None or sd is not None:
        parts.append(plots.resolution(assets, ple, sd))
    else:
        parts.append(absent("The passport stored no resolution metrics (localisation error, dispersion)."))
    passport = bundle.manifest.get("passport") or {}
    rows = [(check, key, fmt(v) if not isinstance(v, (list, dict)) else json.dumps(v)[:80])
            for check in sorted(passport) if isinstance(passport[check], dict)
            for key, v in flatten(passport[check])]
    if rows:
        parts.append("<h3>Passport figures</h3>")
        parts.append(table(["check", "figure", "value"], rows, numeric=(2,)))
    else:
        parts.append(absent("The manifest carries no passport figures."))
    return "".join(parts)


# ------------------------------------------------------------------ findings
def render_findings(bundle: Bundle, assets: Assets) -> str:
    """Every finding, worst first, severity by shape and word."""
    findings = sorted(bundle.findings, key=lambda f: {"fail": 0, "warn": 1, "info": 2}[f.severity])
    if not findings:
        return "<p>No check reported anything.</p>"
    rows = [(severity_badge(f.severity), f.code, f.message, ", ".join(f.subjects[:12])
             + (" \u2026" if len(f.subjects) > 12 else ""), f.source) for f in findings]
    return table(["severity", "code", "what was found", "concerns", "from"], rows, cls="findings")


# ------------------------------------------------------------------ provenance
def _value(v: Any) -> str:
    return fmt(v) if not isinstance(v, (list, dict)) else json.dumps(v)


def render_provenance(bundle: Bundle, assets: Assets) -> str:
    """Input files and hashes, plugins and versions, parameters, kit version."""
    man = bundle.manifest
    kit = man.get("kit", {})
    fwd = man.get("forward") or {}
    if "solver" not in fwd and isinstance(fwd.get("forward"), dict):  # the state nested one level down
        fwd = fwd["forward"]
    facts: list[tuple[str, Any]] = [
        ("kit", f"{kit.get('name', '?')} {kit.get('version', '?')}"),
        ("bundle format", f"{man.get('format')} schema {man.get('schema_version')}"),
        ("written", man.get("created_utc", "unknown")), ("frame", man.get("frame", "?")),
        ("forward solver", f"{fwd.get('solver', 'not recorded')}, reference {fwd.get('reference', '?')}"),
    ]
    tr = man.get("transform")
    if tr:
        res = ", ".join(f"{k} {_value(v)}" for k, v in flatten(tr.get("residuals") or {}))
        facts.append(("head \u2192 anatomy transform", f"{tr.get('method', '?')} ({tr.get('from')} \u2192 "
                                                       f"{tr.get('to')}){'; ' + res if res else ''}"))
    align = man.get("alignment") or {}
    if align:
        facts.append(("alignment", f"{align.get('method', '?')}: " + ", ".join(
            f"{k} {_value(v)}" for k, v in flatten(align.get("metrics") or {}))))
    parts = [_facts(facts), "<h3>Input files</h3>"]
    inputs = man.get("inputs") or []
    if inputs:
        parts.append(table(["role", "file", "reader", "sha256"],
                           [(i.get("role", ""), i.get("file", ""), i.get("reader", ""),
                             Markup(f'<span class="hash-text">{esc(i.get("sha256", ""))}</span>')) for i in inputs],
                           cls="inputs"))
    else:
        parts.append(absent("The manifest lists no input files."))
    parts.append("<h3>Plugins</h3>")
    plugins = man.get("plugins") or []
    parts.append(table(["plugin", "distribution", "version"],
                       [(p.get("name", ""), p.get("distribution", ""), p.get("version", "")) for p in plugins])
                 if plugins else absent("The manifest lists no plugins."))
    parts.append("<h3>Parameters</h3>")
    params = flatten(man.get("parameters") or {}) + flatten(fwd.get("params") or {}, "forward.")
    parts.append(table(["parameter", "value"], [(k, _value(v)) for k, v in params])
                 if params else absent("The manifest records no parameters."))
    return "".join(parts)


SECTIONS = (
    ReportSection(name="electrodes", title="Electrodes on the scalp", order=10, render=render_electrodes,
                  description="scalp views coloured by distance to the skin, and a per-electrode table"),
    ReportSection(name="layers", title="Head layers", order=20, render=render_layers,
                  description="cross-sections through the head model with electrodes and sources"),
    ReportSection(name="cortex", title="Cortex and source patches", order=30, render=render_cortex,
                  description="cortex coloured by patch area and by normal spread"),
    ReportSection(name="passport", title="Lead-field passport", order=40, render=render_passport,
                  description="singular spectrum, depth profile and resolution"),
    ReportSection(name="findings", title="All findings", order=80, render=render_findings,
                  description="every finding, worst first"),
    ReportSection(name="provenance", title="Provenance", order=90, render=render_provenance,
                  description="input files and hashes, plugins and versions, parameters"),
)


@hookimpl
def headprep_register_report_sections() -> list[ReportSection]:
    return list(SECTIONS)
