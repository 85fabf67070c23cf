"""Plots of the report (matplotlib through :mod:`prep.render`): cross-sections and passport.

Cross-sections cut each layer mesh by a plane with
``trimesh.intersections.mesh_plane`` (reference library) and draw the
segments in that plane; a concentric-sphere model is drawn as the circles
its spheres cut. Electrodes and sources within a slab around each plane are
drawn on top.
"""
from __future__ import annotations

from collections.abc import Sequence

from typing import Protocol

import numpy as np
from matplotlib.ticker import NullLocator

from prep import render
from prep.report import Assets


class Mesh(Protocol):
    """What is drawn of a mesh (``_report_sections_data.Mesh``; helpers do not import each other)."""

    role: str
    vertices: np.ndarray  # (n, 3) float64, metres
    faces: np.ndarray  # (k, 3) int64

#: plane name -> (normal axis, horizontal axis, vertical axis, horizontal words, vertical words)
PLANES = {
    "sagittal": (0, 1, 2, ("posterior", "anterior"), ("inferior", "superior")),
    "coronal": (1, 0, 2, ("left", "right"), ("inferior", "superior")),
    "axial": (2, 0, 1, ("left", "right"), ("posterior", "anterior")),
}
LAYER_COLOURS = ("#7a4e9c", "#4f7f3a", "#b5651d", "#2f6f8f", "#8f2f4f", "#6b6b6b")
SENSOR_SLAB_M = 0.012
SOURCE_SLAB_M = 0.004


def _segments(mesh: Mesh, axis: int, offset: float) -> np.ndarray:
    """(k, 2, 3) segments where the plane ``x[axis] = offset`` cuts ``mesh`` (metres)."""
    import trimesh

    tm = trimesh.Trimesh(vertices=np.asarray(mesh.vertices), faces=np.asarray(mesh.faces), process=False)
    normal = np.zeros(3)
    normal[axis] = 1.0
    origin = np.zeros(3)
    origin[axis] = offset
    lines = trimesh.intersections.mesh_plane(tm, plane_normal=normal, plane_origin=origin)
    return np.asarray(lines, dtype=float).reshape(-1, 2, 3)


def cross_sections(assets: Assets, meshes: Sequence[Mesh], spheres: tuple[np.ndarray, np.ndarray] | None,
                   centre: np.ndarray, sensors: np.ndarray | None, sources: np.ndarray | None) -> str:
    """One figure with sagittal, coronal and axial sections through ``centre`` (m)."""
    from matplotlib.collections import LineCollection
    from matplotlib.lines import Line2D

    fig = render.figure(figsize=(12.0, 4.4))
    axes = fig.subplots(1, 3)
    handles, seen = [], set()
    described = []
    for ax, (plane, (n_ax, h_ax, v_ax, h_words, v_words)) in zip(axes, PLANES.items()):
        offset = float(centre[n_ax])
        if spheres is not None:
            ctr, radii = spheres
            d = offset - ctr[n_ax]
            t = np.linspace(0, 2 * np.pi, 181)
            for i, r in enumerate(radii):
                if r <= abs(d):
                    continue
                rr = np.sqrt(r * r - d * d)
                colour = LAYER_COLOURS[i % len(LAYER_COLOURS)]
                ax.plot((ctr[h_ax] + rr * np.cos(t)) * 1e3, (ctr[v_ax] + rr * np.sin(t)) * 1e3,
                        color=colour, lw=1.4)
                name = f"sphere {i + 1} (r = {r * 1e3:.0f} mm)"
                if name not in seen:
                    seen.add(name)
                    handles.append(Line2D([], [], color=colour, lw=1.6, label=name))
        first = 0 if spheres is None else len(spheres[1])  # meshes take the colours after the spheres'
        for i, mesh in enumerate(meshes):
            seg = _segments(mesh, n_ax, offset)
            colour = LAYER_COLOURS[(first + i) % len(LAYER_COLOURS)]
            if len(seg):
                ax.add_collection(LineCollection(seg[:, :, [h_ax, v_ax]] * 1e3, colors=colour, linewidths=1.3))
            if mesh.role not in seen:
                seen.add(mesh.role)
                handles.append(Line2D([], [], color=colour, lw=1.6, label=mesh.role.replace("_", " ")))
        n_sens = n_src = 0
        if sources is not None and len(sources):
            near = np.abs(sources[:, n_ax] - offset) < SOURCE_SLAB_M
            n_src = int(near.sum())
            ax.scatter(sources[near, h_ax] * 1e3, sources[near, v_ax] * 1e3, s=5, c="#4a4a4a", lw=0)
        if sensors is not None and len(sensors):
            near = np.abs(sensors[:, n_ax] - offset) < SENSOR_SLAB_M
            n_sens = int(near.sum())
            ax.scatter(sensors[near, h_ax] * 1e3, sensors[near, v_ax] * 1e3, s=26, marker="D",
                       facecolor="#fffdf7", edgecolor="#22303a", lw=1.0, zorder=3)
        ax.set_aspect("equal")
        ax.autoscale_view()
        ax.set_title(f"{plane} at {'xyz'[n_ax]} = {offset * 1e3:.0f} mm", fontsize=11)
        ax.set_xlabel(f"{h_words[0]} \u2190 {'xyz'[h_ax]} (mm) \u2192 {h_words[1]}", fontsize=9)
        ax.set_ylabel(f"{v_words[0]} \u2190 {'xyz'[v_ax]} (mm) \u2192 {v_words[1]}", fontsize=9)
        ax.tick_params(labelsize=8)
        ax.grid(True, color="#eeeeee", lw=0.6)
        described.append(f"{plane} ({n_sens} electrodes, {n_src} sources near the plane)")
    handles.append(Line2D([], [], ls="", marker="D", mfc="#fffdf7", mec="#22303a",
                          label=f"electrodes within {SENSOR_SLAB_M * 1e3:.0f} mm"))
    handles.append(Line2D([], [], ls="", marker="o", ms=3, color="#4a4a4a",
                          label=f"sources within {SOURCE_SLAB_M * 1e3:.0f} mm"))
    fig.legend(handles=handles, loc="lower center", ncol=min(len(handles), 6), fontsize=9, frameon=False)
    fig.subplots_adjust(left=0.05, right=0.99, bottom=0.24, top=0.93, wspace=0.28)
    names = ([f"{len(spheres[1])} concentric spheres"] if spheres is not None else []) + [
        m.role.replace("_", " ") for m in meshes]
    alt = (f"Three cross-sections through the head model ({', '.join(names)}): "
           f"{'; '.join(described)}. Electrodes are diamonds, sources small dots.")
    return assets.figure(fig, alt)


def spectrum(assets: Assets, s: np.ndarray, rank: int, cond: float, where: str) -> str:
    """Singular values over the largest, log scale, with the numerical rank marked."""
    fig = render.figure(figsize=(5.6, 3.6))
    ax = fig.subplots()
    rel = s / s[0]
    idx = np.arange(1, len(s) + 1)
    ax.semilogy(idx[:rank], rel[:rank], marker="o", ms=3, lw=1.2, color="#2f6f8f", label="within rank")
    floor = max(float(rel[rank - 1]) / 10.0, 1e-18)
    if rank < len(s):  # the null direction(s), e.g. of the reference, drawn at the floor: off scale
        ax.semilogy(idx[rank:], np.full(len(s) - rank, floor), marker="v", ms=5, lw=0, color="#9b2f25",
                    label=f"below numerical rank ({len(s) - rank}, off scale)")
    ax.set_ylim(floor / 1.5, 1.5)
    ax.yaxis.set_minor_locator(NullLocator())
    fig.subplots_adjust(left=0.15, right=0.97, bottom=0.14, top=0.9)
    ax.set_xlabel("component")
    ax.set_ylabel("singular value / largest")
    ax.set_title(f"singular spectrum (condition number {cond:.3g})", fontsize=11)
    ax.grid(True, which="both", color="#eeeeee", lw=0.6)
    ax.legend(fontsize=8, frameon=False)
    alt = (f"Singular values of the lead field relative to the largest, on a log scale: {len(s)} values, "
           f"{rank} within the numerical rank, falling to {rel[rank - 1]:.2g}; condition number "
           f"{cond:.3g}, {where}.")
    return assets.figure(fig, alt)


def depth_profile(assets: Assets, depth: np.ndarray, norms: np.ndarray, measure: str = "") -> str:
    """Column norm against source depth (log scale when it spans decades), with decile medians.

    ``measure`` names how the passport measured depth (e.g. ``nearest-sensor``).
    """
    fig = render.figure(figsize=(5.6, 3.6))
    ax = fig.subplots()
    d = depth * 1e3
    ax.scatter(d, norms, s=9, c="#2f6f8f", alpha=0.5, lw=0)
    edges = np.unique(np.percentile(d, np.linspace(0, 100, 11)))
    centres, med = [], []
    for lo, hi in zip(edges[:-1], edges[1:]):
        sel = (d >= lo) & (d <= hi)
        if sel.any():
            centres.append(0.5 * (lo + hi))
            med.append(np.median(norms[sel]))
    ax.plot(centres, med, color="#b5651d", lw=2, label="median per depth decile")
    if np.all(norms > 0) and norms.max() > 20 * norms.min():
        ax.set_yscale("log")
        ax.yaxis.set_minor_locator(NullLocator())
    fig.subplots_adjust(left=0.19, right=0.97, bottom=0.14, top=0.9)
    ax.set_xlabel(f"source depth (mm{', ' + measure.replace('-', ' ') if measure else ''})")
    ax.set_ylabel("lead-field column norm, V/(A*m)")
    ax.set_title("depth profile", fontsize=11)
    ax.grid(True, which="both", color="#eeeeee", lw=0.6)
    ax.legend(fontsize=8, frameon=False)
    ratio = (med[0] / med[-1]) if med and med[-1] > 0 else float("nan")
    alt = (f"Lead-field column norm against source depth for {len(d)} sources, depth {d.min():.0f} to "
           f"{d.max():.0f} mm; the shallowest decile's median is {ratio:.3g} times the deepest's.")
    return assets.figure(fig, alt)


def resolution(assets: Assets, ple: np.ndarray | None, sd: np.ndarray | None) -> str:
    """Histograms of peak localisation error and spatial dispersion (mm)."""
    present = [(n, v) for n, v in (("peak localisation error", ple), ("spatial dispersion", sd)) if v is not None]
    fig = render.figure(figsize=(5.6 * len(present), 3.6))
    axes = np.atleast_1d(fig.subplots(1, len(present)))
    fig.subplots_adjust(left=0.08, right=0.98, bottom=0.14, top=0.9, wspace=0.22)
    words = []
    for ax, (name, v) in zip(axes, present):
        mm = np.asarray(v, float) * 1e3
        ax.hist(mm[np.isfinite(mm)], bins=30, color="#7a4e9c", alpha=0.8)
        med = float(np.nanmedian(mm))
        p90 = float(np.nanpercentile(mm, 90))
        ax.axvline(med, color="#22303a", lw=1.5, ls="--", label=f"median {med:.1f} mm")
        ax.axvline(p90, color="#b5651d", lw=1.5, ls=":", label=f"90th percentile {p90:.1f} mm")
        ax.set_xlabel(f"{name} (mm)")
        ax.set_ylabel("sources")
        ax.set_title(name, fontsize=11)
        ax.legend(fontsize=8, frameon=False)
        words.append(f"{name} median {med:.1f} mm, 90th percentile {p90:.1f} mm")
    alt = f"Histograms of the minimum-norm point-spread functions over {len(present[0][1])} sources: " \
          + "; ".join(words) + "."
    return assets.figure(fig, alt)
