"""``headprep new-reader``: scaffold a sensor-reader plugin package from a sample file.

The package (``headprep-NAME/``) holds a ``pyproject.toml`` declaring the
``headprep`` entry point, the reader module ``headprep_NAME.py`` (about 30
lines, built on :mod:`prep.electrodes`), the sample, and a test that runs the
conformance suite of :mod:`prep.testing` on it. The layout of the sample
(comment lines, header, delimiter, label/x/y/z columns, unit) is guessed and
written as constants at the top of the module for the author to confirm.
"""
from __future__ import annotations

import argparse
import re
import shutil
from collections import Counter
from pathlib import Path

import numpy as np

from ..atomic import atomic_dir
from ..electrodes import judge_unit
from ..errors import UsageError
from ..labels import fiducial_name
from ..readers import check_input_file

HELP = "scaffold a sensor-reader plugin package from a sample file"
DESCRIPTION = __doc__.split("\n\n", 1)[1]
_NAME = re.compile(r"^[a-z][a-z0-9_]{0,39}$")

_MODULE = '''"""headprep plugin: reads {name} electrode files ({suffix}).

Scaffolded by ``headprep new-reader`` from {sample}; check the constants below.
"""
from __future__ import annotations

from pathlib import Path

from prep import ReadError, SensorReader, Sensors, hookimpl
from prep.electrodes import Point, assemble, parse_number, parse_unit, text_lines

UNIT = {unit!r}  # length unit of this export (None: inferred from the size of the head)
DELIMITER = {delim!r}  # None: any run of blanks
HEADER_LINES = {header}  # non-comment lines before the data
COLUMNS = {columns!r}  # indices of label, x, y, z


def read_{name}(path: str | Path, units: str | None = None) -> Sensors:
    """Read a {name} file: positions (n, 3) float64 in metres, frame ``device``."""
    p = Path(path)
    points, seen = [], 0
    for number, text in text_lines(p):
        if not text.strip() or text.lstrip().startswith("#"):
            continue
        seen += 1
        if seen <= HEADER_LINES:
            continue
        cells = [c.strip() for c in (text.split(DELIMITER) if DELIMITER else text.split())]
        if len(cells) <= max(COLUMNS):
            raise ReadError(p, number, f"expected at least {{max(COLUMNS) + 1}} columns, found {{len(cells)}}")
        label = cells[COLUMNS[0]]
        xyz = tuple(parse_number(cells[i], p, number, f"{{a}} value of {{label!r}}")
                    for a, i in zip("xyz", COLUMNS[1:]))
        points.append(Point(label=label, xyz=xyz, line=number))
    if not points:
        raise ReadError(p, None, "no data rows")
    unit = parse_unit(units, p, None) if units else UNIT
    return assemble(p, points, reader="{name}", unit=unit,
                    unit_source="option" if units else ("declared" if UNIT else None))


@hookimpl
def headprep_register_sensor_readers() -> list[SensorReader]:
    return [SensorReader(name="{name}", suffixes=({suffix!r},), read=read_{name},
                         description="{name} electrode files", defaults={{"units": ""}})]
'''

_TEST = '''"""Conformance of the {name} reader (the suite ships with headprep as a pytest plugin)."""
from pathlib import Path

import headprep_{name}

SAMPLE = Path(__file__).parent / "{sample}"


def test_conforms(headprep_conformance):
    sensors = headprep_conformance(headprep_{name}, "{name}", SAMPLE)
    assert len(sensors) > 0
'''

_PYPROJECT = '''[build-system]
requires = ["setuptools>=68"]
build-backend = "setuptools.build_meta"

[project]
name = "headprep-{dash}"
version = "0.1.0"
description = "headprep sensor reader for {name} electrode files"
requires-python = ">=3.11"
dependencies = ["headprep"]

[project.entry-points.headprep]
{name} = "headprep_{name}"

[tool.setuptools]
py-modules = ["headprep_{name}"]
'''

_README = '''# headprep-{dash}

A headprep sensor reader for `{suffix}` files. Install with `pip install -e .`,
then `headprep plugins` lists it and `headprep inspect FILE{suffix}` uses it.
Run the conformance suite with `python -m pytest tests`.
'''


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("name", metavar="NAME", help="reader name: lower case letters, digits, underscores")
    parser.add_argument("--sample", required=True, metavar="FILE",
                        help="a sample file of the format, with nasion, LPA and RPA rows")
    parser.add_argument("--out", default=".", metavar="DIR", help="where to create headprep-NAME/ (default .)")
    parser.add_argument("--json", action="store_true", help="print one JSON document on stdout")


def _is_number(text: str) -> bool:
    try:
        float(text)
    except ValueError:
        return False
    return True


def _first_triple(cells: list[str]) -> int | None:
    """Index of the first run of three numeric cells (x, y, z), or None."""
    return next((j for j in range(len(cells) - 2) if all(_is_number(c) for c in cells[j:j + 3])), None)


def _split(text: str, delim: str | None) -> list[str]:
    return [c.strip() for c in (text.split(delim) if delim else text.split())]


_UNIT_LINE = re.compile(r"\bunits?\s*[=:]\s*(mm|cm|m)\b", re.IGNORECASE)
_LABEL_NAMES = ("label", "name", "channel", "electrode", "id")


def guess_layout(sample: Path) -> dict[str, object]:
    """Delimiter, header lines, label/x/y/z columns and unit of a sample file.

    The data rows are the lines holding three numbers in a row; the lines before
    the first of them (a magic line, a unit line, a column header) are header
    lines. A header naming ``x``, ``y``, ``z`` (and a label column) wins over the
    guess; a ``unit=cm`` style line before the data gives the unit, else it is
    judged from the size of the head.
    """
    text = sample.read_text(encoding="utf-8", errors="replace").splitlines()[:5000]
    lines = [t for t in text if t.strip() and not t.lstrip().startswith("#")]
    if not lines:
        raise UsageError(f"{sample}: no data lines in the sample")
    # the delimiter that makes the most rows hold x, y, z (whitespace last: it splits almost anything)
    delim = max(("\t", ",", ";", None),
                key=lambda d: sum(_first_triple(_split(t, d)) is not None for t in lines) if d is None or
                any(d in t for t in lines) else -1)
    split = [_split(t, delim) for t in lines]
    starts = [_first_triple(r) for r in split]
    first = next((k for k, j in enumerate(starts) if j is not None), None)
    if first is None:
        raise UsageError(f"{sample}: cannot find rows of three coordinates (x y z) in the sample")
    header = first
    j = Counter(j for j in starts if j is not None).most_common(1)[0][0]
    columns = [j - 1 if j > 0 else (j + 3 if all(len(r) > j + 3 for r in split[first:] if r) else 0), j, j + 1, j + 2]
    if header:
        names = [c.lower() for c in split[first - 1]]
        for k, axis in enumerate("xyz", start=1):
            hit = [i for i, n in enumerate(names) if n == axis or n.startswith((axis + "_", axis + " ", axis + "["))]
            if hit:
                columns[k] = hit[0]
        named = [i for i, n in enumerate(names) if n in _LABEL_NAMES and i not in columns[1:]]
        if named:
            columns[0] = named[0]
    rows = [r for r in split[first:] if len(r) > max(columns) and all(_is_number(r[i]) for i in columns[1:])]
    xyz = np.array([[float(r[i]) for i in columns[1:]] for r in rows], dtype=float).reshape(-1, 3)
    fids = {fiducial_name(r[columns[0]]): xyz[k] for k, r in enumerate(rows) if fiducial_name(r[columns[0]])}
    declared = next((m.group(1).lower() for t in text[:max(1, text.index(lines[first]))]
                     if (m := _UNIT_LINE.search(t))), None)
    unit = declared or judge_unit(xyz, fids)[0]
    return {"delim": delim, "header": header, "columns": tuple(columns), "unit": unit}


def run(args: argparse.Namespace, ctx) -> int:  # noqa: ANN001
    name = args.name.replace("-", "_")
    if not _NAME.match(name):
        raise UsageError(f"reader name {args.name!r}: use lower case letters, digits and underscores")
    sample = check_input_file(args.sample, "sample")
    suffix = "".join(sample.suffixes[-1:]).lower() or f".{name}"
    layout = guess_layout(sample)
    target = Path(args.out) / f"headprep-{name.replace('_', '-')}"
    fields = {"name": name, "dash": name.replace("_", "-"), "suffix": suffix, "sample": sample.name, **layout}
    with atomic_dir(target) as tmp:
        (tmp / f"headprep_{name}.py").write_text(_MODULE.format(**fields), encoding="utf-8")
        (tmp / "pyproject.toml").write_text(_PYPROJECT.format(**fields), encoding="utf-8")
        (tmp / "README.md").write_text(_README.format(**fields), encoding="utf-8")
        (tmp / "tests").mkdir()
        shutil.copyfile(sample, tmp / "tests" / sample.name)
        (tmp / "tests" / f"test_{name}.py").write_text(_TEST.format(**fields), encoding="utf-8")
    files = sorted(str(p.relative_to(target)) for p in target.rglob("*") if p.is_file())
    doc = {"package": str(target), "files": files, "layout": {k: layout[k] for k in layout}}
    ctx.emit(doc, lambda: f"created {target}\n" + "\n".join(f"  {f}" for f in files)
             + f"\nnext: check the constants in headprep_{name}.py, then `pip install -e {target}` "
               f"and `python -m pytest {target / 'tests'}`")
    return 0
