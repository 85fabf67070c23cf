"""Label normalisation.

10-10 names: Chatrian, Lettich & Nelson 1985 and the ACNS guideline; 10-5: Oostenveld & Praamstra 2001.
"""
from __future__ import annotations

import pytest

from prep.labels import canonical_case, fiducial_name, normalise_label


@pytest.mark.parametrize("raw, want", [("fp1", "Fp1"), (" CZ ", "Cz"), ("afz", "AFz"), ("FFC1H", "FFC1h"),
                                       ("poz", "POz"), ("O2", "O2"), ("EOG1", "EOG1"), ("nfpz", "NFpz")])
def test_canonical_case(raw, want):
    assert canonical_case(raw) == want


@pytest.mark.parametrize("old, new", [("T3", "T7"), ("T4", "T8"), ("t5", "P7"), ("T6", "P8")])
def test_old_temporal_names_are_mapped_and_kept(old, new):
    info = normalise_label(old)
    assert info.label == new and info.original == old


@pytest.mark.parametrize("raw, fid", [("NAS", "nasion"), ("nasion", "nasion"), ("Nz", "nasion"),
                                      ("LPA", "lpa"), ("left preauricular", "lpa"), ("RPA", "rpa"),
                                      ("right_preauricular", "rpa"), ("inion", "inion"), ("Cz", None)])
def test_fiducial_synonyms(raw, fid):
    assert fiducial_name(raw) == fid


def test_kinds():
    assert normalise_label("VEOG").kind == "eog"
    assert normalise_label("Ref").kind == "ref"
    assert normalise_label("GND").kind == "gnd"
    assert normalise_label("HSP12").kind == "headshape"
    assert normalise_label("Nz").kind == "fiducial"
    assert normalise_label("Nz", "electrode").kind == "eeg"
    assert normalise_label("Iz").kind == "eeg"
    assert normalise_label("X1", "headshape").kind == "headshape"
