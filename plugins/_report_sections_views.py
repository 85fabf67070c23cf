"""3D pictures of the report (pyvista, off-screen through :mod:`prep.render`).

The anatomy frame is RAS (+x right, +y anterior, +z up), so the named views
put the camera on those axes. One plotter serves all views of a scene: the
camera moves and each view is captured, which costs one render per view.
"""
from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from prep import render
from prep.report import Assets

from ._report_sections_data import Electrodes, Mesh

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
    """Show once off-screen so later ``render()`` calls draw (pyvista renders nothing before ``show``)."""
    p.show(auto_close=False, interactive=False)


def electrode_views(assets: Assets, scalp: Mesh | None, el: Electrodes, limit_mm: float,
                    views: Sequence[str] = ("front", "left", "right", "top")) -> list[str]:
    """One ``<figure>`` per view: the scalp with electrodes coloured by signed distance (mm).

    Flagged electrodes are labelled by name. ``limit_mm`` is the symmetric colour limit.
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
    out = []
    try:
        _start(p)
        for view in views:
            _look(p, centre, radius, view)
            alt = (f"{'Scalp' if scalp is not None else 'Head'} seen from the {view} with {len(pts)} "
                   f"{el.drawn_kind} electrode positions{dist}{flag_text}.")
            out.append(assets.scene(p, alt, caption=f"{view} view"))
    finally:
        p.close()
    return out


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


def cortex_views(assets: Assets, cortex: Mesh, colourings: Sequence[Colouring],
                 views: Sequence[str] = ("left", "top", "right")) -> list[list[str]]:
    """Views of the cortex for each colouring (one plotter, repainted), grey where no patch."""
    surf = _polydata(cortex)
    centre, radius = np.asarray(surf.center), float(surf.length) / 2.0
    p = render.plotter(window_size=VIEW_SIZE)
    out: list[list[str]] = []
    try:
        _start(p)
        for c in colourings:
            finite = c.values[np.isfinite(c.values)]
            lo, hi = np.percentile(finite, [2, 98]) if finite.size else (0.0, 1.0)
            hi = hi if hi > lo else lo + 1.0
            painted = surf.copy(deep=False)
            painted[c.title] = c.values
            actor = p.add_mesh(painted, scalars=c.title, cmap=c.cmap, clim=(float(lo), float(hi)),
                               nan_color=CORTEX_NAN, smooth_shading=True, show_scalar_bar=True,
                               scalar_bar_args=_bar(c.title))
            rng = f"{finite.min():.3g} to {finite.max():.3g} {c.unit}" if finite.size else "no values"
            figs = []
            for view in views:
                _look(p, centre, radius, view)
                alt = (f"Cortex seen from the {view}, coloured by {c.what} ({rng}); grey where a vertex "
                       f"belongs to no patch.")
                figs.append(assets.scene(p, alt, caption=f"{view} view"))
            out.append(figs)
            p.remove_actor(actor)
            p.remove_scalar_bar(c.title)
    finally:
        p.close()
    return out


def source_cloud_views(assets: Assets, positions: np.ndarray, values: np.ndarray, *, title: str,
                       cmap: str, what: str, unit: str, views: Sequence[str] = ("left", "top")) -> list[str]:
    """Without a cortex mesh: the patch centres as dots coloured by ``values``."""
    import pyvista as pv

    pts = positions * 1e3
    cloud = pv.PolyData(pts)
    cloud[title] = values
    p = render.plotter(window_size=VIEW_SIZE)
    p.add_mesh(cloud, scalars=title, cmap=cmap, render_points_as_spheres=True, point_size=7,
               scalar_bar_args=_bar(title))
    centre = pts.mean(axis=0)
    radius = float(np.ptp(pts, axis=0).max()) / 2.0 or 50.0
    out = []
    try:
        _start(p)
        for view in views:
            _look(p, centre, radius, view)
            alt = (f"Patch centres seen from the {view}, coloured by {what} "
                   f"({np.nanmin(values):.3g} to {np.nanmax(values):.3g} {unit}).")
            out.append(assets.scene(p, alt, caption=f"{view} view"))
    finally:
        p.close()
    return out
