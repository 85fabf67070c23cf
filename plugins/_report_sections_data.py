"""What the report sections read from a bundle, gathered in one place.

Every function tolerates absent arrays and manifest keys and returns None (or
an empty value) instead of raising: the sections then say in one sentence
what is missing.
"""
from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from prep.bundle import Bundle


@dataclass(frozen=True)
class Electrodes:
    """Per-electrode placement figures (anatomy frame, metres).

    Attributes
    ----------
    labels : tuple of str, length n
    drawn : (n, 3) float64
        Where to draw them: the digitized positions if stored, else the model's.
    drawn_kind : str
        ``"digitized"`` or ``"model"``.
    signed_distance : (n,) float64 or None
        Distance to the skin before projection, outside positive.
    shift : (n,) float64 or None
        How far projection moved each electrode.
    codes : tuple of tuple of str
        Finding codes naming each electrode.
    """

    labels: tuple[str, ...]
    drawn: np.ndarray
    drawn_kind: str
    signed_distance: np.ndarray | None
    shift: np.ndarray | None
    codes: tuple[tuple[str, ...], ...] = field(default=())

    @property
    def flagged(self) -> list[int]:
        """Indices of electrodes that a finding names."""
        return [i for i, c in enumerate(self.codes) if c]


def _per_electrode(man: Mapping[str, Any]) -> dict[str, Mapping[str, Any]]:
    rows = (man.get("placement") or {}).get("per_electrode") or []
    return {str(r.get("label")): r for r in rows if isinstance(r, Mapping)}


def _column(rows: dict[str, Mapping[str, Any]], labels: tuple[str, ...], key: str) -> np.ndarray | None:
    if not rows or not all(lab in rows and rows[lab].get(key) is not None for lab in labels):
        return None
    return np.array([float(rows[lab][key]) for lab in labels])


def electrodes(bundle: Bundle) -> Electrodes | None:
    """Placement figures of every electrode, or None without sensor positions."""
    a, man = bundle.arrays, bundle.manifest
    labels = tuple(man.get("sensors", {}).get("labels", ()))
    model = a.get("sensor_positions")
    if model is None or len(model) != len(labels):
        return None
    dig = a.get("sensor_digitized")
    drawn, kind = (dig, "digitized") if dig is not None and dig.shape == model.shape else (model, "model")
    rows = _per_electrode(man)
    sd = a.get("placement_signed_distance")
    if sd is None or sd.shape != (len(labels),):
        sd = _column(rows, labels, "signed_distance_m")
    shift = _column(rows, labels, "shift_m")
    if shift is None and kind == "digitized":
        shift = np.linalg.norm(dig - model, axis=1)
    codes: list[set[str]] = [set(rows.get(lab, {}).get("codes") or ()) for lab in labels]
    index = {lab: i for i, lab in enumerate(labels)}
    for f in bundle.findings:
        if f.severity == "info":
            continue
        for s in f.subjects:
            if s in index:
                codes[index[s]].add(f.code)
    return Electrodes(labels=labels, drawn=np.asarray(drawn, float), drawn_kind=kind,
                      signed_distance=None if sd is None else np.asarray(sd, float),
                      shift=None if shift is None else np.asarray(shift, float),
                      codes=tuple(tuple(sorted(c)) for c in codes))


@dataclass(frozen=True)
class Mesh:
    """A triangle mesh from the bundle with the role it plays."""

    role: str
    vertices: np.ndarray
    faces: np.ndarray


def layers(bundle: Bundle) -> list[Mesh]:
    """The head model's layer meshes, inside -> out (empty for spheres or when absent)."""
    hm = bundle.manifest.get("head_model") or {}
    specs = hm.get("layers") or []
    out = []
    for i in range(max(len(specs), 8)):
        v, f = bundle.arrays.get(f"layer{i}_vertices"), bundle.arrays.get(f"layer{i}_faces")
        if v is None or f is None:
            if i >= len(specs):
                break
            continue
        role = specs[i].get("role", f"layer {i}") if i < len(specs) else f"layer {i}"
        out.append(Mesh(role=str(role), vertices=v, faces=f))
    return out


def scalp(bundle: Bundle) -> Mesh | None:
    """The scalp mesh: ``scalp_vertices`` / ``scalp_faces``, else the outermost layer."""
    v, f = bundle.arrays.get("scalp_vertices"), bundle.arrays.get("scalp_faces")
    if v is not None and f is not None:
        return Mesh(role="scalp", vertices=v, faces=f)
    lay = layers(bundle)
    for m in lay:
        if m.role == "scalp":
            return m
    return lay[-1] if lay else None


def spheres(bundle: Bundle) -> tuple[np.ndarray, np.ndarray] | None:
    """(centre (3,), radii (k,)) metres of a concentric-sphere head model, else None."""
    hm = bundle.manifest.get("head_model") or {}
    if hm.get("kind") != "spheres" or "radii_m" not in hm or "centre_m" not in hm:
        return None
    return np.asarray(hm["centre_m"], float), np.asarray(hm["radii_m"], float)


#: passport arrays by meaning -> the names a bundle may store them under (the check's own first)
PASSPORT_ARRAYS = {
    "column_norm": ("passport_column_norm", "passport_column_norms"),
    "depth": ("passport_source_depth",),
    "ple": ("passport_peak_localisation_error", "passport_ple"),
    "sd": ("passport_spatial_dispersion", "passport_sd"),
}


def passport_array(bundle: Bundle, meaning: str) -> np.ndarray | None:
    """The passport array for ``meaning`` (see :data:`PASSPORT_ARRAYS`), or None."""
    for name in PASSPORT_ARRAYS[meaning]:
        if name in bundle.arrays:
            return np.asarray(bundle.arrays[name], float)
    return None


def singular_values(bundle: Bundle) -> tuple[np.ndarray, str]:
    """Singular values of the lead field, largest first, and where they came from."""
    s = bundle.arrays.get("passport_singular_values")
    if s is not None and s.size:
        return np.sort(np.asarray(s, float))[::-1], "stored by the passport check"
    lf = np.asarray(bundle.arrays["leadfield"], float)
    return np.linalg.svd(lf.reshape(lf.shape[0], -1), compute_uv=False), "computed here from the stored lead field"


def numerical_rank(s: np.ndarray, shape: tuple[int, ...]) -> int:
    """Rank by numpy's rule: singular values above ``s.max() * max(shape) * eps`` (numpy.linalg.matrix_rank)."""
    if s.size == 0 or s[0] <= 0:
        return 0
    return int(np.sum(s > s[0] * max(shape) * np.finfo(float).eps))


def find_metric(passport: Mapping[str, Any], key: str) -> tuple[str, Any] | None:
    """The first (check name, value) whose metrics carry ``key``."""
    for name in sorted(passport):
        metrics = passport[name]
        if isinstance(metrics, Mapping) and key in metrics:
            return name, metrics[key]
    return None


def condition_number(bundle: Bundle) -> tuple[float, str]:
    """The lead field's condition number and a sentence saying how it was obtained.

    The passport check's own figure (a ``condition_number`` metric) wins;
    otherwise largest / smallest singular value within the numerical rank, so
    the null direction of an average reference does not count.
    """
    found = find_metric(bundle.manifest.get("passport") or {}, "condition_number")
    if found is not None:
        try:
            return float(found[1]), f"as measured by the passport check '{found[0]}'"
        except (TypeError, ValueError):
            pass
    s, where = singular_values(bundle)
    r = numerical_rank(s, bundle.arrays["leadfield"].shape)
    if r == 0:
        return float("inf"), "the lead field is zero"
    return float(s[0] / s[r - 1]), (f"largest over smallest of the {r} singular values within the "
                                    f"numerical rank ({where})")
