"""Property tests (hypothesis): exact round trips, and nothing but ReadError from any bytes."""
from __future__ import annotations

import tempfile
from pathlib import Path

import numpy as np
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from prep import ReadError, make_registry
from prep.readers import read_sensors

_REG = make_registry()
_LABEL = st.from_regex(r"[A-Z][A-Za-z0-9]{0,6}", fullmatch=True).filter(
    lambda s: not s.upper().startswith(("HSP", "HEADSHAPE", "EXTRA", "NAS", "NZ", "LPA", "RPA", "INI", "NA", "IN")))
_COORD = st.floats(min_value=-95.0, max_value=95.0, allow_nan=False, allow_infinity=False)


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(rows=st.lists(st.tuples(_LABEL, _COORD, _COORD, _COORD), min_size=1, max_size=20),
       delim=st.sampled_from([",", "\t", ";", " "]), unit=st.sampled_from(["mm", "cm", "m"]))
def test_random_tables_round_trip_exactly(rows, delim, unit):
    scale = {"mm": 1.0, "cm": 0.1, "m": 0.001}[unit]
    with tempfile.TemporaryDirectory() as tmp:
        d = Path(tmp)
        lines = [f"# units: {unit}", delim.join(["label", "x", "y", "z"])]
        lines += [delim.join(["NAS", "0", repr(95 * scale), "0"]), delim.join(["LPA", repr(-75 * scale), "0", "0"]),
                  delim.join(["RPA", repr(75 * scale), "0", "0"])]
        lines += [delim.join([lab, *(repr(v * scale) for v in xyz)]) for lab, *xyz in rows]
        src = d / "t.csv"
        src.write_text("\n".join(lines) + "\n")
        first = read_sensors(_REG, src)
        assert first.provenance.unit == unit and first.provenance.unit_source == "declared"
        tsv, _ = _REG.get("sensor_writer", "bids").write(first, d / "sub-r_electrodes.tsv")
        back = read_sensors(_REG, tsv)
        assert back.labels == first.labels and back.kinds == first.kinds
        np.testing.assert_array_equal(back.positions, first.positions)
        for k in ("nasion", "lpa", "rpa"):
            np.testing.assert_array_equal(back.fiducials[k], first.fiducials[k])


def _read_or_read_error(name: str, data: bytes) -> None:
    """Reading ``data`` as file ``name`` returns Sensors or raises ReadError, nothing else."""
    with tempfile.TemporaryDirectory() as tmp:
        p = Path(tmp) / name
        p.write_bytes(data)
        try:
            read_sensors(_REG, p)
        except ReadError:
            pass


@settings(max_examples=150, deadline=None)
@given(data=st.binary(max_size=400), name=st.sampled_from(["r.csv", "r.txt", "sub-r_electrodes.tsv"]))
def test_random_bytes_raise_only_read_error(data, name):
    _read_or_read_error(name, data)


@settings(max_examples=150, deadline=None)
@given(text=st.text(alphabet=st.sampled_from(list("abcxyzXYZ019.-+e,;\t #:\n\"nN/aAlm")), max_size=300),
       name=st.sampled_from(["r.csv", "sub-r_electrodes.tsv"]))
def test_random_tablelike_text_raises_only_read_error(text, name):
    _read_or_read_error(name, text.encode())
