"""Building blocks shared by the electrode-file readers.

A reader parses its format into :class:`Point` rows (label, raw coordinates,
kind column, line) and calls :func:`assemble`, which normalises labels,
separates fiducials and head-shape points, settles the length unit (declared,
given by the user, or inferred from the size of the head) and returns
:class:`~prep.model.Sensors` in metres with the reading findings attached.

Files are streamed line by line (:func:`text_lines`) with limits on the file
size, the line length and the number of rows, so that a wrong file is refused
with a clear message instead of filling the memory.
"""
from __future__ import annotations

import math
import os
from collections.abc import Iterator, Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from .errors import ReadError
from .labels import normalise_label
from .model import Finding, Provenance, Sensors
from .units import LENGTH_UNITS, canonical_unit, guess_length_unit

__all__ = ["Point", "Limits", "text_lines", "parse_number", "parse_unit", "assemble", "judge_unit",
           "PLAUSIBLE_IPA_M", "PLAUSIBLE_SPREAD_M"]

#: inter-preauricular distance accepted as a human head, metres. Adults measure
#: about 0.13-0.16 m (common practice); widened to admit children and large heads.
PLAUSIBLE_IPA_M = (0.08, 0.25)
#: largest extent (bounding-box diagonal) of the electrodes accepted as a head, metres (common practice).
PLAUSIBLE_SPREAD_M = (0.05, 0.40)
_NA = {"n/a", "na", "nan", "-nan", "+nan", ""}


@dataclass(frozen=True)
class Limits:
    """What a reader accepts before refusing a file (defaults: common practice, generous).

    Attributes
    ----------
    max_bytes : int
        Largest file size; electrode files are kilobytes, head-shape scans megabytes.
    max_line_chars : int
    max_rows : int
    """

    max_bytes: int = 64 * 2**20
    max_line_chars: int = 8192
    max_rows: int = 500_000


@dataclass(frozen=True)
class Point:
    """One parsed row: raw coordinates in the file's unit.

    Attributes
    ----------
    label : str
    xyz : (float, float, float)
        As written (unit not yet applied); NaN for ``n/a``.
    line : int
        1-based line number in the file.
    kind : str or None
        Value of the file's kind/type column, if any.
    """

    label: str
    xyz: tuple[float, float, float]
    line: int
    kind: str | None = None


def text_lines(path: str | os.PathLike[str], limits: Limits = Limits()) -> Iterator[tuple[int, str]]:
    """Yield ``(line_number, text)`` of a UTF-8 text file, streaming.

    Raises
    ------
    ReadError
        The file is too large, holds binary data (NUL bytes), is not UTF-8, has a
        line longer than ``limits.max_line_chars`` or more than ``limits.max_rows`` lines.
    """
    p = Path(path)
    size = p.stat().st_size
    if size > limits.max_bytes:
        raise ReadError(p, None, f"file is {size / 2**20:.0f} MiB; electrode files larger than "
                                 f"{limits.max_bytes / 2**20:.0f} MiB are refused (is this the right file?)")
    with p.open("rb") as fh:
        number = 0
        while True:
            raw = fh.readline(limits.max_line_chars + 1)
            if not raw:
                return
            number += 1
            if number > limits.max_rows:
                raise ReadError(p, number, f"more than {limits.max_rows} lines; refused as too large "
                                           "for an electrode file")
            if b"\x00" in raw:
                raise ReadError(p, number, "binary data (NUL byte): not a text electrode file")
            if len(raw) > limits.max_line_chars and not raw.endswith(b"\n"):
                raise ReadError(p, number, f"line longer than {limits.max_line_chars} characters: "
                                           "not a text electrode file")
            try:
                text = raw.decode("utf-8-sig" if number == 1 else "utf-8")
            except UnicodeDecodeError as exc:
                raise ReadError(p, number, f"not UTF-8 text (byte 0x{raw[exc.start]:02x} at column "
                                           f"{exc.start + 1})") from None
            yield number, text.rstrip("\r\n")


def parse_number(text: str, path: str | os.PathLike[str], line: int, what: str) -> float:
    """A coordinate as float: ``n/a``/``nan`` -> NaN; ReadError naming line and value otherwise."""
    t = text.strip()
    if t.lower() in _NA:
        return math.nan
    try:
        return float(t)
    except ValueError:
        shown = t if len(t) <= 40 else t[:37] + "..."
        raise ReadError(path, line, f"{what} {shown!r} is not a number") from None


def parse_unit(text: str, path: str | os.PathLike[str], line: int | None) -> str | None:
    """Canonical unit (``m``/``cm``/``mm``) of a unit string; None for ``n/a``; ReadError if unknown."""
    t = text.strip().strip("[]()").strip()
    if t.lower() in ("n/a", ""):
        return None
    if t.lower() not in LENGTH_UNITS:
        raise ReadError(path, line, f"unknown length unit {text.strip()!r} (use m, cm or mm)")
    return canonical_unit(t)


# ------------------------------------------------------------------ units
def judge_unit(channels: np.ndarray, fiducials: Mapping[str, np.ndarray]) -> tuple[str | None, str, float]:
    """Which unit makes these raw coordinates a human head.

    Parameters
    ----------
    channels : (n, 3) float64, raw values (unit unknown)
    fiducials : mapping name -> (3,) raw values

    Returns
    -------
    unit : str or None
        ``m``, ``cm`` or ``mm``; None when no unit makes the size plausible or
        nothing can be measured.
    measure : str
        ``"inter-preauricular distance"``, ``"electrode spread"`` or ``"nothing measurable"``.
    value : float
        The raw measured length (file units).
    """
    lpa, rpa = fiducials.get("lpa"), fiducials.get("rpa")
    if lpa is not None and rpa is not None and np.all(np.isfinite(lpa)) and np.all(np.isfinite(rpa)):
        value, measure, (lo, hi) = float(np.linalg.norm(rpa - lpa)), "inter-preauricular distance", PLAUSIBLE_IPA_M
    else:
        pts = channels[np.all(np.isfinite(channels), axis=1)] if len(channels) else channels
        if len(pts) < 4:
            return None, "nothing measurable", math.nan
        value = float(np.linalg.norm(pts.max(axis=0) - pts.min(axis=0)))
        measure, (lo, hi) = "electrode spread", PLAUSIBLE_SPREAD_M
    return (guess_length_unit(value, (lo, hi)) if math.isfinite(value) else None), measure, value


def _units_finding(message: str, path: str, values: dict[str, Any]) -> Finding:
    return Finding(code="input.units-suspect", severity="warn", message=message, subjects=(path,),
                   values=values, source="reader")


def _settle_unit(path: str, unit: str | None, unit_source: str | None, channels: np.ndarray,
                 fiducials: Mapping[str, np.ndarray]) -> tuple[str, str, list[Finding]]:
    guess, measure, value = judge_unit(channels, fiducials)
    values = {"measure": measure, "raw_value": value if math.isfinite(value) else None}
    what = f"{measure} {value:.4g}" if math.isfinite(value) else measure
    if unit is not None and unit_source == "option":
        if guess is not None and guess != unit:
            return unit, "option", [_units_finding(
                f"{path}: kept the unit given on the command line ({unit}), but the {what} "
                f"would fit a head in {guess}", path, {**values, "assumed_unit": unit, "fits": guess})]
        return unit, "option", []
    if unit is not None:
        if guess is None or guess == unit:
            return unit, "declared", []
        return guess, "assumed", [_units_finding(
            f"{path}: the file declares {unit}, but the {what} is not a human head in {unit}; "
            f"assumed {guess}", path, {**values, "declared_unit": unit, "assumed_unit": guess})]
    if guess is not None:
        return guess, "assumed", [_units_finding(
            f"{path}: no length unit given; assumed {guess} because the {what} fits a human head in {guess}",
            path, {**values, "assumed_unit": guess})]
    why = ("too few points to judge one" if not math.isfinite(value)
           else f"the {what} fits a human head in no unit")
    return "m", "assumed", [_units_finding(
        f"{path}: no length unit given and {why}; assumed metres",
        path, {**values, "assumed_unit": "m"})]


# ------------------------------------------------------------------ assembly
def assemble(path: str | os.PathLike[str], points: Sequence[Point], *, reader: str,
             unit: str | None = None, unit_source: str | None = None,
             landmarks: Mapping[str, Sequence[float]] | None = None,
             findings: Sequence[Finding] = (), extra: Mapping[str, Any] | None = None,
             frame: str = "device") -> Sensors:
    """Turn parsed rows into :class:`~prep.model.Sensors` in metres.

    Parameters
    ----------
    path : path
        The file read (for messages and provenance).
    points : sequence of Point
        Every data row in file order; raw values in the file's unit.
    reader : str
        Reader name for provenance.
    unit, unit_source : str or None
        The unit (``m``/``cm``/``mm``) and where it came from: ``"declared"``
        (file or sidecar) or ``"option"`` (the user). None: infer it.
    landmarks : mapping, optional
        Fiducials given apart from the rows (e.g. a sidecar), raw values in the same unit;
        they take precedence over rows naming the same fiducial.
    findings : sequence of Finding
        Findings the reader already raised.
    extra : mapping, optional
        Reader-specific provenance (coordinate system...).

    Raises
    ------
    ReadError
        No data rows at all.
    """
    path_s = str(path)
    if not points and not landmarks:
        raise ReadError(path, None, "no data rows (empty file or header only)")
    labels, originals, kinds, rows, heads, lines = [], [], [], [], [], []
    fids: dict[str, np.ndarray] = {}
    out_findings = list(findings)
    for pt in points:
        info = normalise_label(pt.label, pt.kind)
        xyz = np.asarray(pt.xyz, dtype=np.float64)
        if info.kind == "headshape":
            heads.append(xyz)
        elif info.kind == "fiducial":
            name = info.fiducial or info.label.lower()
            if name in fids:
                out_findings.append(Finding(
                    code="input.duplicate-label", severity="warn", subjects=(name,), source="reader",
                    message=f"{path_s}:{pt.line}: fiducial {name} given twice; the first one is used",
                    values={"line": pt.line}))
            else:
                fids[name] = xyz
        else:
            labels.append(info.label)
            originals.append(info.original)
            kinds.append(info.kind)
            rows.append(xyz)
            lines.append(pt.line)
    for name, value in (landmarks or {}).items():
        fids[name] = np.asarray(value, dtype=np.float64)
    raw = np.array(rows, dtype=np.float64).reshape(-1, 3)
    scalp = raw[np.array([k == "eeg" for k in kinds], dtype=bool)] if kinds else raw
    unit, unit_source, unit_findings = _settle_unit(path_s, unit, unit_source, scalp, fids)
    scale = LENGTH_UNITS[unit]
    for name, v in fids.items():
        if not np.all(np.isfinite(v)):
            out_findings.append(Finding(code="input.nonfinite", severity="fail", subjects=(name,), source="reader",
                                        message=f"{path_s}: fiducial {name} has a missing or non-finite "
                                                "coordinate; it is ignored"))
    good_fids = {k: v * scale for k, v in fids.items() if np.all(np.isfinite(v))}
    heads_arr = np.array(heads, dtype=np.float64).reshape(-1, 3) * scale
    return Sensors(labels=tuple(labels), positions=raw * scale, frame=frame, fiducials=good_fids,
                   headshape=heads_arr[np.all(np.isfinite(heads_arr), axis=1)], kinds=tuple(kinds),
                   original_labels=tuple(originals),
                   provenance=Provenance(file=path_s, reader=reader, unit=unit, unit_source=unit_source,
                                         extra={**(extra or {}), "channel_lines": lines}),
                   findings=tuple(out_findings) + tuple(unit_findings))

