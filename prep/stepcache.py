"""A per-subject store of finished pipeline steps, keyed by what went into them.

Each step's result is saved as one ``.npz`` (arrays plus a JSON document, no
pickles) named by the step and a sha256 key of its inputs' hashes, its
parameters, the plugins' versions and the upstream steps' keys. A rerun finds
the file and skips the step; a crash leaves no half-written file because every
save is atomic.
"""
from __future__ import annotations

import hashlib
import io
import json
import os
from collections.abc import Mapping
from pathlib import Path
from typing import Any

import numpy as np

from .atomic import write_bytes_atomic
from .model import _jsonable

__all__ = ["StepCache", "step_key"]

_META = "__meta_json__"


def step_key(step: str, parts: Mapping[str, Any]) -> str:
    """A stable 20-hex-digit key from a step name and JSON-able parts."""
    doc = json.dumps({"step": step, **_jsonable(dict(parts))}, sort_keys=True, default=str)
    return hashlib.sha256(doc.encode()).hexdigest()[:20]


class StepCache:
    """Finished steps of one subject under ``root``.

    Attributes
    ----------
    computed : list of str
        Steps computed (not found) during this run, in order: tests count them.
    reused : list of str
        Steps taken from the store.
    """

    def __init__(self, root: str | os.PathLike[str]) -> None:
        self.root = Path(root)
        self.computed: list[str] = []
        self.reused: list[str] = []

    def _path(self, step: str, key: str) -> Path:
        return self.root / f"{step}-{key}.npz"

    def fetch(self, step: str, key: str) -> tuple[dict[str, Any], dict[str, np.ndarray]] | None:
        """(meta, arrays) of a stored step, or None (also for an unreadable file)."""
        p = self._path(step, key)
        if not p.is_file():
            return None
        try:
            with np.load(p, allow_pickle=False) as z:
                arrays = {k: z[k] for k in z.files if k != _META}
                meta = json.loads(bytes(z[_META]).decode("utf-8"))
        except (OSError, ValueError, KeyError, json.JSONDecodeError):
            return None
        self.reused.append(step)
        return meta, arrays

    def store(self, step: str, key: str, meta: Mapping[str, Any], arrays: Mapping[str, np.ndarray]) -> None:
        """Save a finished step atomically."""
        buf = io.BytesIO()
        payload = {k: np.asarray(v) for k, v in arrays.items()}
        payload[_META] = np.frombuffer(json.dumps(_jsonable(dict(meta))).encode("utf-8"), dtype=np.uint8)
        np.savez(buf, **payload)
        write_bytes_atomic(self._path(step, key), buf.getvalue())
        self.computed.append(step)
