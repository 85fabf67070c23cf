"""Array aliases used in signatures (shapes and units live in docstrings)."""
from __future__ import annotations

from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

#: float64 array; the docstring states its shape, unit and frame.
FloatArray = NDArray[np.float64]
#: int64 array (indices).
IntArray = NDArray[np.int64]
#: bool array (masks).
BoolArray = NDArray[np.bool_]

__all__ = ["Any", "ArrayLike", "FloatArray", "IntArray", "BoolArray"]
