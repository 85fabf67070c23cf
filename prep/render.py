"""Off-screen pictures: pyvista for 3D scenes, matplotlib for plots.

Import this module (not pyvista directly) in code that renders: it sets the
environment for off-screen EGL rendering before VTK loads (LIBRARIES.md:
``VTK_DEFAULT_OPENGL_WINDOW=vtkEGLRenderWindow``, ``PYVISTA_OFF_SCREEN=true``),
and it writes images atomically.
"""
from __future__ import annotations

import io
import os
from pathlib import Path
from typing import Any

from .atomic import write_bytes_atomic


def _prepare_env() -> None:
    os.environ.setdefault("PYVISTA_OFF_SCREEN", "true")
    if not os.environ.get("DISPLAY"):
        os.environ.setdefault("VTK_DEFAULT_OPENGL_WINDOW", "vtkEGLRenderWindow")
    os.environ.setdefault("MPLBACKEND", "Agg")


def plotter(window_size: tuple[int, int] = (900, 700)) -> Any:
    """A fresh off-screen ``pyvista.Plotter`` with a white background."""
    _prepare_env()
    import pyvista as pv

    p = pv.Plotter(off_screen=True, window_size=list(window_size))
    p.set_background("white")
    return p


def save_plotter_png(p: Any, path: str | os.PathLike[str]) -> Path:
    """Render ``p`` to a PNG at ``path`` atomically and close it."""
    import numpy as np
    from matplotlib import image as mpimg

    try:
        img = p.screenshot(return_img=True)
    finally:
        p.close()
    buf = io.BytesIO()
    mpimg.imsave(buf, np.asarray(img), format="png")
    write_bytes_atomic(path, buf.getvalue())
    return Path(path)


def figure(**kwargs: Any) -> Any:
    """A matplotlib Figure not attached to any GUI (Agg)."""
    _prepare_env()
    from matplotlib.figure import Figure

    return Figure(**kwargs)


def save_figure_png(fig: Any, path: str | os.PathLike[str], dpi: int = 110) -> Path:
    """Save a matplotlib figure to PNG atomically."""
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=dpi, bbox_inches="tight")
    write_bytes_atomic(path, buf.getvalue())
    return Path(path)
