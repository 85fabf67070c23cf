"""The delimited-table reader: headers, delimiters, units, kinds."""
from __future__ import annotations

import numpy as np
import pytest

from prep import make_registry
from prep.readers import read_sensors

HEAD_MM = """LPA -75 0 0
RPA 75 0 0
NAS 0 95 0
Cz 0 0 95
"""


@pytest.fixture(scope="module")
def reg():
    return make_registry()


def test_comment_declares_units(reg, write):
    p = write("a.csv", "# units: cm\nlabel,x,y,z\nLPA,-7.5,0,0\nRPA,7.5,0,0\nNAS,0,9.5,0\nCz,0,0,9.5\n")
    s = read_sensors(reg, p)
    assert s.provenance.unit == "cm" and s.provenance.unit_source == "declared"
    np.testing.assert_allclose(s.positions, [[0, 0, 0.095]])
    assert s.findings == ()


@pytest.mark.parametrize("header", ["Name\tZ_mm\tY_mm\tX_mm", "channel;z [mm];y [mm];x [mm]",
                                    "Electrode z(mm) y(mm) x(mm)"])
def test_header_units_any_order_and_case(reg, write, header):
    delim = "\t" if "\t" in header else (";" if ";" in header else " ")
    rows = [("LPA", 0, 0, -75), ("RPA", 0, 0, 75), ("NAS", 0, 95, 0), ("Cz", 95, 0, 0)]
    text = header + "\n" + "\n".join(delim.join(str(v) for v in r) for r in rows) + "\n"
    s = read_sensors(reg, write("b.txt", text))
    assert s.provenance.unit == "mm"
    np.testing.assert_allclose(s.positions, [[0, 0, 0.095]])
    np.testing.assert_allclose(s.fiducials["lpa"], [-0.075, 0, 0])


def test_sidecar_units(reg, write):
    write("c.json", '{"units": "mm"}')
    s = read_sensors(reg, write("c.csv", "label,x,y,z\n" + HEAD_MM.replace(" ", ",")))
    assert s.provenance.unit == "mm" and s.provenance.unit_source == "declared"


def test_option_overrides_file(reg, write):
    p = write("d.csv", "# units: cm\nlabel,x,y,z\n" + HEAD_MM.replace(" ", ","))
    s = read_sensors(reg, p, units="mm")
    assert s.provenance.unit_source == "option"
    np.testing.assert_allclose(s.positions, [[0, 0, 0.095]])


def test_units_inferred_from_ear_distance(reg, write):
    s = read_sensors(reg, write("e.xyz", HEAD_MM))  # no header, no unit: 150 units between the ears
    assert s.provenance.unit == "mm" and s.provenance.unit_source == "assumed"
    (f,) = [f for f in s.findings if f.code == "input.units-suspect"]
    assert f.severity == "warn" and "inter-preauricular" in f.message and "mm" in f.message


def test_units_inferred_from_spread_without_fiducials(reg, write):
    text = "label x y z\n" + "".join(f"E{i} {8 * np.cos(a):.3f} {8 * np.sin(a):.3f} 3\n"
                                     for i, a in enumerate(np.linspace(0, 6, 12)))
    s = read_sensors(reg, write("f.txt", text))
    assert s.provenance.unit == "cm"
    assert any("electrode spread" in f.message for f in s.findings)


def test_declared_but_implausible_unit_is_corrected(reg, write):
    p = write("g.csv", "# units: mm\nlabel,x,y,z\nLPA,-0.075,0,0\nRPA,0.075,0,0\nCz,0,0,0.095\n")
    s = read_sensors(reg, p)
    assert s.provenance.unit == "m" and s.provenance.unit_source == "assumed"
    assert any(f.code == "input.units-suspect" and "declares mm" in f.message for f in s.findings)


def test_kind_column_and_label_kinds(reg, write):
    text = ("label,x,y,z,type\nNz,0,95,0,electrode\nnasion,0,96,0,fiducial\nLPA,-75,0,0,\nRPA,75,0,0,\n"
            "p1,1,2,90,headshape\nVEOG,20,80,-20,\nM1,-70,-20,-30,ref\nGND,0,60,80,\n")
    s = read_sensors(reg, write("h.csv", text), units="mm")
    assert s.labels == ("Nz", "VEOG", "M1", "GND")
    assert s.kinds == ("eeg", "eog", "ref", "gnd")
    assert len(s.headshape) == 1 and set(s.fiducials) == {"nasion", "lpa", "rpa"}


def test_labels_normalised_keeping_originals(reg, write):
    s = read_sensors(reg, write("i.csv", "label,x,y,z\n fp1 ,1,80,20\nT3,-80,0,20\nT3,-80,0,21\n"), units="mm")
    assert s.labels == ("Fp1", "T7", "T7")  # duplicates kept for the checks
    assert s.original_labels == ("fp1", "T3", "T3")


def test_na_is_nan_not_an_error(reg, write):
    s = read_sensors(reg, write("j.csv", "label,x,y,z\nFp1,n/a,80,20\nCz,0,0,95\n"), units="mm")
    assert np.isnan(s.positions[0, 0])


def test_quoted_csv_and_trailing_delimiter(reg, write):
    s = read_sensors(reg, write("k.csv", 'label,x,y,z\n"EOG  left, upper",1,2,3,\n" fp 1 ",1,2,3\n'), units="m")
    assert s.labels == ("EOG left, upper", "Fp1") and s.kinds == ("eog", "eeg")


def test_other_x_columns_are_not_coordinates(reg, write):
    s = read_sensors(reg, write("l.csv", "label,x_err,x_mm,y_mm,z_mm\nCz,0.5,0,0,95\n"))
    assert s.provenance.unit == "mm"
    np.testing.assert_allclose(s.positions, [[0, 0, 0.095]])
