"""Synthetic subjects with known truth for the co-registration and placement tests.

Two head shapes built on a trimesh icosphere (an ellipsoid and a bumpy
sphere), a 10-10-like layout generated from spherical angles (test data, not a
product table), head shape on the upper head, fiducials, and a random rigid
digitizer frame. All numbers here are invented test data.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import trimesh

from prep import Sensors, Surface
from prep.geometry.registration import rigid_matrix, rotvec_to_matrix

#: centre of the synthetic head in the anatomy frame (m); the frame is RAS-like
CENTRE = np.array([0.002, 0.012, 0.035])
#: ellipsoid semi-axes (m): left-right, back-front, down-up (adult-like proportions)
AXES = np.array([0.074, 0.096, 0.108])
#: anterior-posterior angle (deg from the vertex) of each row of the layout
ROWS = {72: "Fp", 54: "AF", 36: "F", 18: "FC", 0: "C", -18: "CP", -36: "P", -54: "PO", -72: "O"}
FIDUCIAL_DIRECTIONS = {"nasion": (0.0, 1.0, -0.28), "lpa": (-1.0, 0.0, -0.35), "rpa": (1.0, 0.0, -0.35)}


def _unit(a: np.ndarray) -> np.ndarray:
    a = np.asarray(a, dtype=float)
    return a / np.linalg.norm(a, axis=-1, keepdims=True)


def radius(shape: str, u: np.ndarray) -> np.ndarray:
    """Distance from CENTRE to the scalp along unit directions ``u`` (n, 3)."""
    if shape == "ellipsoid":
        return 1.0 / np.sqrt(((u / AXES) ** 2).sum(axis=1))
    if shape == "bumpy":
        x, y, z = u.T
        return 0.088 * (1 + 0.06 * np.sin(3 * x + 1) * np.cos(2 * y) + 0.04 * np.sin(4 * z + 2 * x)
                        + 0.08 * y * z + 0.03 * np.cos(5 * y))
    raise ValueError(shape)


def scalp(shape: str, subdivisions: int = 5) -> Surface:
    """Closed, outward-oriented scalp mesh (20,480 faces at subdivision 5), anatomy frame."""
    ico = trimesh.creation.icosphere(subdivisions=subdivisions)
    u = np.asarray(ico.vertices)
    return Surface(vertices=CENTRE + u * radius(shape, u)[:, None], faces=np.asarray(ico.faces), role="scalp")


def on_scalp(shape: str, u: np.ndarray) -> np.ndarray:
    u = _unit(u)
    return CENTRE + u * radius(shape, u)[:, None]


def layout(step_deg: float = 18.0, max_polar_deg: float = 95.0) -> tuple[tuple[str, ...], np.ndarray]:
    """Labels and unit directions of a 10-10-like grid (azimuthal-equidistant about the vertex).

    With the default 18 degree step the rows and numbers follow the 10-10 naming
    (odd numbers left, even right, ``z`` on the midline).
    """
    labels, dirs = [], []
    n = int(round(90 / step_deg))
    for i in range(n, -n - 1, -1):
        a = i * step_deg
        for k in range(-n, n + 1):
            b = k * step_deg
            polar = np.hypot(a, b)
            if polar > max_polar_deg:
                continue
            az = np.arctan2(a, b)
            th = np.radians(polar)
            dirs.append([np.sin(th) * np.cos(az), np.sin(th) * np.sin(az), np.cos(th)])
            row = ROWS.get(int(round(a)), f"R{i + n}")
            col = "z" if k == 0 else str(2 * abs(k) - 1 if k < 0 else 2 * k)
            labels.append(row + col)
    return tuple(labels), np.array(dirs)


@dataclass
class Subject:
    """A synthetic subject: device-frame sensors and the truth."""

    shape: str
    scalp: Surface
    sensors: Sensors           # device frame, noisy
    anatomy_fiducials: dict    # true, anatomy frame
    truth: np.ndarray          # (4, 4) device -> anatomy
    true_positions: np.ndarray  # (n, 3) anatomy frame, on the scalp
    labels: tuple


def random_rigid(rng: np.random.Generator, max_deg: float = 30.0, max_m: float = 0.05) -> np.ndarray:
    axis = _unit(rng.normal(size=3))
    angle = np.radians(rng.uniform(0, max_deg))
    shift = _unit(rng.normal(size=3)) * rng.uniform(0, max_m)
    return rigid_matrix(rotvec_to_matrix(axis * angle), shift)


def subject(shape: str, seed: int, *, n_headshape: int = 300, step_deg: float = 18.0,
            electrode_noise: float = 0.002, headshape_noise: float = 0.001, fiducial_noise: float = 0.003,
            surface: Surface | None = None) -> Subject:
    """A subject with per-axis Gaussian noise of the given standard deviations (m)."""
    rng = np.random.default_rng(seed)
    labels, dirs = layout(step_deg)
    true_el = on_scalp(shape, dirs)
    u = _unit(rng.normal(size=(4 * n_headshape, 3)))
    u = u[u[:, 2] > -0.15][:n_headshape]
    true_hs = on_scalp(shape, u)
    fids = {k: on_scalp(shape, np.array([v]))[0] for k, v in FIDUCIAL_DIRECTIONS.items()}
    truth = random_rigid(rng)
    inv = np.linalg.inv(truth)

    def to_device(p: np.ndarray, sd: float) -> np.ndarray:
        return p @ inv[:3, :3].T + inv[:3, 3] + rng.normal(0, sd, p.shape)

    sensors = Sensors(labels=labels, positions=to_device(true_el, electrode_noise), frame="device",
                      fiducials={k: to_device(v[None], fiducial_noise)[0] for k, v in fids.items()},
                      headshape=to_device(true_hs, headshape_noise))
    return Subject(shape=shape, scalp=surface if surface is not None else scalp(shape), sensors=sensors,
                   anatomy_fiducials=fids, truth=truth, true_positions=true_el, labels=labels)


def transform_error(estimate: np.ndarray, truth: np.ndarray, at: np.ndarray = CENTRE) -> tuple[float, float]:
    """(displacement in m of the point ``at`` (anatomy frame), rotation angle in degrees) between two transforms."""
    x = np.linalg.inv(truth)[:3, :3] @ at + np.linalg.inv(truth)[:3, 3]
    shift = float(np.linalg.norm(estimate[:3, :3] @ x + estimate[:3, 3] - at))
    rel = estimate[:3, :3] @ truth[:3, :3].T
    angle = float(np.degrees(np.arccos(np.clip((np.trace(rel) - 1) / 2, -1, 1))))
    return shift, angle
