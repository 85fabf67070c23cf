"""3D pictures of the report (pyvista, off-screen through :mod:`prep.render`).

The anatomy frame is RAS (+x right, +y anterior, +z up), so the named views
put the camera on those axes. One plotter serves all views of a scene: the
camera moves and each view is captured, which costs one render per view.
"""
from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import Any, Protocol

import numpy as np

from prep import render
from prep.report import Assets


class Mesh(Protocol):
    """What is drawn of a mesh (``_report_sections_data.Mesh``; helpers do not import each other)."""

    role: str
    vertices: np.ndarray  # (n, 3) float64, metres
    faces: np.ndarray  # (k, 3) int64

#: view name -> (camera direction from the centre, view-up)
VIEWS: dict[str, tuple[tuple[float, float, float], tuple[float, float, float]]] = {
    "front": ((0.0, 1.0, 0.0), (0.0, 0.0, 1.0)),
    "left": ((-1.0, 0.0, 0.0), (0.0, 0.0, 1.0)),
    "right": ((1.0, 0.0, 0.0), (0.0, 0.0, 1.0)),
    "top": ((0.0, 0.0, 1.0), (0.0, 1.0, 0.0)),
}
SKIN = "#e8ddd0"
#: signed distance to the skin: deep blue inside, green on the skin, orange to brick red outside
DISTANCE_COLOURS = ("#2b3f8c", "#4f8fc0", "#2e8b57", "#e0a030", "#a3281a")


def distance_cmap():  # noqa: ANN201 - matplotlib Colormap
    """The report's own diverging scale for signed distance (zero is green, not white, to stand off the skin)."""
    from matplotlib.colors import LinearSegmentedColormap

    return LinearSegmentedColormap.from_list("headprep_distance", DISTANCE_COLOURS)
CORTEX_NAN = "#c9c9c9"
VIEW_SIZE = (440, 380)
DISTANCE_BAR = "mm"


def _polydata(mesh: Mesh):  # noqa: ANN202 - pyvista.PolyData
    import pyvista as pv

    faces = np.hstack([np.full((len(mesh.faces), 1), 3, dtype=np.int64), mesh.faces]).ravel()
    return pv.PolyData(np.asarray(mesh.vertices) * 1e3, faces)


def _look(p, centre_mm: np.ndarray, radius_mm: float, view: str) -> None:  # noqa: ANN001
    direction, up = VIEWS[view]
    d, u = np.asarray(direction), np.asarray(up)
    # shift the view so the object sits left of the colour bar on the right
    focal = centre_mm + np.cross(-d, u) * 0.22 * radius_mm
    pos = focal + 3.4 * radius_mm * d
    p.camera_position = [tuple(pos), tuple(focal), up]
    p.camera.view_angle = 30.0
    p.reset_camera_clipping_range()
    p.render()


def _start(p) -> None:  # noqa: ANN001
    """Show once off-screen so later ``render()`` calls draw (pyvista renders nothing before ``show``).

    Multisampling is off: with software EGL (Mesa llvmpipe) 4x multisampling
    made each view of a 60k-vertex cortex about 3x slower, and FXAA is not
    available with EGL builds of VTK (it falls back to costlier SSAA).
    """
    p.render_window.SetMultiSamples(0)
    p.show(auto_close=False, interactive=False)


def electrode_views(assets: Assets, scalp: Mesh | None, el: Any, limit_mm: float,
                    views: Sequence[str] = ("front", "left", "right", "top"),
                    headshape: np.ndarray | None = None) -> list[str]:
    """One ``<figure>`` per view: the scalp with electrodes coloured by signed distance (mm).

    ``el`` is an ``Electrodes`` record of ``_report_sections_data`` (labels, drawn
    positions, signed distances, flagged indices).
    Flagged electrodes are labelled by name. ``limit_mm`` is the symmetric colour limit.
    ``headshape`` (h, 3) metres, if given, is drawn as small dark points.
    """
    import pyvista as pv

    pts = el.drawn * 1e3
    p = render.plotter(window_size=VIEW_SIZE)
    if scalp is not None:
        head = _polydata(scalp)
        p.add_mesh(head, color=SKIN, smooth_shading=True, specular=0.1, ambient=0.25)
        centre, radius = np.asarray(head.center), float(head.length) / 2.0
    else:
        centre = pts.mean(axis=0)
        radius = float(np.ptp(pts, axis=0).max()) / 2.0 or 100.0
    if headshape is not None and len(headshape):
        p.add_mesh(pv.PolyData(np.asarray(headshape) * 1e3), color="#4a4a4a", point_size=3,
                   render_points_as_spheres=True)
    dot = pv.Sphere(radius=max(radius * 0.035, 2.0), theta_resolution=12, phi_resolution=12)
    cloud = pv.PolyData(pts)
    if el.signed_distance is not None:
        cloud[DISTANCE_BAR] = el.signed_distance * 1e3
        glyphs = cloud.glyph(geom=dot, scale=False, orient=False)
        p.add_mesh(glyphs, scalars=DISTANCE_BAR, cmap=distance_cmap(),
                   clim=(-limit_mm, limit_mm), show_scalar_bar=True,
                   scalar_bar_args={**_bar(DISTANCE_BAR), "fmt": "%.0f", "n_labels": 5})
    else:
        p.add_mesh(cloud.glyph(geom=dot, scale=False, orient=False), color="#3c5a73")
    flagged = el.flagged
    if flagged:
        p.add_point_labels(pts[flagged], [el.labels[i] for i in flagged], font_size=13, point_size=1,
                           shape_color="#fffdf7", shape_opacity=0.85, text_color="#9b2f25",
                           always_visible=True, show_points=False)
    dist = "" if el.signed_distance is None else (
        f" coloured by signed distance to the skin ({el.signed_distance.min() * 1e3:.1f} to "
        f"{el.signed_distance.max() * 1e3:.1f} mm)")
    named = ", ".join(el.labels[i] for i in flagged)
    flag_text = f"; flagged and labelled: {named}" if flagged else "; no electrode is flagged"
    if headshape is not None and len(headshape):
        flag_text += f"; {len(headshape)} head-shape points as small dark dots"
    what = "Scalp" if scalp is not None else "Head"
    try:
        _start(p)
        return _shots(assets, p, centre, radius, views,
                      lambda v: f"{what} seen from the {v} with {len(pts)} {el.drawn_kind} electrode "
                                f"positions{dist}{flag_text}.")
    finally:
        p.close()


@dataclass(frozen=True)
class Colouring:
    """One quantity to paint on a surface: values per vertex (NaN where none) and how to name it."""

    values: np.ndarray
    title: str
    cmap: str
    what: str
    unit: str


def _bar(title: str) -> dict:
    return {"title": title, "n_labels": 4, "fmt": "%.3g", "color": "#22303a", "vertical": True,
            "position_x": 0.86, "position_y": 0.12, "width": 0.07, "height": 0.7,
            "title_font_size": 14, "label_font_size": 13}


def _shots(assets: Assets, p, centre: np.ndarray, radius: float, views: Sequence[str],  # noqa: ANN001
           describe: Callable[[str], str]) -> list[str]:
    """Capture each named view of plotter ``p``; ``describe(view)`` gives its alt text."""
    out = []
    for view in views:
        _look(p, centre, radius, view)
        out.append(assets.scene(p, describe(view), caption=f"{view} view"))
    return out


def painted_views(assets: Assets, dataset, colourings: Sequence[Colouring], *, subject: str,  # noqa: ANN001
                  views: Sequence[str] = ("left", "top", "right"), **mesh_kw: Any) -> list[list[str]]:
    """Views of a pyvista dataset (mm) for each colouring, in one plotter repainted per colouring.

    ``subject`` names what is shown in the alt text (``"Cortex"``, ``"Patch centres"``).
    """
    centre, radius = np.asarray(dataset.center), float(dataset.length) / 2.0 or 50.0
    p = render.plotter(window_size=VIEW_SIZE)
    out: list[list[str]] = []
    try:
        _start(p)
        for c in colourings:
            finite = c.values[np.isfinite(c.values)]
            lo, hi = np.percentile(finite, [2, 98]) if finite.size else (0.0, 1.0)
            hi = hi if hi > lo else lo + 1.0
            painted = dataset.copy(deep=False)
            painted[c.title] = c.values
            actor = p.add_mesh(painted, scalars=c.title, cmap=c.cmap, clim=(float(lo), float(hi)),
                               nan_color=CORTEX_NAN, show_scalar_bar=True, scalar_bar_args=_bar(c.title),
                               **mesh_kw)
            rng = f"{finite.min():.3g} to {finite.max():.3g} {c.unit}" if finite.size else "no values"
            grey = "; grey where a vertex belongs to no patch" if np.isnan(c.values).any() else ""
            out.append(_shots(assets, p, centre, radius, views,
                              lambda v, c=c, rng=rng, grey=grey:
                              f"{subject} seen from the {v}, coloured by {c.what} ({rng}){grey}."))
            p.remove_actor(actor)
            p.remove_scalar_bar(c.title)
    finally:
        p.close()
    return out


def cortex_views(assets: Assets, cortex: Mesh, colourings: Sequence[Colouring]) -> list[list[str]]:
    """The cortex painted per vertex by each colouring (NaN where no patch: grey).

    Vertex normals are computed once for smooth shading (pyvista's ``smooth_shading``
    would recompute them per colouring: about 2 s each for 60k vertices here).
    """
    surf = _polydata(cortex).compute_normals(cell_normals=False, point_normals=True, split_vertices=False,
                                             consistent_normals=False, auto_orient_normals=False)
    return painted_views(assets, surf, colourings, subject="Cortex")


def source_cloud_views(assets: Assets, positions: np.ndarray, colourings: Sequence[Colouring]) -> list[list[str]]:
    """Without a cortex mesh: the patch centres (m) as dots painted by each colouring."""
    import pyvista as pv

    return painted_views(assets, pv.PolyData(np.asarray(positions) * 1e3), colourings, subject="Patch centres",
                         views=("left", "top"), render_points_as_spheres=True, point_size=7)
