"""Electrode labels: normalisation, old-to-new temporal names, fiducial synonyms, channel kinds.

Shared by every sensor reader so that ``fp1``, ``FP1`` and `` Fp1 `` all become
``Fp1`` whatever the file format. The 10-10 / 10-5 names follow the open
standards (Chatrian, Lettich & Nelson 1985; American Clinical Neurophysiology
Society guideline nomenclature; Oostenveld & Praamstra 2001): a row prefix
(``Fp``, ``AF``, ``FFC``...), then ``z`` on the midline or a number (odd left,
even right), optionally followed by ``h`` for the half positions of the 10-5 system.
"""
from __future__ import annotations

import re
from dataclasses import dataclass

__all__ = ["LabelInfo", "normalise_label", "canonical_case", "fiducial_name", "label_kind",
           "OLD_TEMPORAL", "ROW_PREFIXES", "KINDS"]

#: channel kinds a reader may set (``Sensors.kinds``); ``eeg`` is a scalp electrode.
KINDS = ("eeg", "eog", "ecg", "emg", "ref", "gnd", "misc")

#: row prefixes of the 10-20 / 10-10 / 10-5 systems in their canonical case.
ROW_PREFIXES = ("N", "NFp", "Fp", "AFp", "AF", "AFF", "F", "FFC", "FFT", "FC", "FT", "FCC", "FTT",
                "C", "T", "CCP", "TTP", "CP", "TP", "CPP", "TPP", "P", "PPO", "PO", "POO", "O",
                "OI", "I")
_BY_UPPER = {p.upper(): p for p in ROW_PREFIXES}
_POSITION = re.compile(r"^([A-Za-z]+?)(z|Z|\d{1,2})(h|H)?$")

#: the 10-20 temporal names replaced in the 10-10 nomenclature (ACNS guideline).
OLD_TEMPORAL = {"T3": "T7", "T4": "T8", "T5": "P7", "T6": "P8"}

#: fiducial name -> accepted spellings (compared after lower-casing and removing
#: blanks, dashes, underscores and dots). ``inion`` is optional for the readers.
_FIDUCIAL_SYNONYMS = {
    "nasion": ("nasion", "nas", "nz", "na", "fidnz", "fidnas", "nasal"),
    "lpa": ("lpa", "leftpreauricular", "leftpreauricularpoint", "leftear", "lpapoint", "fidt9", "pal"),
    "rpa": ("rpa", "rightpreauricular", "rightpreauricularpoint", "rightear", "rpapoint", "fidt10", "par"),
    "inion": ("inion", "ini", "iz", "in"),
}
_FIDUCIAL_LOOKUP = {s: name for name, syns in _FIDUCIAL_SYNONYMS.items() for s in syns}

#: label prefixes (upper case) that mark a non-scalp channel, longest first.
_KIND_PREFIXES = (
    ("VEOG", "eog"), ("HEOG", "eog"), ("EOG", "eog"), ("ECG", "ecg"), ("EKG", "ecg"), ("EMG", "emg"),
    ("GROUND", "gnd"), ("GND", "gnd"), ("REF", "ref"), ("MISC", "misc"),
)
#: label prefixes of digitized head-shape points.
_HEADSHAPE_PREFIXES = ("HSP", "HEADSHAPE", "HS_", "EXTRA")
#: kind-column values (lower case) and what they mean.
KIND_WORDS = {
    "eeg": "eeg", "electrode": "eeg", "scalp": "eeg", "channel": "eeg",
    "eog": "eog", "ecg": "ecg", "ekg": "ecg", "emg": "emg",
    "ref": "ref", "reference": "ref", "gnd": "gnd", "ground": "gnd", "misc": "misc",
    "fiducial": "fiducial", "fid": "fiducial", "landmark": "fiducial", "cardinal": "fiducial",
    "headshape": "headshape", "head-shape": "headshape", "head_shape": "headshape", "hsp": "headshape",
    "extra": "headshape", "digitized": "headshape",
}


@dataclass(frozen=True)
class LabelInfo:
    """What a raw label means.

    Attributes
    ----------
    label : str
        Normalised label (``Fp1``, ``T7``, ``EOG1``).
    original : str
        The label as written, without surrounding blanks.
    kind : str
        ``eeg``, ``eog``, ``ecg``, ``emg``, ``ref``, ``gnd``, ``misc``, ``fiducial`` or ``headshape``.
    fiducial : str or None
        ``nasion``, ``lpa``, ``rpa`` or ``inion`` when the label names one.
    """

    label: str
    original: str
    kind: str
    fiducial: str | None = None


_SQUASH = re.compile(r"[\s_\-.]+")
_BLANKS = re.compile(r"\s+")


def _squash(label: str) -> str:
    return _SQUASH.sub("", label).lower()


def fiducial_name(label: str) -> str | None:
    """``"NAS"`` -> ``"nasion"``, ``"left preauricular"`` -> ``"lpa"``; None if not a fiducial."""
    return _FIDUCIAL_LOOKUP.get(_squash(label))


def canonical_case(label: str) -> str:
    """Canonical spelling of a standard-system position (``fp1`` -> ``Fp1``, ``CZ`` -> ``Cz``).

    Labels that are not positions of the 10-20 family are returned stripped, with
    inner whitespace collapsed, and otherwise unchanged.
    """
    s = _BLANKS.sub(" ", label.strip())
    m = _POSITION.match(s.replace(" ", ""))
    if not m:
        return s
    prefix = _BY_UPPER.get(m.group(1).upper())
    if prefix is None:
        return s
    col = "z" if m.group(2) in ("z", "Z") else str(int(m.group(2)))
    if col == "0":
        return s
    return prefix + col + ("h" if m.group(3) else "")


def label_kind(label: str) -> str:
    """Channel kind implied by a (normalised) label: ``eog`` for ``VEOG``..., ``eeg`` otherwise."""
    up = label.upper().replace(" ", "")
    if up.startswith(_HEADSHAPE_PREFIXES):
        return "headshape"
    for prefix, kind in _KIND_PREFIXES:
        if up.startswith(prefix):
            return kind
    return "eeg"


def normalise_label(raw: str, kind: str | None = None) -> LabelInfo:
    """Normalise one label and say what it is.

    Parameters
    ----------
    raw : str
        Label as written in the file.
    kind : str, optional
        Value of the file's kind/type column, if any (``electrode``, ``fiducial``,
        ``headshape``, ``eog``...). Unknown words are ignored.

    Returns
    -------
    LabelInfo
        Old temporal names are mapped to 10-10 ones (``T3`` -> ``T7``), fiducial
        synonyms to ``nasion``/``lpa``/``rpa``/``inion``.
    """
    original = raw.strip()
    declared = KIND_WORDS.get(kind.strip().lower()) if kind else None
    if declared == "headshape":
        return LabelInfo(original, original, "headshape")
    label = canonical_case(original)
    label = OLD_TEMPORAL.get(label, label)
    fid = fiducial_name(original)
    if declared == "fiducial":
        return LabelInfo(label, original, "fiducial", fid)
    if fid is not None and declared is None and _squash(original) != "iz":
        # "Nz" is both the nasion and a 10-5 position: without a kind column it is the fiducial;
        # "Iz" is an electrode unless the kind column says fiducial.
        return LabelInfo(label, original, "fiducial", fid)
    implied = label_kind(label)
    if declared is not None and declared != "eeg":
        return LabelInfo(label, original, declared)
    return LabelInfo(label, original, implied)
