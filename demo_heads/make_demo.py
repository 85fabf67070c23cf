"""Generate the invented demo subject ``wren01`` (numpy + trimesh only, seeded).

Run from the repository root::

    python demo_heads/make_demo.py            # rewrites the files beside this script
    python demo_heads/make_demo.py --out DIR  # writes a fresh copy into DIR

Everything is built from smooth closed-form functions, so the result is the
same on every run. The anatomy frame is MRI-like (millimetres, +x right,
+y front, +z up, origin away from the head's centre):

* the head is a star-shaped surface about ``HEAD_CENTRE`` whose radius along a
  unit direction is an ellipsoid's, deformed by a flatter occiput, a brow ridge,
  a flattened base and a small degree-3 polynomial (low-order harmonic) term;
* the skull surfaces lie below the scalp by a smoothly varying normal depth,
  written as a radial function (normal depth / cosine of the radial-normal angle);
* each cortical hemisphere is star-shaped about its own centre: an envelope
  (soft minimum of the inner skull less a margin, the midline plane and a
  floor plane) carved by narrow sulci along the zero set of a sum of plane waves;
* the 64 electrodes of a 10-10 cap are placed by spherical angles of the 10-10
  system, cast from the head's centre onto the scalp, lifted by the cap and gel,
  jittered by digitizer noise and moved into a device frame by a known rigid
  transform (kept in ``truth.json``).

Every surface is ``centre + r(u) u`` over a geodesic sphere with r > 0, so each
flat triangle projects radially onto its own spherical triangle: the surfaces
are closed, outward and cannot cross themselves.

Before writing, the script checks the geometry with trimesh (watertight,
outward, nested with the stated gaps, cortex inside the inner skull) and stops
with a message naming the failed check.
"""
from __future__ import annotations

import argparse
import json
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import trimesh

SEED = 20261202
SUBJECT = "wren01"
HERE = Path(__file__).resolve().parent

#: head centre in the anatomy frame (mm); rays for the cap start here
HEAD_CENTRE = np.array([1.8, -14.5, 22.0])
#: ellipsoid semi-axes of the scalp (mm): left-right, back-front, down-up
SCALP_AXES = np.array([75.0, 96.0, 87.0])

FILES = {
    "scalp": "scalp.ply",
    "outer_skull": "outer_skull.ply",
    "inner_skull": "inner_skull.ply",
    "cortex_left": "cortex_left.ply",
    "cortex_right": "cortex_right.ply",
    "electrodes": f"sub-{SUBJECT}_electrodes.tsv",
    "coordsystem": f"sub-{SUBJECT}_coordsystem.json",
    "headshape": f"sub-{SUBJECT}_headshape.tsv",
    "fiducials": "anat_fiducials.tsv",
    "truth": "truth.json",
    "recipe": "recipe.toml",
}

#: geodesic frequency per surface (vertices = 10 f**2 + 2)
FREQ = {"scalp": 28, "skull": 16, "cortex": 56}

#: normal depth below the scalp (mm): mean and half-range of a smooth variation
OUTER_SKULL_DEPTH = (6.0, 0.5)
INNER_SKULL_DEPTH = (11.5, 0.7)
#: gyral crowns stay this far (radially, about the skull's normal) inside the inner skull (mm)
CORTEX_MARGIN = 6.0
MIDLINE_GAP = 5.0          # mm between the two hemispheres' envelopes
CORTEX_FLOOR = -40.0       # mm below HEAD_CENTRE: lowest cortical envelope
#: the envelope also stays inside this ball (centre offset from HEAD_CENTRE, radius, mm): wider
#: CSF at the frontal and occipital poles keeps every source inside the brain sphere of a
#: default concentric-spheres model fitted to the cap (0.87 of its radius, about 72 mm here)
CORTEX_BALL = (np.array([0.0, 1.5, 4.0]), 68.0)
SULCUS_DEPTH = (12.5, 2.5)  # mm, mean and half-range
SULCUS_WIDTH = 1.7         # mm, Gaussian sigma of the sulcal profile across its line

ELECTRODE_NOISE_RMS = 2.0  # mm, 3-D RMS digitizer error
FIDUCIAL_NOISE_RMS = 2.0
HEADSHAPE_NOISE_RMS = 1.0
HEADSHAPE_OUTLIERS = 5      # points with an extra outward 6-12 mm (stylus off the skin)
CAP_LIFT = (1.0, 2.0)       # mm outward (cap and gel), uniform
DEVICE_ROTATION_DEG = 16.0
DEVICE_AXIS = np.array([0.35, -0.45, 0.82])
DEVICE_TRANSLATION = np.array([46.0, -38.0, 52.0])  # mm, anatomy -> device

#: the 10-10 rows: signed polar angle of the midline point (front positive, degrees),
#: azimuth of the row's end on the equator (degrees) and steps from midline to end
ROWS = {
    "Fp": (90.0, 18.0, 1), "AF": (67.5, 36.0, 4), "F": (45.0, 54.0, 4),
    "FC": (22.5, 72.0, 4), "FT": (22.5, 72.0, 4), "C": (0.0, 90.0, 4), "T": (0.0, 90.0, 4),
    "CP": (-22.5, 108.0, 4), "TP": (-22.5, 108.0, 4), "P": (-45.0, 126.0, 4),
    "PO": (-67.5, 144.0, 4), "O": (-90.0, 162.0, 1), "I": (-112.5, 162.0, 1),
}
#: a common 64-channel subset of the 10-10 system
CAP_64 = (
    "Fp1 Fpz Fp2 AF7 AF3 AFz AF4 AF8 F7 F5 F3 F1 Fz F2 F4 F6 F8 "
    "FT7 FC5 FC3 FC1 FCz FC2 FC4 FC6 FT8 T7 C5 C3 C1 Cz C2 C4 C6 T8 "
    "TP9 TP7 CP5 CP3 CP1 CPz CP2 CP4 CP6 TP8 TP10 P7 P5 P3 P1 Pz P2 P4 P6 P8 "
    "PO7 PO3 POz PO4 PO8 O1 Oz O2 Iz"
).split()


class DemoCheckError(RuntimeError):
    """A generated surface or point set broke one of the scenario's promises."""


# --------------------------------------------------------------------------- meshes

def geodesic_sphere(freq: int) -> tuple[np.ndarray, np.ndarray]:
    """Class-I geodesic sphere: each icosahedron face cut into ``freq**2`` triangles.

    Returns
    -------
    vertices : (10 freq**2 + 2, 3) float64, unit vectors
    faces : (20 freq**2, 3) int64, counter-clockwise seen from outside
    """
    ico = trimesh.creation.icosahedron()
    base_v = np.asarray(ico.vertices, dtype=np.float64)
    base_f = np.asarray(ico.faces, dtype=np.int64)
    ii, jj = np.meshgrid(np.arange(freq + 1), np.arange(freq + 1), indexing="ij")
    keep = ii + jj <= freq
    ii, jj = ii[keep], jj[keep]
    local = -np.ones((freq + 1, freq + 1), dtype=np.int64)
    local[ii, jj] = np.arange(ii.size)
    # integer barycentric weights over the 12 icosahedron vertices: exact duplicates on shared edges
    weights = np.zeros((len(base_f), ii.size, 12), dtype=np.int64)
    for k, (a, b, c) in enumerate(base_f):
        weights[k, :, a] += freq - ii - jj
        weights[k, :, b] += ii
        weights[k, :, c] += jj
    unique, inverse = np.unique(weights.reshape(-1, 12), axis=0, return_inverse=True)
    inverse = inverse.reshape(len(base_f), ii.size)
    up_i, up_j = np.nonzero(np.add.outer(np.arange(freq), np.arange(freq)) < freq)
    dn_i, dn_j = np.nonzero(np.add.outer(np.arange(freq), np.arange(freq)) < freq - 1)
    tri_local = np.concatenate([
        np.stack([local[up_i, up_j], local[up_i + 1, up_j], local[up_i, up_j + 1]], axis=1),
        np.stack([local[dn_i + 1, dn_j], local[dn_i + 1, dn_j + 1], local[dn_i, dn_j + 1]], axis=1),
    ])
    faces = np.concatenate([inverse[k][tri_local] for k in range(len(base_f))])
    vertices = unique @ base_v / freq
    vertices /= np.linalg.norm(vertices, axis=1, keepdims=True)
    return vertices, faces


def unit(v: np.ndarray) -> np.ndarray:
    """Rows of ``v`` scaled to unit length."""
    return v / np.linalg.norm(v, axis=-1, keepdims=True)


@dataclass(frozen=True)
class HeadShape:
    """Radial functions of the scalp and skull about ``HEAD_CENTRE`` (mm)."""

    poly: np.ndarray        # (19,) coefficients of the degree-1..3 monomials
    outer_dir: np.ndarray   # (3,) direction of the thickest outer-skull depth
    inner_dir: np.ndarray   # (3,)

    def scalp(self, u: np.ndarray) -> np.ndarray:
        """Scalp radius (mm) along unit directions ``u`` (n, 3)."""
        x, y, z = u.T
        r = 1.0 / np.sqrt((x / SCALP_AXES[0]) ** 2 + (y / SCALP_AXES[1]) ** 2 + (z / SCALP_AXES[2]) ** 2)
        elev = np.arcsin(np.clip(z, -1.0, 1.0))
        factor = (1.0
                  - 0.50 * np.clip(-y - 0.45, 0.0, None) ** 3                       # flatter occiput
                  + 0.03 * np.exp(-((elev + 0.10) / 0.17) ** 2) * np.clip(y, 0, None) ** 4  # brow ridge
                  - 0.30 * np.clip(-z - 0.35, 0.0, None) ** 3                       # flattened base
                  + _low_order(u, self.poly))
        return r * factor

    def normal(self, u: np.ndarray, radius: np.ndarray | None = None) -> np.ndarray:
        """Outward unit normal (n, 3) of the scalp at the point along ``u`` (``radius``: its scalp radius)."""
        p = u * (self.scalp(u) if radius is None else radius)[:, None]
        grad = np.stack([self._level(p + step) for step in np.eye(3) * 1e-3], axis=1)  # p itself is on level 0
        return unit(grad)

    def _level(self, p: np.ndarray) -> np.ndarray:
        r = np.linalg.norm(p, axis=1)
        return r / self.scalp(p / r[:, None]) - 1.0

    def depth_radius(self, u: np.ndarray, depth: np.ndarray) -> np.ndarray:
        """Radius (mm) of the surface ``depth`` (mm, along the normal) below the scalp."""
        radius = self.scalp(u)
        cos = np.einsum("ij,ij->i", self.normal(u, radius), u)
        return radius - depth / cos

    def outer_depth(self, u: np.ndarray) -> np.ndarray:
        """Normal depth (mm) of the outer skull below the scalp along ``u``."""
        return OUTER_SKULL_DEPTH[0] + OUTER_SKULL_DEPTH[1] * (u @ self.outer_dir)

    def inner_depth(self, u: np.ndarray) -> np.ndarray:
        """Normal depth (mm) of the inner skull below the scalp along ``u``."""
        return INNER_SKULL_DEPTH[0] + INNER_SKULL_DEPTH[1] * (u @ self.inner_dir)


def _low_order(u: np.ndarray, c: np.ndarray) -> np.ndarray:
    """Sum of the 19 monomials of degree 1 to 3 in x, y, z weighted by ``c`` (19,), (n,)."""
    x, y, z = u.T
    xx, yy, zz = x * x, y * y, z * z
    return (c[0] * x + c[1] * y + c[2] * z + c[3] * xx + c[4] * yy + c[5] * zz
            + c[6] * x * y + c[7] * y * z + c[8] * z * x + c[9] * xx * x + c[10] * yy * y + c[11] * zz * z
            + c[12] * xx * y + c[13] * xx * z + c[14] * yy * x + c[15] * yy * z + c[16] * zz * x
            + c[17] * zz * y + c[18] * x * y * z)


def star_mesh(centre: np.ndarray, dirs: np.ndarray, radii: np.ndarray, faces: np.ndarray) -> trimesh.Trimesh:
    """Closed surface ``centre + radii * dirs`` over a sphere's triangulation."""
    return trimesh.Trimesh(centre + dirs * radii[:, None], faces, process=False)


def _softmin(values: np.ndarray, k: float) -> np.ndarray:
    """Smooth minimum over axis 0 (never above the minimum), scale ``k`` (mm)."""
    m = values.min(axis=0)
    return m - k * np.log(np.exp(-(values - m) / k).sum(axis=0))


def hemisphere(side: int, head: HeadShape, rng: np.random.Generator) -> trimesh.Trimesh:
    """One folded cortical hemisphere (side -1 left, +1 right), mm, anatomy frame."""
    sphere_v, faces = geodesic_sphere(FREQ["cortex"])
    centre = HEAD_CENTRE + np.array([side * 30.0, -6.0, 10.0])
    dirs = unit(sphere_v * np.array([30.0, 72.0, 50.0]))  # denser sampling along the long axes

    # envelope along each ray: inner skull less the margin (bisection), midline, floor
    def beyond(t: np.ndarray) -> np.ndarray:
        """How far (mm, radially about the head's centre) the point at ``t`` lies past the limit."""
        q = centre - HEAD_CENTRE + dirs * t[:, None]
        r = np.linalg.norm(q, axis=1)
        u = q / r[:, None]
        return r - head.depth_radius(u, head.inner_depth(u) + CORTEX_MARGIN)

    t0, t1 = np.full(len(dirs), 40.0), np.full(len(dirs), 60.0)
    g0, g1 = beyond(t0), beyond(t1)
    for _ in range(10):  # secant steps: the limit is smooth along each ray
        step = g1 * (t1 - t0) / np.where(g1 == g0, 1.0, g1 - g0)
        t0, g0, t1 = t1, g1, t1 - step
        g1 = beyond(t1)
    if np.abs(g1).max() > 1e-6:
        raise DemoCheckError(f"hemisphere {side}: envelope search did not converge ({np.abs(g1).max():.2g} mm)")
    t_skull = t1
    with np.errstate(divide="ignore"):
        toward_mid = -side * dirs[:, 0]
        t_mid = np.where(toward_mid > 0, (30.0 - MIDLINE_GAP / 2) / toward_mid, np.inf)
        down = -dirs[:, 2]
        t_floor = np.where(down > 0, (10.0 - CORTEX_FLOOR) / down, np.inf)
    rel = centre - HEAD_CENTRE - CORTEX_BALL[0]
    b = dirs @ rel
    t_ball = -b + np.sqrt(b * b - (rel @ rel - CORTEX_BALL[1] ** 2))
    t_env = _softmin(np.stack([t_skull, t_ball, np.minimum(t_mid, 1e3), np.minimum(t_floor, 1e3)]), 3.0)

    # sulci: narrow grooves along the zero set of a sum of plane waves
    p = centre + dirs * t_env[:, None]
    n_waves = 12
    k_dirs = unit(rng.normal(size=(n_waves, 3)))
    k_mag = 2 * np.pi / rng.uniform(30.0, 48.0, size=n_waves)
    phase = rng.uniform(0, 2 * np.pi, size=n_waves)
    amp = rng.uniform(0.6, 1.0, size=n_waves)
    kv = k_dirs * k_mag[:, None]
    arg = p @ kv.T + phase
    field = np.cos(arg) @ amp
    grad = -(np.sin(arg) * amp) @ kv
    dist = np.abs(field) / np.maximum(np.linalg.norm(grad, axis=1), 0.5 * np.mean(amp * k_mag))
    d_dir = unit(rng.normal(size=3))
    depth = SULCUS_DEPTH[0] + SULCUS_DEPTH[1] * np.cos(p @ d_dir * 2 * np.pi / 90.0 + rng.uniform(0, 2 * np.pi))
    t_cortex = t_env - depth * np.exp(-(dist / SULCUS_WIDTH) ** 2)
    if t_cortex.min() < 3.0:
        raise DemoCheckError(f"hemisphere {side}: a sulcus reaches within {t_cortex.min():.1f} mm of its centre")
    return star_mesh(centre, dirs, t_cortex, faces)


# --------------------------------------------------------------------------- the cap

def ten_ten_direction(label: str) -> np.ndarray:
    """Unit direction (x right, y front, z up) of a 10-10 label on the ideal sphere."""
    row = label.rstrip("0123456789z")
    number = label[len(row):]
    alpha, phi_end, steps = (np.radians(v) if i < 2 else v for i, v in enumerate(ROWS[row]))
    mid = np.array([0.0, np.sin(alpha), np.cos(alpha)])
    if number == "z":
        return mid
    n = int(number)
    side = 1.0 if n % 2 == 0 else -1.0
    frac = ((n + 1) // 2) / steps
    end_r = np.array([np.sin(phi_end), np.cos(phi_end), 0.0])
    end_l = end_r * np.array([-1.0, 1.0, 1.0])
    # circle through left end, midline point and right end (it lies on the unit sphere)
    cc = _circumcentre(end_l, mid, end_r)
    axis = unit(np.cross(mid - cc, end_r - cc))
    ra, rb = mid - cc, end_r - cc
    beta = np.arctan2(np.linalg.norm(np.cross(ra, rb)), ra @ rb)
    ang = side * frac * beta
    p = cc + np.cos(ang) * ra + np.sin(ang) * np.cross(axis, ra)
    return unit(p)


def _circumcentre(a: np.ndarray, b: np.ndarray, c: np.ndarray) -> np.ndarray:
    ab, ac = b - a, c - a
    n = np.cross(ab, ac)
    return a + (np.cross(n, ab) * (ac @ ac) + np.cross(ac, n) * (ab @ ab)) / (2 * (n @ n))


def fiducial_directions() -> dict[str, np.ndarray]:
    """Nasion and preauricular points on the ideal sphere (112.5 degrees from the vertex)."""
    s, c = np.sin(np.radians(112.5)), np.cos(np.radians(112.5))
    return {"nasion": np.array([0.0, s, c]), "lpa": np.array([-s, 0.0, c]), "rpa": np.array([s, 0.0, c])}


def headshape_directions(rng: np.random.Generator) -> np.ndarray:
    """Directions of digitized head-shape points: upper head and face, jittered spiral."""
    n = 900
    k = np.arange(n) + 0.5
    z = 1 - 2 * k / n
    az = np.pi * (1 + 5 ** 0.5) * k
    u = np.stack([np.sqrt(1 - z * z) * np.cos(az), np.sqrt(1 - z * z) * np.sin(az), z], axis=1)
    u = unit(u + rng.normal(scale=0.02, size=u.shape))
    upper = u[:, 2] > 0.05
    face = (u[:, 1] > 0.75) & (u[:, 2] > -0.55)
    u = u[upper | face]
    return u[::2]


def rotation_matrix(axis: np.ndarray, degrees: float) -> np.ndarray:
    """Rodrigues rotation about ``axis`` by ``degrees`` (right hand)."""
    a = unit(axis)
    th = np.radians(degrees)
    k = np.array([[0, -a[2], a[1]], [a[2], 0, -a[0]], [-a[1], a[0], 0]])
    return np.eye(3) + np.sin(th) * k + (1 - np.cos(th)) * (k @ k)


def noise(rng: np.random.Generator, n: int, rms: float) -> np.ndarray:
    """Isotropic Gaussian offsets (n, 3) whose 3-D RMS length is ``rms``."""
    return rng.normal(scale=rms / np.sqrt(3.0), size=(n, 3))


# --------------------------------------------------------------------------- checks

def _check_closed(name: str, mesh: trimesh.Trimesh) -> None:
    if not mesh.is_watertight:
        raise DemoCheckError(f"{name}: not watertight")
    if not mesh.is_winding_consistent:
        raise DemoCheckError(f"{name}: inconsistent winding")
    if mesh.euler_number != 2:
        raise DemoCheckError(f"{name}: not a sphere-like surface (Euler number {mesh.euler_number})")
    if mesh.volume <= 0:
        raise DemoCheckError(f"{name}: negative volume (faces point inward)")


def surface_distance(mesh: trimesh.Trimesh, points: np.ndarray, *, exact_max: bool = True) -> np.ndarray:
    """Distances (mm) from ``points`` (n, 3) to the surface of ``mesh`` (trimesh's closest point).

    With ``exact_max=False`` only the points that can hold the minimum are measured
    exactly (a point's distance to the nearest vertex exceeds its distance to the
    surface by at most the largest circumradius of a face); the others keep their
    distance to the nearest vertex, an upper bound.
    """
    if exact_max:
        return trimesh.proximity.closest_point(mesh, points)[1]
    dist, _ = mesh.kdtree.query(points)
    tri = mesh.triangles
    sides = np.linalg.norm(tri - np.roll(tri, 1, axis=1), axis=2)
    circumradius = sides.prod(axis=1) / (4.0 * mesh.area_faces)
    near = dist <= dist.min() + circumradius.max()
    dist[near] = trimesh.proximity.closest_point(mesh, points[near])[1]
    return dist


def _gap(name: str, inner: trimesh.Trimesh, outer: trimesh.Trimesh, lo: float, hi: float | None = None,
         ) -> tuple[float, float] | float:
    """Distances (mm) from ``inner``'s vertices to ``outer``: inside, and within [lo, hi].

    Returns (min, max), or only the min when ``hi`` is None.
    """
    if not outer.contains(inner.vertices).all():
        raise DemoCheckError(f"{name}: some vertices are outside the enclosing surface")
    dist = surface_distance(outer, inner.vertices, exact_max=hi is not None)
    if dist.min() < lo or (hi is not None and dist.max() > hi):
        raise DemoCheckError(f"{name}: gap {dist.min():.2f}..{dist.max():.2f} mm, wanted {lo}..{hi} mm")
    return float(dist.min()) if hi is None else (float(dist.min()), float(dist.max()))


# --------------------------------------------------------------------------- writers

def write_ply(path: Path, mesh: trimesh.Trimesh) -> None:
    """Binary little-endian PLY, float32 vertices in mm, int32 triangle indices."""
    v = np.ascontiguousarray(mesh.vertices, dtype="<f4")
    f = np.empty(len(mesh.faces), dtype=[("n", "u1"), ("i", "<i4", (3,))])
    f["n"] = 3
    f["i"] = mesh.faces
    header = ("ply\nformat binary_little_endian 1.0\ncomment headprep demo subject, units mm\n"
              f"element vertex {len(v)}\nproperty float x\nproperty float y\nproperty float z\n"
              f"element face {len(f)}\nproperty list uchar int vertex_indices\nend_header\n")
    path.write_bytes(header.encode("ascii") + v.tobytes() + f.tobytes())


def _rows(points: np.ndarray) -> list[str]:
    return ["\t".join(f"{c:.2f}" for c in p) for p in points]


def _mm(p: np.ndarray) -> list[float]:
    return [round(float(c), 3) for c in p]


def build(out: Path) -> dict:
    """Generate, check and write every file of the demo subject into ``out``.

    Returns
    -------
    dict
        The content written to ``truth.json``.
    """
    rng = np.random.default_rng(SEED)
    head = HeadShape(poly=rng.normal(scale=0.006, size=19),
                     outer_dir=unit(rng.normal(size=3)), inner_dir=unit(rng.normal(size=3)))

    sv, sf = geodesic_sphere(FREQ["scalp"])
    kv, kf = geodesic_sphere(FREQ["skull"])
    meshes = {
        "scalp": star_mesh(HEAD_CENTRE, sv, head.scalp(sv), sf),
        "outer_skull": star_mesh(HEAD_CENTRE, kv, head.depth_radius(kv, head.outer_depth(kv)), kf),
        "inner_skull": star_mesh(HEAD_CENTRE, kv, head.depth_radius(kv, head.inner_depth(kv)), kf),
        "cortex_left": hemisphere(-1, head, rng),
        "cortex_right": hemisphere(+1, head, rng),
    }
    for name, mesh in meshes.items():
        _check_closed(name, mesh)
    measured = {
        "scalp_to_outer_skull_mm": _gap("outer skull in scalp", meshes["outer_skull"], meshes["scalp"], 5.0, 7.0),
        "scalp_to_inner_skull_mm": _gap("inner skull in scalp", meshes["inner_skull"], meshes["scalp"], 10.0, 13.0),
        "outer_to_inner_skull_mm": _gap("inner skull in outer skull", meshes["inner_skull"],
                                        meshes["outer_skull"], 3.0, 8.0),
        "inner_skull_to_cortex_min_mm": min(
            _gap(f"{side} cortex in inner skull", meshes[side], meshes["inner_skull"], 3.0)
            for side in ("cortex_left", "cortex_right")),
    }
    midline = float(meshes["cortex_right"].vertices[:, 0].min() - meshes["cortex_left"].vertices[:, 0].max())
    if midline < 3.0:
        raise DemoCheckError(f"hemispheres only {midline:.2f} mm apart at the midline")
    measured["midline_gap_mm"] = midline

    # anatomy-frame points on the smooth scalp (the meshes sample the same surface)
    def on_scalp(u: np.ndarray) -> np.ndarray:
        u = unit(np.atleast_2d(u))
        return HEAD_CENTRE + u * head.scalp(u)[:, None], head.normal(u)

    fid_dirs = fiducial_directions()
    fid_anat, _ = on_scalp(np.stack(list(fid_dirs.values())))
    el_anat, el_norm = on_scalp(np.stack([ten_ten_direction(lab) for lab in CAP_64]))
    hs_anat, hs_norm = on_scalp(headshape_directions(rng))

    lift = rng.uniform(*CAP_LIFT, size=len(CAP_64))
    el_dig = el_anat + el_norm * lift[:, None] + noise(rng, len(CAP_64), ELECTRODE_NOISE_RMS)
    fid_dig = fid_anat + noise(rng, 3, FIDUCIAL_NOISE_RMS)
    hs_dig = hs_anat + noise(rng, len(hs_anat), HEADSHAPE_NOISE_RMS)
    outliers = np.sort(rng.choice(len(hs_anat), size=HEADSHAPE_OUTLIERS, replace=False))
    hs_extra = rng.uniform(6.0, 12.0, size=HEADSHAPE_OUTLIERS)
    hs_dig[outliers] += hs_norm[outliers] * hs_extra[:, None]

    rot = rotation_matrix(DEVICE_AXIS, DEVICE_ROTATION_DEG)
    to_device = np.eye(4)
    to_device[:3, :3], to_device[:3, 3] = rot, DEVICE_TRANSLATION

    def dev(p: np.ndarray) -> np.ndarray:
        return p @ rot.T + DEVICE_TRANSLATION

    out.mkdir(parents=True, exist_ok=True)
    for name, mesh in meshes.items():
        write_ply(out / FILES[name], mesh)

    el_dev = dev(el_dig)
    (out / FILES["electrodes"]).write_text(
        "name\tx\ty\tz\ttype\n" + "".join(f"{lab}\t{row}\tEEG\n" for lab, row in zip(CAP_64, _rows(el_dev))))
    fid_dev = dev(fid_dig)
    coordsystem = {
        "EEGCoordinateSystem": "Other",
        "EEGCoordinateUnits": "mm",
        "EEGCoordinateSystemDescription": (
            "Frame of the Saltmarsh lab's stylus digitizer for this session: origin at the base unit, "
            "axes fixed to the chair rig; not aligned with the head. Electrode centres were touched "
            "on the cap (including cap and gel thickness)."),
        "AnatomicalLandmarkCoordinates": {
            "NAS": [round(float(c), 2) for c in fid_dev[0]],
            "LPA": [round(float(c), 2) for c in fid_dev[1]],
            "RPA": [round(float(c), 2) for c in fid_dev[2]],
        },
        "AnatomicalLandmarkCoordinateSystem": "Other",
        "AnatomicalLandmarkCoordinateUnits": "mm",
        "AnatomicalLandmarkCoordinateSystemDescription": "Same digitizer frame as the electrodes.",
    }
    (out / FILES["coordsystem"]).write_text(json.dumps(coordsystem, indent=2) + "\n")
    hs_lines = [f"hs{i + 1:03d}\t{row}\theadshape\n" for i, row in enumerate(_rows(dev(hs_dig)))]
    (out / FILES["headshape"]).write_text("# units: mm\nlabel\tx\ty\tz\tkind\n" + "".join(hs_lines))
    (out / FILES["fiducials"]).write_text(
        "# units: mm\nlabel\tx\ty\tz\tkind\n"
        + "".join(f"{lab}\t{row}\tfiducial\n" for lab, row in zip(fid_dirs, _rows(fid_anat))))

    to_anat = np.linalg.inv(to_device)
    to_anat_m = to_anat.copy()
    to_anat_m[:3, 3] /= 1000.0
    truth = {
        "about": ("Demo truth for tests only: how the invented subject was generated. "
                  "The pipeline never reads this file."),
        "subject": SUBJECT,
        "seed": SEED,
        "device_to_anatomy": {
            "matrix_m": [[round(float(c), 9) for c in row] for row in to_anat_m],
            "from": "device", "to": "anatomy", "units": "m",
        },
        "anatomy_to_device": {
            "rotation_axis": [round(float(c), 6) for c in unit(DEVICE_AXIS)],
            "rotation_deg": DEVICE_ROTATION_DEG,
            "translation_mm": _mm(DEVICE_TRANSLATION),
            "note": "x_device = R x_anatomy + t, R a right-hand rotation about rotation_axis",
        },
        "noise": {
            "electrodes_rms_3d_mm": ELECTRODE_NOISE_RMS, "fiducials_rms_3d_mm": FIDUCIAL_NOISE_RMS,
            "headshape_rms_3d_mm": HEADSHAPE_NOISE_RMS, "cap_lift_mm": list(CAP_LIFT),
            "headshape_outliers": {f"hs{i + 1:03d}": round(float(e), 2) for i, e in zip(outliers, hs_extra)},
            "distribution": "isotropic Gaussian, per-axis sigma = rms / sqrt(3); lift uniform along the scalp normal",
        },
        "head_centre_anatomy_mm": _mm(HEAD_CENTRE),
        "fiducials_anatomy_mm": {lab: _mm(p) for lab, p in zip(fid_dirs, fid_anat)},
        "fiducials_note": "anat_fiducials.tsv holds these exact points; the digitized ones add noise only",
        "electrodes_on_scalp_anatomy_mm": {lab: _mm(p) for lab, p in zip(CAP_64, el_anat)},
        "electrode_lift_mm": {lab: round(float(v), 3) for lab, v in zip(CAP_64, lift)},
        "vertices": {name: len(m.vertices) for name, m in meshes.items()},
        "measured": {k: ([round(v[0], 2), round(v[1], 2)] if isinstance(v, tuple) else round(v, 2))
                     for k, v in measured.items()},
        "measured_note": "min and max distance (mm) from the inner surface's vertices to the enclosing surface",
        "files": FILES,
    }
    (out / FILES["truth"]).write_text(json.dumps(truth, indent=2) + "\n")
    (out / FILES["recipe"]).write_text(RECIPE)
    return truth


RECIPE = f"""\
# The demo subject's recipe: paths are relative to this file.
[subject]
id = "{SUBJECT}"

[inputs]
sensors = "{FILES['electrodes']}"
headshape = "{FILES['headshape']}"
fiducials = "{FILES['fiducials']}"
scalp = "{FILES['scalp']}"
outer_skull = "{FILES['outer_skull']}"
inner_skull = "{FILES['inner_skull']}"
cortex = ["{FILES['cortex_left']}", "{FILES['cortex_right']}"]
mesh_units = "mm"

[align]
method = "surface"

[patches]
method = "quadric"
count = 3000

[head_model]
model = "spheres"

[forward]
reference = "average"

[output]
bundle = "out/{SUBJECT}-forward"
"""


def main(argv: list[str] | None = None) -> int:
    """Command line: ``make_demo.py [--out DIR]`` (default: beside this script)."""
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--out", type=Path, default=HERE, help="folder to write into (default: %(default)s)")
    args = parser.parse_args(argv)
    build(args.out)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
