"""Every bad input of the electrode-file issue, one test each."""
from __future__ import annotations

import pytest

from prep import ReadError, make_registry
from prep.errors import UsageError
from prep.electrodes import Limits, text_lines
from prep.readers import read_sensors
from prep_plugins.check_sensors import check_sensors


@pytest.fixture(scope="module")
def reg():
    return make_registry()


def _codes(reg, sensors):
    found = list(sensors.findings) + check_sensors(sensors)
    return {f.code: f for f in found}


@pytest.mark.parametrize("name", ["empty.csv", "sub-1_electrodes.tsv"])
def test_empty_file(reg, write, name):
    with pytest.raises(ReadError, match="empty file"):
        read_sensors(reg, write(name, ""))


@pytest.mark.parametrize("name, text", [("h.csv", "label,x,y,z\n"), ("sub-1_electrodes.tsv", "name\tx\ty\tz\n")])
def test_header_only(reg, write, name, text):
    with pytest.raises(ReadError, match="no data rows"):
        read_sensors(reg, write(name, text))


@pytest.mark.parametrize("name, text", [("w.csv", "label,x,y,z\nFp1,1,2,3\nCz,1,2\n"),
                                        ("sub-1_electrodes.tsv", "name\tx\ty\tz\nFp1\t1\t2\t3\nCz\t1\t2\n")])
def test_wrong_column_count_names_line(reg, write, name, text):
    with pytest.raises(ReadError) as info:
        read_sensors(reg, write(name, text))
    assert info.value.line == 3 and "expected 4" in info.value.reason and "found 3" in info.value.reason
    assert info.value.path.endswith(name)


@pytest.mark.parametrize("name, text", [("n.csv", "label,x,y,z\nFp1,1,2,3\nCz,1,two,3\n"),
                                        ("sub-1_electrodes.tsv", "name\tx\ty\tz\nFp1\t1\t2\t3\nCz\t1\ttwo\t3\n")])
def test_non_numeric_value_names_line_and_value(reg, write, name, text):
    with pytest.raises(ReadError) as info:
        read_sensors(reg, write(name, text))
    assert info.value.line == 3 and "'two'" in str(info.value) and "'Cz'" in str(info.value)


def test_nan_and_inf_are_findings_naming_the_label(reg, write):
    s = read_sensors(reg, write("f.csv", "label,x,y,z\nFp1,nan,80,20\nCz,0,inf,95\nPz,0,-70,70\n"), units="mm")
    f = _codes(reg, s)["input.nonfinite"]
    assert set(f.subjects) == {"Fp1", "Cz"} and "Fp1" in f.message and f.severity == "fail"


def test_duplicate_labels(reg, write):
    s = read_sensors(reg, write("d.csv", "label,x,y,z\nFp1,1,80,20\nfp1,2,80,20\nCz,0,0,95\n"), units="mm")
    assert s.labels.count("Fp1") == 2
    f = _codes(reg, s)["input.duplicate-label"]
    # the file's own line numbers (header is line 1), so the user can go straight to them
    assert f.subjects == ("Fp1",) and f.severity == "fail" and "lines 2, 3" in f.message


def test_nonfinite_coordinates_name_their_line(reg, write):
    s = read_sensors(reg, write("n.csv", "label,x,y,z\nFp1,1,80,20\nCz,0,nan,95\n"), units="mm")
    f = _codes(reg, s)["input.nonfinite"]
    assert f.subjects == ("Cz",) and "(line 3)" in f.message


def test_missing_fiducials(reg, write):
    s = read_sensors(reg, write("m.csv", "label,x,y,z\nNAS,0,95,0\nCz,0,0,95\n"), units="mm")
    f = _codes(reg, s)["input.fiducial-missing"]
    assert set(f.subjects) == {"lpa", "rpa"}


@pytest.mark.parametrize("name, text, json_text", [
    ("u.csv", "# units: furlong\nlabel,x,y,z\nCz,0,0,1\n", None),
    ("v.csv", "label,x [parsec],y [parsec],z [parsec]\nCz,0,0,1\n", None),
    ("sub-1_electrodes.tsv", "name\tx\ty\tz\nCz\t0\t0\t1\n", '{\n  "EEGCoordinateSystem": "Other",\n'
                                                             '  "EEGCoordinateUnits": "inch"\n}')])
def test_unknown_unit_string(reg, write, name, text, json_text):
    if json_text:
        write("sub-1_coordsystem.json", json_text)
    with pytest.raises(ReadError, match="unknown length unit") as info:
        read_sensors(reg, write(name, text))
    assert info.value.line is not None


def test_unknown_unit_option(reg, write):
    with pytest.raises(ReadError, match="unknown length unit 'yd'"):
        read_sensors(reg, write("o.csv", "label,x,y,z\nCz,0,0,1\n"), units="yd")


@pytest.mark.parametrize("name", ["g.csv", "sub-1_electrodes.tsv"])
def test_binary_garbage(reg, write, name):
    with pytest.raises(ReadError, match="binary|UTF-8"):
        read_sensors(reg, write(name, bytes(range(256)) * 4))


def test_very_large_file_is_refused_without_reading_it(reg, tmp_path):
    p = tmp_path / "huge.csv"
    with p.open("wb") as fh:  # sparse: 1 GiB of nothing, never read
        fh.truncate(2**30)
    with pytest.raises(ReadError, match="MiB; electrode files larger"):
        read_sensors(reg, p)


def test_too_many_rows_are_refused_while_streaming(tmp_path):
    p = tmp_path / "rows.csv"
    p.write_text("label,x,y,z\n" + "E,1,2,3\n" * 200)
    with pytest.raises(ReadError, match="more than 100 lines") as info:
        list(text_lines(p, Limits(max_rows=100)))
    assert info.value.line == 101


def test_endless_line_is_refused(tmp_path):
    p = tmp_path / "line.csv"
    p.write_text("label,x,y,z\n" + "9" * 20000)
    with pytest.raises(ReadError, match="longer than 8192"):
        list(text_lines(p))


def test_bad_sidecar_json_names_line(reg, write):
    write("sub-2_coordsystem.json", '{\n  "EEGCoordinateUnits": "mm",\n  oops\n}')
    with pytest.raises(ReadError) as info:
        read_sensors(reg, write("sub-2_electrodes.tsv", "name\tx\ty\tz\nCz\t0\t0\t1\n"))
    assert info.value.path.endswith("sub-2_coordsystem.json") and info.value.line == 3


def test_header_without_coordinates(reg, write):
    with pytest.raises(ReadError, match="missing x, y, z") as info:
        read_sensors(reg, write("x.csv", "label,a,b,c\nCz,0,0,1\n"))
    assert info.value.line == 1


def test_too_few_points_to_judge_the_unit_says_so(reg, write):
    s = read_sensors(reg, write("one.csv", "label,x,y,z\nNAS,0,9,0\n"))
    f = next(f for f in s.findings if f.code == "input.units-suspect")
    assert "too few points to judge one; assumed metres" in f.message and "nothing measurable" not in f.message


def test_a_folder_given_as_electrode_file(reg, tmp_path):
    with pytest.raises(UsageError, match="is a folder, not a"):
        read_sensors(reg, tmp_path)
