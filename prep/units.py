"""Length units, converted at the boundary: everything inside is in metres.

Table-driven (``to_metres``); readers record the original unit in provenance.
"""
from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

#: metres per unit, keyed by every spelling we accept (lower case).
LENGTH_UNITS: dict[str, float] = {
    "m": 1.0, "meter": 1.0, "meters": 1.0, "metre": 1.0, "metres": 1.0,
    "cm": 1e-2, "centimeter": 1e-2, "centimeters": 1e-2, "centimetre": 1e-2, "centimetres": 1e-2,
    "mm": 1e-3, "millimeter": 1e-3, "millimeters": 1e-3, "millimetre": 1e-3, "millimetres": 1e-3,
}

#: canonical short names
CANONICAL = {1.0: "m", 1e-2: "cm", 1e-3: "mm"}


def unit_scale(unit: str) -> float:
    """Metres per ``unit``.

    Raises
    ------
    KeyError
        If the unit is not a known length unit (callers turn this into a ReadError
        naming the file and line).
    """
    key = unit.strip().lower()
    if key not in LENGTH_UNITS:
        raise KeyError(unit)
    return LENGTH_UNITS[key]


def canonical_unit(unit: str) -> str:
    """``'Millimeters'`` -> ``'mm'``."""
    return CANONICAL[unit_scale(unit)]


def to_metres(values: ArrayLike, unit: str) -> NDArray[np.float64]:
    """Convert lengths in ``unit`` to metres, as float64.

    Parameters
    ----------
    values : array-like, any shape
    unit : str
        ``m``, ``cm``, ``mm`` or a spelled-out form.
    """
    return np.asarray(values, dtype=np.float64) * unit_scale(unit)


def guess_length_unit(extent_m: float, expected_m: tuple[float, float]) -> str | None:
    """Which of m / cm / mm makes a length read as metres fall in ``expected_m``.

    Parameters
    ----------
    extent_m : float
        A length read from a file, taken at face value as metres.
    expected_m : (float, float)
        Plausible range in metres (e.g. inter-preauricular distance 0.13-0.16 m
        in adults, common practice; widen for children).

    Returns
    -------
    str or None
        ``"m"``, ``"cm"`` or ``"mm"``; None if no unit makes it plausible.
    """
    lo, hi = expected_m
    for name, scale in (("m", 1.0), ("cm", 1e-2), ("mm", 1e-3)):
        if lo <= extent_m * scale <= hi:
            return name
    return None
