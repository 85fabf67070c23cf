"""The BIDS electrodes.tsv + coordsystem.json reader and the canonical writer.

Field names and allowed values checked here are written from the BIDS
specification (EEG: electrodes.tsv, coordsystem.json; BIDS 1.8/1.9).
"""
from __future__ import annotations

from pathlib import Path

import json

import numpy as np
import pytest

from prep import Sensors, make_registry
from prep.readers import read_sensors

SAMPLES = Path(__file__).parent / "samples"


@pytest.fixture(scope="module")
def reg():
    return make_registry()


def _pair(write, rows: str, meta: dict | None, prefix: str = "sub-01_space-Other") -> object:
    if meta is not None:
        write(f"{prefix}_coordsystem.json", json.dumps(meta))
    return write(f"{prefix}_electrodes.tsv", rows)


def test_longer_suffix_wins(reg):
    d = reg.for_file("sensor_reader", SAMPLES / "sub-demo_electrodes.tsv")
    assert d.name == "bids"
    assert reg.for_file("sensor_reader", SAMPLES / "lab_points.csv").name == "table"


def test_sample_with_landmarks(reg):
    s = read_sensors(reg, SAMPLES / "sub-demo_electrodes.tsv")
    assert s.frame == "device" and s.provenance.unit == "m" and s.provenance.unit_source == "declared"
    np.testing.assert_allclose(s.fiducials["nasion"], [0, 0.0961, -0.003])
    assert s.provenance.extra["EEGCoordinateSystem"] == "Other"


def test_landmarks_in_other_units_are_converted(reg, write):
    meta = {"EEGCoordinateSystem": "Other", "EEGCoordinateUnits": "mm",
            "AnatomicalLandmarkCoordinates": {"Nasion": [0, 9.5, 0], "LPA": [-7.5, 0, 0], "RPA": [7.5, 0, 0]},
            "AnatomicalLandmarkCoordinateUnits": "cm"}
    s = read_sensors(reg, _pair(write, "name\tx\ty\tz\nCz\t0\t0\t95\n", meta))
    np.testing.assert_allclose(s.fiducials["lpa"], [-0.075, 0, 0])
    np.testing.assert_allclose(s.positions, [[0, 0, 0.095]])


def test_landmarks_of_another_system_are_not_used(reg, write):
    meta = {"EEGCoordinateSystem": "CapTrak", "EEGCoordinateUnits": "mm",
            "AnatomicalLandmarkCoordinates": {"NAS": [0, 9.5, 0]}, "AnatomicalLandmarkCoordinateSystem": "Other"}
    rows = "name\tx\ty\tz\nNAS\t0\t95\t0\nLPA\t-75\t0\t0\nRPA\t75\t0\t0\nCz\t0\t0\t95\n"
    s = read_sensors(reg, _pair(write, rows, meta))
    np.testing.assert_allclose(s.fiducials["nasion"], [0, 0.095, 0])  # from the rows
    assert "AnatomicalLandmarkCoordinates_ignored" in s.provenance.extra


def test_headshape_rows_and_na(reg, write):
    rows = ("name\tx\ty\tz\ttype\nCz\t0\t0\t95\tcup\nHSP01\t1\t2\t90\tn/a\nX\t3\t4\t88\theadshape\n"
            "Fp1\tn/a\tn/a\tn/a\tcup\n")
    s = read_sensors(reg, _pair(write, rows, {"EEGCoordinateSystem": "Other", "EEGCoordinateUnits": "mm"}))
    assert s.labels == ("Cz", "Fp1") and len(s.headshape) == 2
    assert np.isnan(s.positions[1]).all()


def test_missing_sidecar_infers_units(reg, write):
    rows = "name\tx\ty\tz\nLPA\t-7.5\t0\t0\nRPA\t7.5\t0\t0\nCz\t0\t0\t9.5\n"
    s = read_sensors(reg, _pair(write, rows, None))
    assert s.provenance.unit == "cm" and any(f.code == "input.units-suspect" for f in s.findings)


def test_units_option(reg, write):
    rows = "name\tx\ty\tz\nCz\t0\t0\t95\n"
    s = read_sensors(reg, _pair(write, rows, {"EEGCoordinateSystem": "Other", "EEGCoordinateUnits": "m"}), units="mm")
    assert s.provenance.unit_source == "option"
    np.testing.assert_allclose(s.positions, [[0, 0, 0.095]])


# ------------------------------------------------------------------ what we write, checked against the spec
#: coordsystem.json fields for EEG and their JSON types (BIDS specification, EEG section and appendix).
_COORDSYSTEM_FIELDS = {
    "EEGCoordinateSystem": str, "EEGCoordinateUnits": str, "EEGCoordinateSystemDescription": str,
    "FiducialsDescription": str, "FiducialsCoordinates": dict, "FiducialsCoordinateSystem": str,
    "FiducialsCoordinateUnits": str, "FiducialsCoordinateSystemDescription": str,
    "AnatomicalLandmarkCoordinates": dict, "AnatomicalLandmarkCoordinateSystem": str,
    "AnatomicalLandmarkCoordinateUnits": str, "AnatomicalLandmarkCoordinateSystemDescription": str,
    "IntendedFor": (str, list),
}
_REQUIRED = ("EEGCoordinateSystem", "EEGCoordinateUnits")
_UNITS = {"m", "mm", "cm", "n/a"}  # BIDS: allowed values of *CoordinateUnits


def _check_bids(tsv, side) -> None:
    meta = json.loads(side.read_text())
    for key in _REQUIRED:
        assert key in meta
    for key, value in meta.items():
        assert key in _COORDSYSTEM_FIELDS, f"unknown coordsystem field {key}"
        assert isinstance(value, _COORDSYSTEM_FIELDS[key]), key
    for key in ("EEGCoordinateUnits", "AnatomicalLandmarkCoordinateUnits"):
        if key in meta:
            assert meta[key] in _UNITS
    if meta["EEGCoordinateSystem"] == "Other":  # the description is REQUIRED then
        assert meta["EEGCoordinateSystemDescription"]
    for name, xyz in meta.get("AnatomicalLandmarkCoordinates", {}).items():
        assert isinstance(name, str) and len(xyz) == 3 and all(isinstance(v, float) for v in xyz)
    lines = tsv.read_text().splitlines()
    header = lines[0].split("\t")
    assert header[:4] == ["name", "x", "y", "z"]  # REQUIRED and in this order
    for line in lines[1:]:
        cells = line.split("\t")
        assert len(cells) == len(header) and cells[0]
        for v in cells[1:4]:
            assert v == "n/a" or np.isfinite(float(v))


def test_writer_output_follows_the_specification(reg, tmp_path):
    s = read_sensors(reg, SAMPLES / "lab_points.csv")
    writer = reg.get("sensor_writer", "bids")
    tsv, side = writer.write(s, tmp_path / "sub-x_electrodes.tsv")
    assert side.name == "sub-x_coordsystem.json"
    _check_bids(tsv, side)


def test_writer_nan_is_na(reg, tmp_path):
    s = Sensors(labels=("Cz", "Fp1"), positions=[[0, 0, 0.09], [np.nan, 0.08, 0.02]], frame="anatomy")
    tsv, side = reg.get("sensor_writer", "bids").write(s, tmp_path / "electrodes.tsv")
    assert side.name == "coordsystem.json" and "n/a" in tsv.read_text()
    _check_bids(tsv, side)


def test_electrode_named_like_a_fiducial_survives_the_round_trip(reg, tmp_path):
    s = Sensors(labels=("Nz", "Cz", "HEOG"), positions=[[0, 0.09, 0], [0, 0, 0.09], [0.03, 0.08, -0.01]],
                frame="anatomy", kinds=("eeg", "eeg", "eog"))
    tsv, _ = reg.get("sensor_writer", "bids").write(s, tmp_path / "sub-t_electrodes.tsv")
    back = read_sensors(reg, tsv)
    assert back.labels == s.labels and back.kinds == s.kinds and "nasion" not in back.fiducials
