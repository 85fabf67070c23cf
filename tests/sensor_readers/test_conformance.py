"""Every built-in sensor reader passes the same conformance suite (prep.testing)."""
from __future__ import annotations

from pathlib import Path

import pytest

from prep import make_registry
from prep.testing import assert_reader_conforms, check_sensors

SAMPLES = Path(__file__).parent / "samples"

#: reader name -> its sample file (invented data)
SAMPLE_FOR = {"bids": SAMPLES / "sub-demo_electrodes.tsv", "table": SAMPLES / "lab_points.csv"}


def _reader_names() -> list[str]:
    return [d.name for d in make_registry().descriptors("sensor_reader")]


@pytest.mark.parametrize("reader", _reader_names())
def test_reader_conforms(reader, registry, tmp_path):
    if reader not in SAMPLE_FOR:
        pytest.skip(f"no sample file for the third-party reader '{reader}' in this test")
    s = assert_reader_conforms(registry, reader, SAMPLE_FOR[reader], tmp_path)
    assert len(s) >= 9


def test_fixture_runs_the_suite(headprep_conformance):
    s = headprep_conformance(None, "table", SAMPLES / "lab_points.csv")
    assert s.provenance.unit == "mm"


def test_check_sensors_lists_every_problem():
    import numpy as np

    from prep import Sensors
    bad = Sensors(labels=("A", "A"), positions=np.array([[0, 0, 1.0], [np.nan, 0, 0]]), frame="device")
    with pytest.raises(AssertionError) as info:
        check_sensors(bad)
    msg = str(info.value)
    assert "non-finite" in msg and "duplicate" in msg and "fiducials" in msg and "not metres" in msg
