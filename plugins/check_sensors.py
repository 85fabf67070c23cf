"""Built-in plugin ``check_sensors``: basic checks of an electrode set as read.

Codes: ``input.duplicate-label`` (fail: two channels with one label make every
later step ambiguous), ``input.nonfinite`` (fail, naming the labels),
``input.fiducial-missing`` (warn: co-registration by fiducials is impossible,
a surface fit may still work).
"""
from __future__ import annotations

from collections import Counter

import numpy as np

from prep import FIDUCIALS, Check, Finding, Sensors, hookimpl


def _where_in_file(sensors: Sensors, idx: list[int]) -> str:
    """'line 5, 9' from the reader's record of each channel's line; else the channels' 1-based order."""
    lines = sensors.provenance.extra.get("channel_lines")
    if lines is not None and len(lines) == len(sensors) and all(lines[i] for i in idx):
        return ("lines " if len(idx) > 1 else "line ") + ", ".join(str(lines[i]) for i in idx)
    return ("channels " if len(idx) > 1 else "channel ") + ", ".join(str(i + 1) for i in idx) + " in file order"


def check_sensors(sensors: Sensors) -> list[Finding]:
    """Findings about labels, coordinates and fiducials of ``sensors``.

    Parameters
    ----------
    sensors : Sensors
        Any frame.

    Returns
    -------
    list of Finding
    """
    out: list[Finding] = []
    where = sensors.provenance.file or "sensors"
    counts = Counter(sensors.labels)
    for label, n in sorted(counts.items()):
        if n > 1:
            idx = [i for i, lab in enumerate(sensors.labels) if lab == label]
            origs = sorted({sensors.original_labels[i] for i in idx})
            out.append(Finding(code="input.duplicate-label", severity="fail", subjects=(label,),
                               message=f"{where}: label {label} is used by {n} channels "
                                       f"({_where_in_file(sensors, idx)}; written as {', '.join(origs)})",
                               values={"count": n, "indices": idx}, source="check_sensors"))
    bad = ~np.all(np.isfinite(sensors.positions), axis=1) if len(sensors) else np.zeros(0, bool)
    if bad.any():
        idx = np.flatnonzero(bad).tolist()
        labels = [sensors.labels[i] for i in idx]
        out.append(Finding(code="input.nonfinite", severity="fail", subjects=tuple(labels),
                           message=f"{where}: missing or non-finite coordinates for {', '.join(labels)} "
                                   f"({_where_in_file(sensors, idx)})",
                           values={"indices": idx}, source="check_sensors"))
    missing = [f for f in FIDUCIALS if f not in sensors.fiducials]
    if missing:
        out.append(Finding(code="input.fiducial-missing", severity="warn", subjects=tuple(missing),
                           message=f"{where}: no {', '.join(missing)} fiducial; co-registration by "
                                   "fiducials is not possible (a surface fit may be)",
                           values={"missing": missing}, source="check_sensors"))
    return out


def _run(sensors: Sensors) -> list[Finding]:
    return check_sensors(sensors)


@hookimpl
def headprep_register_checks() -> list[Check]:
    return [Check(name="sensors", target="sensors", run=_run,
                  description="duplicate labels, non-finite coordinates, missing fiducials")]
