"""Helpers and a pytest plugin for plugin authors: the sensor-reader conformance suite.

Loaded by pytest through the ``pytest11`` entry point; it only adds a fixture
and helpers, never changes a test run by itself. A reader package tests itself
with a few lines::

    from prep.testing import assert_reader_conforms

    def test_conforms(headprep_conformance):
        headprep_conformance(my_plugin_module, "my_reader", "tests/sample.ext")

The suite (:func:`assert_reader_conforms`) checks what every sensor reader
must do: positions (n, 3) float64 in metres and finite, unique labels, the
three fiducials found, a damaged row raising :class:`prep.ReadError` naming the
file and line, and an exact round trip through the canonical BIDS TSV.
"""
from __future__ import annotations

import re
from collections.abc import Callable
from pathlib import Path
from types import ModuleType

import numpy as np
import pytest

from .errors import ReadError
from .model import FIDUCIALS, Sensors
from .readers import read_sensors
from .registry import Registry, make_registry

__all__ = ["check_sensors", "assert_reader_conforms", "damage_sample", "headprep_conformance",
           "HEAD_LIMIT_M"]

#: no coordinate of a head in any sensible frame is farther than this from the origin (m, common practice).
HEAD_LIMIT_M = 0.5
_NUMBER = re.compile(r"[-+]?(?:\d+\.\d*|\.\d+|\d+)(?:[eE][-+]?\d+)?")


def check_sensors(obj: object, *, fiducials: bool = True, unique: bool = True) -> None:
    """Assert that ``obj`` is a well-formed :class:`~prep.model.Sensors` in metres.

    Parameters
    ----------
    obj : object
        What a reader returned.
    fiducials : bool
        Require nasion, lpa and rpa.
    unique : bool
        Require unique labels.

    Raises
    ------
    AssertionError
        Listing every problem found.
    """
    problems: list[str] = []
    if not isinstance(obj, Sensors):
        raise AssertionError(f"expected Sensors, got {type(obj).__name__}")
    pos = obj.positions
    if pos.dtype != np.float64 or pos.ndim != 2 or pos.shape[1] != 3:
        problems.append(f"positions must be (n, 3) float64, got {pos.shape} {pos.dtype}")
    if len(obj) == 0:
        problems.append("no channels")
    if not np.all(np.isfinite(pos)):
        bad = [obj.labels[i] for i in np.flatnonzero(~np.all(np.isfinite(pos), axis=1))]
        problems.append(f"non-finite positions for {bad}")
    allpts = np.vstack([pos.reshape(-1, 3), obj.headshape.reshape(-1, 3),
                        *[v[None] for v in obj.fiducials.values()]])
    finite = allpts[np.all(np.isfinite(allpts), axis=1)]
    if len(finite) and np.abs(finite).max() > HEAD_LIMIT_M:
        problems.append(f"a coordinate is {np.abs(finite).max():.3g} m from the origin: not metres?")
    if unique and len(set(obj.labels)) != len(obj.labels):
        dup = sorted({lab for lab in obj.labels if obj.labels.count(lab) > 1})
        problems.append(f"duplicate labels {dup}")
    if fiducials:
        missing = [f for f in FIDUCIALS if f not in obj.fiducials]
        if missing:
            problems.append(f"fiducials not found: {missing}")
    if not isinstance(obj.frame, str) or not obj.frame:
        problems.append("no frame name")
    if obj.provenance.unit is None:
        problems.append("provenance.unit (the file's unit) not recorded")
    if problems:
        raise AssertionError("; ".join(problems))


def damage_sample(sample: Path, out: Path) -> int:
    """Copy ``sample`` to ``out`` with the last number of its last numeric line replaced by ``1.2.3x``.

    Returns
    -------
    int
        The 1-based line number damaged.
    """
    lines = sample.read_text(encoding="utf-8").splitlines(keepends=True)
    for i in range(len(lines) - 1, -1, -1):
        matches = list(_NUMBER.finditer(lines[i]))
        if matches and not lines[i].lstrip().startswith(("#", "%")):
            m = matches[-1]
            lines[i] = lines[i][: m.start()] + "1.2.3x" + lines[i][m.end():]
            out.write_text("".join(lines), encoding="utf-8")
            return i + 1
    raise AssertionError(f"{sample}: no line with a number to damage")


def assert_reader_conforms(registry: Registry, reader: str, sample: str | Path, workdir: str | Path, *,
                           bad_sample: str | Path | None = None, bad_line: int | None = None) -> Sensors:
    """Run the conformance suite for one sensor reader on one sample file.

    Parameters
    ----------
    registry : Registry
        With the reader registered (``make_registry(plugins=[module])`` works).
    reader : str
        The reader's name.
    sample : path
        A good file of the reader's format with nasion, lpa and rpa.
    workdir : path
        An empty scratch directory (pytest's ``tmp_path``).
    bad_sample, bad_line : optional
        A damaged file and the line the error must name; by default the sample is
        damaged by :func:`damage_sample`.

    Returns
    -------
    Sensors
        What the reader returned for ``sample``.
    """
    sample, workdir = Path(sample), Path(workdir)
    sensors = read_sensors(registry, sample, reader=reader)
    check_sensors(sensors)
    assert sensors.provenance.reader == reader
    # the canonical round trip: write BIDS, read it back, get the same numbers
    writer = registry.get("sensor_writer", "bids")
    out = workdir / "roundtrip_electrodes.tsv"
    registry.call(writer, "write", sensors, out)
    back = read_sensors(registry, out, reader="bids")
    assert back.labels == sensors.labels, (back.labels, sensors.labels)
    assert back.kinds == sensors.kinds
    np.testing.assert_array_equal(back.positions, sensors.positions)
    np.testing.assert_array_equal(back.headshape, sensors.headshape)
    assert set(back.fiducials) == set(sensors.fiducials)
    for k, v in sensors.fiducials.items():
        np.testing.assert_array_equal(back.fiducials[k], v)
    # a damaged row names the file and the line
    if bad_sample is None:
        bad_sample = workdir / f"damaged_{sample.name}"
        bad_line = damage_sample(sample, Path(bad_sample))
    with pytest.raises(ReadError) as info:
        read_sensors(registry, bad_sample, reader=reader)
    assert Path(info.value.path).name == Path(bad_sample).name, info.value
    assert info.value.line is not None, f"ReadError without a line number: {info.value}"
    if bad_line is not None:
        assert info.value.line == bad_line, f"error names line {info.value.line}, damage is on line {bad_line}"
    return sensors


@pytest.fixture
def headprep_conformance(tmp_path: Path) -> Callable[..., Sensors]:
    """``run(plugin_module_or_None, reader_name, sample, **kw)``: the conformance suite in ``tmp_path``.

    With a module, the registry holds the installed plugins plus that module
    (unless an installed one has the same name); with None, the installed plugins only.
    """
    def run(plugin: ModuleType | None, reader: str, sample: str | Path, **kw: object) -> Sensors:
        reg = make_registry()
        names = {d.name for d in reg.descriptors("sensor_reader")}
        if plugin is not None and reader not in names:
            reg = make_registry(plugins=[plugin])
        return assert_reader_conforms(reg, reader, sample, tmp_path, **kw)

    return run
