"""Arcs over a closed (or top-closed) surface, cut by a plane and sampled by rays.

The percentage rules of the 10-20 family measure distances along the scalp
between landmarks. We approximate each such path by a *plane arc*: the curve
where a plane through three points (start, a point it must pass, end) cuts the
scalp, traced by rays cast from an interior origin in that plane. For a
sphere the plane arcs through the centre are great circles, i.e. the geodesics.

Pure functions on a :class:`trimesh.Trimesh`; lengths in the mesh's unit (metres).
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import trimesh

from .._typing import FloatArray

__all__ = ["PlaneArc", "plane_arc", "surface_hits"]


def _unit(v: np.ndarray) -> np.ndarray:
    n = np.linalg.norm(v)
    if n == 0 or not np.isfinite(n):
        raise ValueError("zero or non-finite direction")
    return v / n


def surface_hits(mesh: trimesh.Trimesh, origin: np.ndarray, directions: np.ndarray) -> FloatArray:
    """Farthest intersection of rays from ``origin`` with ``mesh``.

    Parameters
    ----------
    mesh : trimesh.Trimesh
    origin : (3,) float64
    directions : (k, 3) float64, unit

    Returns
    -------
    (k, 3) float64
        Hit points; NaN rows where a ray misses.
    """
    k = len(directions)
    origins = np.broadcast_to(origin, (k, 3)).copy()
    locs, ray_idx, _ = mesh.ray.intersects_location(origins, directions, multiple_hits=True)
    out = np.full((k, 3), np.nan)
    if len(locs):
        dist = np.einsum("ij,ij->i", locs - origin, directions[ray_idx])
        order = np.lexsort((dist, ray_idx))  # per ray, farthest last
        last = np.r_[ray_idx[order][1:] != ray_idx[order][:-1], True]
        out[ray_idx[order][last]] = locs[order][last]
    return out


@dataclass(frozen=True)
class PlaneArc:
    """A traced arc: points on the surface with their angles and arc lengths.

    Attributes
    ----------
    origin : (3,) float64
        Ray origin, in the plane.
    u, w : (3,) float64
        Orthonormal in-plane axes: ``u`` toward the start, ``w`` toward the side of ``via``.
    angles : (k,) float64, radians, from 0 (start) to the end's angle
    points : (k, 3) float64, on the surface
    lengths : (k,) float64, cumulative arc length from the start
    """

    mesh: trimesh.Trimesh
    origin: FloatArray
    u: FloatArray
    w: FloatArray
    angles: FloatArray
    points: FloatArray
    lengths: FloatArray

    @property
    def length(self) -> float:
        return float(self.lengths[-1])

    def _cast(self, angles: np.ndarray) -> FloatArray:
        dirs = np.cos(angles)[:, None] * self.u + np.sin(angles)[:, None] * self.w
        return surface_hits(self.mesh, self.origin, dirs)

    def at_fractions(self, fractions: np.ndarray, *, lo: float = 0.0, hi: float | None = None) -> FloatArray:
        """Surface points at ``fractions`` (k,) of the arc length between lengths ``lo`` and ``hi``."""
        hi = self.length if hi is None else hi
        s = lo + np.asarray(fractions, dtype=float) * (hi - lo)
        return self._cast(np.interp(s, self.lengths, self.angles))

    def length_at(self, point: np.ndarray) -> float:
        """Arc length from the start to the arc point nearest ``point`` (by angle in the plane)."""
        d = point - self.origin
        ang = np.arctan2(d @ self.w, d @ self.u) % (2 * np.pi)
        if ang > self.angles[-1] and (2 * np.pi - ang) < (ang - self.angles[-1]):
            ang = 0.0  # just before the start: clamp to it, not to the end
        return float(np.interp(ang, self.angles, self.lengths))


def plane_arc(mesh: trimesh.Trimesh, start: np.ndarray, end: np.ndarray, via: np.ndarray | None,
              centre: np.ndarray, *, samples: int = 361) -> PlaneArc:
    """Trace the arc from ``start`` to ``end`` passing ``via`` on ``mesh``.

    Parameters
    ----------
    mesh : trimesh.Trimesh
        The scalp, star-shaped about ``centre`` over the arc.
    start, end : (3,) float64
        Ends (near the surface).
    via : (3,) float64 or None
        A point the arc passes (fixes the plane and the side); None: the plane
        through ``start``, ``end`` and ``centre``, the shorter way round.
    centre : (3,) float64
        A point well inside the head; projected onto the plane as ray origin.
    samples : int
        Rays cast along the arc (361: half-degree steps on a half circle).

    Returns
    -------
    PlaneArc
    """
    start, end, centre = (np.asarray(a, dtype=float) for a in (start, end, centre))
    third = centre if via is None else np.asarray(via, dtype=float)
    normal = _unit(np.cross(start - third, end - third))
    origin = centre - ((centre - start) @ normal) * normal
    u = _unit(start - origin)
    w = np.cross(normal, u)
    side = (third - origin) if via is not None else (end - origin)
    if side @ w < 0:
        w = -w
    e = end - origin
    theta_end = np.arctan2(e @ w, e @ u) % (2 * np.pi)
    angles = np.linspace(0.0, theta_end, samples)
    dirs = np.cos(angles)[:, None] * u + np.sin(angles)[:, None] * w
    pts = surface_hits(mesh, origin, dirs)
    ok = np.all(np.isfinite(pts), axis=1)
    if ok.sum() < 2:
        raise ValueError("the arc does not meet the surface: is the centre inside the scalp?")
    angles, pts = angles[ok], pts[ok]
    seg = np.linalg.norm(np.diff(pts, axis=0), axis=1)
    lengths = np.r_[0.0, np.cumsum(seg)]
    return PlaneArc(mesh=mesh, origin=origin, u=u, w=w, angles=angles, points=pts, lengths=lengths)
