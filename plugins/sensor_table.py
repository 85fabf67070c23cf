"""Built-in plugin ``sensor_table``: delimited text electrode files with a header.

Format (see docs/electrode-files.md): optional comment lines starting with
``#`` (``# units: mm`` declares the unit), then a header naming a label column
(``label``, ``name``, ``channel``, ``electrode``...) and ``x``, ``y``, ``z``
columns in any order and case, optionally decorated with the unit (``x_mm``,
``x [mm]``, ``x(mm)``), and an optional kind column (``kind``/``type``: electrode,
fiducial, headshape, eog, ref, gnd...). Columns are separated by tabs, commas,
semicolons or blanks (sniffed from the header line). A file whose first line is
already ``label x y z`` data is read as having the header ``label x y z``.

The unit comes from, in this order: the ``units=`` option, the comment line,
the column headers, a sidecar ``<stem>.json`` with a ``"units"`` key; else it is
inferred from the size of the head (``input.units-suspect``).
"""
from __future__ import annotations

import csv
import json
import re
from pathlib import Path

from prep import ReadError, SensorReader, Sensors, hookimpl
from prep.electrodes import Point, assemble, parse_number, parse_unit, text_lines
from prep.units import LENGTH_UNITS

_LABEL_NAMES = {"label", "labels", "name", "names", "channel", "channels", "channel_name", "ch_name",
                "electrode", "electrodes", "sensor", "site", "ch", "chan"}
_KIND_NAMES = {"kind", "type", "channel_type", "point_type", "category", "role"}
_COORD = re.compile(r"^([xyz])(?:[\s_]*([\[(])?\s*([^\s\[\]()]+)\s*[\])]?)?$")
_UNIT_COMMENT = re.compile(r"^\s*(?:#|%|//)+\s*units?\s*[:=]\s*(\S+)", re.IGNORECASE)


def _delimiter(text: str) -> str | None:
    for d in ("\t", ",", ";"):
        if d in text:
            return d
    return None


def _split(text: str, delim: str | None, path: Path, line: int) -> list[str]:
    if delim is None:
        return text.split()
    try:
        cells = next(csv.reader([text], delimiter=delim, skipinitialspace=True))
    except (csv.Error, StopIteration) as exc:
        raise ReadError(path, line, f"cannot split the line into columns: {exc}") from None
    return [c.strip() for c in cells]


def _is_number(text: str) -> bool:
    try:
        float(text)
    except ValueError:
        return text.strip().lower() in ("n/a", "nan")
    return True


def _header(cells: list[str], path: Path, line: int) -> tuple[dict[str, int], str | None]:
    """Column indices of label, x, y, z (and kind), plus a unit named in the headers."""
    cols: dict[str, int] = {}
    units: set[str] = set()
    for i, cell in enumerate(cells):
        name = cell.strip().lower()
        m = _COORD.match(name)
        # "x_mm" or "x [mm]" name a unit; "x [parsec]" is an error; "x_err" is another column
        if m and m.group(3) and not m.group(2) and m.group(3) not in LENGTH_UNITS:
            m = None
        if m and m.group(1) not in cols:
            cols[m.group(1)] = i
            if m.group(3):
                u = parse_unit(m.group(3), path, line)
                if u is not None:
                    units.add(u)
        elif name in _LABEL_NAMES and "label" not in cols:
            cols["label"] = i
        elif name in _KIND_NAMES and "kind" not in cols:
            cols["kind"] = i
    missing = [c for c in ("label", "x", "y", "z") if c not in cols]
    if missing:
        shown = ", ".join(repr(c) for c in cells[:8])
        raise ReadError(path, line, f"the header must name a label column and x, y, z columns; "
                                    f"missing {', '.join(missing)} in {shown}")
    if len(units) > 1:
        raise ReadError(path, line, f"the coordinate columns name different units: {', '.join(sorted(units))}")
    return cols, (units.pop() if units else None)


def _sidecar_unit(path: Path) -> str | None:
    side = path.with_suffix(".json")
    if not side.is_file() or side == path:
        return None
    if side.stat().st_size > 2**20:
        raise ReadError(side, None, "sidecar JSON larger than 1 MiB")
    try:
        meta = json.loads(side.read_text(encoding="utf-8"))
    except json.JSONDecodeError as exc:
        raise ReadError(side, exc.lineno, f"not valid JSON: {exc.msg}") from None
    except UnicodeDecodeError:
        raise ReadError(side, None, "not UTF-8 text") from None
    if not isinstance(meta, dict):
        return None
    for key in ("units", "Units", "unit", "Unit"):
        if key in meta:
            if not isinstance(meta[key], str):
                raise ReadError(side, None, f"'{key}' must be a string such as \"mm\", got {meta[key]!r}")
            return parse_unit(meta[key], side, None)
    return None


def read_table(path: str | Path, units: str | None = None) -> Sensors:
    """Read a delimited electrode table.

    Parameters
    ----------
    path : path
    units : str, optional
        The user's statement of the unit (``m``, ``cm``, ``mm``), overriding the file.

    Returns
    -------
    Sensors
        Positions (n, 3) float64 in metres, frame ``device``.

    Raises
    ------
    ReadError
        Empty file, header only, wrong column count, non-numeric value, unknown
        unit, binary or oversized file: naming the file and line.
    """
    p = Path(path)
    option = parse_unit(units, p, None) if units is not None else None
    declared: dict[str, str] = {}
    cols: dict[str, int] | None = None
    ncols = 0
    delim: str | None = None
    points: list[Point] = []
    for number, text in text_lines(p):
        stripped = text.strip()
        if not stripped:
            continue
        if stripped.startswith(("#", "%", "//")):
            m = _UNIT_COMMENT.match(stripped)
            if m and cols is None:
                u = parse_unit(m.group(1), p, number)
                if u is not None:
                    declared[f"comment line {number}"] = u
            continue
        if cols is None:
            delim = _delimiter(text)
            cells = _split(text, delim, p, number)
            if len(cells) in (4, 5) and all(_is_number(c) for c in cells[1:4]):
                cols = {"label": 0, "x": 1, "y": 2, "z": 3} | ({"kind": 4} if len(cells) == 5 else {})
                ncols = len(cells)
            else:
                cols, hunit = _header(cells, p, number)
                ncols = len(cells)
                if hunit is not None:
                    declared[f"column headers (line {number})"] = hunit
                continue
        cells = _split(text, delim, p, number)
        while len(cells) > ncols and not cells[-1]:
            cells.pop()  # a trailing delimiter
        if len(cells) != ncols:
            raise ReadError(p, number, f"expected {ncols} columns, found {len(cells)}")
        label = cells[cols["label"]]
        if not label:
            raise ReadError(p, number, "empty label")
        xyz = tuple(parse_number(cells[cols[a]], p, number, f"{a} value of {label!r}") for a in "xyz")
        points.append(Point(label=label, xyz=xyz, line=number,
                            kind=cells[cols["kind"]] if "kind" in cols else None))
    if cols is None:
        raise ReadError(p, None, "empty file: no header and no data rows")
    if not points:
        raise ReadError(p, None, "no data rows after the header")
    side = _sidecar_unit(p)
    if side is not None:
        declared[f"sidecar {p.with_suffix('.json').name}"] = side
    if len(set(declared.values())) > 1:
        said = "; ".join(f"{k} says {v}" for k, v in declared.items())
        raise ReadError(p, None, f"the declared units disagree: {said}")
    unit = option or (next(iter(declared.values())) if declared else None)
    source = "option" if option else ("declared" if declared else None)
    return assemble(p, points, reader="table", unit=unit, unit_source=source,
                    extra={"unit_declared_by": next(iter(declared)) if declared else None,
                           "delimiter": {"\t": "tab", ",": "comma", ";": "semicolon"}.get(delim or "", "blanks")})


@hookimpl
def headprep_register_sensor_readers() -> list[SensorReader]:
    return [SensorReader(name="table", suffixes=(".csv", ".tsv", ".txt", ".xyz"), read=read_table,
                         description="delimited text (CSV, TSV, blanks) with a label/x/y/z header",
                         defaults={"units": ""})]
