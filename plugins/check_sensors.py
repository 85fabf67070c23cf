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
                                       f"(rows {', '.join(str(i + 1) for i in idx)}; written as {', '.join(origs)})",
                               values={"count": n, "indices": idx}, source="check_sensors"))
    bad = ~np.all(np.isfinite(sensors.positions), axis=1) if len(sensors) else np.zeros(0, bool)
    if bad.any():
        labels = [sensors.labels[i] for i in np.flatnonzero(bad)]
        out.append(Finding(code="input.nonfinite", severity="fail", subjects=tuple(labels),
                           message=f"{where}: missing or non-finite coordinates for {', '.join(labels)}",
                           values={"indices": np.flatnonzero(bad).tolist()}, source="check_sensors"))
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
