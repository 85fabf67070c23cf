"""Accuracy of the aligners on synthetic subjects with known truth (two head shapes, 20 seeds each).

Noise (per axis, standard deviation): 2 mm electrodes, 1 mm head shape, 3 mm
fiducials; random rigid digitizer frames up to 30 degrees / 50 mm. Thresholds
are those of the project's issue 4 (2 mm, 1.5 degrees, 1.5 mm placed, 1 mm
outlier effect).
"""
from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest

from prep import Sensors, UsageError, make_registry
from prep_plugins import align_fiducial, align_surface

from .synthetic_heads import CENTRE, scalp, subject, transform_error

SHAPES = ("ellipsoid", "bumpy")
SEEDS = range(20)


@pytest.fixture(scope="module")
def scalps() -> dict:
    return {shape: scalp(shape) for shape in SHAPES}


@pytest.fixture(scope="module")
def surface_runs(scalps: dict) -> dict:
    """Per shape: list of (subject, alignment) over the seeds."""
    out = {}
    for shape in SHAPES:
        runs = []
        for seed in SEEDS:
            s = subject(shape, seed, surface=scalps[shape])
            runs.append((s, align_surface.align(s.sensors, s.scalp, s.anatomy_fiducials)))
        out[shape] = runs
    return out


def _placed(matrix: np.ndarray, points: np.ndarray) -> np.ndarray:
    return points @ matrix[:3, :3].T + matrix[:3, 3]


@pytest.mark.parametrize("shape", SHAPES)
def test_surface_fit_recovers_the_transform(surface_runs: dict, shape: str) -> None:
    errs = np.array([transform_error(a.transform.matrix, s.truth) for s, a in surface_runs[shape]])
    shift_mm, angle = np.median(errs[:, 0]) * 1e3, np.median(errs[:, 1])
    # issue 4: within 2 mm and 1.5 degrees of the truth (median over seeds)
    assert shift_mm < 2.0, f"median shift {shift_mm:.2f} mm"
    assert angle < 1.5, f"median rotation error {angle:.2f} deg"


@pytest.mark.parametrize("shape", SHAPES)
def test_placed_electrodes_match_the_true_placement(surface_runs: dict, shape: str) -> None:
    align_err, abs_err, floor = [], [], []
    for s, a in surface_runs[shape]:
        est = _placed(a.transform.matrix, s.sensors.positions)
        true_placed = _placed(s.truth, s.sensors.positions)
        align_err.append(np.median(np.linalg.norm(est - true_placed, axis=1)))
        abs_err.append(np.median(np.linalg.norm(est - s.true_positions, axis=1)))
        floor.append(np.median(np.linalg.norm(true_placed - s.true_positions, axis=1)))
    # issue 4: alignment error alone within 1.5 mm (median)
    assert np.median(align_err) * 1e3 < 1.5, f"median alignment error {np.median(align_err) * 1e3:.2f} mm"
    # the absolute error stays near the digitizer-noise floor (3.1 mm median for 2 mm per axis)
    assert np.median(abs_err) < np.median(floor) + 0.0005, (
        f"absolute {np.median(abs_err) * 1e3:.2f} mm vs noise floor {np.median(floor) * 1e3:.2f} mm")


@pytest.mark.parametrize("shape", SHAPES)
def test_surface_fit_reports_residuals_and_uncertainty(surface_runs: dict, shape: str) -> None:
    s, a = surface_runs[shape][0]
    m = a.metrics
    assert a.transform.from_frame == "device" and a.transform.to_frame == "anatomy"
    assert 0.0005 < m["rms_m"] < 0.0025  # mixture of 1 mm and 2 mm noise (test data)
    assert m["fre_m"] is not None and m["fre_m"] < 0.012
    unc = m["uncertainty"]
    assert 0 < unc["translation_mm"] < 2 and 0 < unc["rotation_deg"] < 2
    assert a.headshape_inliers.shape == (len(s.sensors.headshape),)
    assert not [f for f in a.findings if f.severity == "fail"]


def test_uncertainty_tracks_the_observed_error(surface_runs: dict) -> None:
    runs = surface_runs["ellipsoid"] + surface_runs["bumpy"]
    observed = np.sqrt(np.mean([transform_error(a.transform.matrix, s.truth)[1] ** 2 for s, a in runs]))
    predicted = np.sqrt(np.mean([a.metrics["uncertainty"]["rotation_deg"] ** 2 for _, a in runs]))
    # a bootstrap is a spread estimate: same order of magnitude (factor 2.5, common practice)
    assert predicted / 2.5 < observed < predicted * 2.5


@pytest.mark.parametrize("shape", SHAPES)
def test_gross_headshape_outliers_barely_move_the_fit(scalps: dict, shape: str) -> None:
    moves = []
    for seed in range(6):
        s = subject(shape, seed, surface=scalps[shape])
        clean = align_surface.align(s.sensors, s.scalp, s.anatomy_fiducials)
        rng = np.random.default_rng(100 + seed)
        hs = s.sensors.headshape.copy()
        bad = rng.choice(len(hs), size=len(hs) // 10, replace=False)
        centre_dev = _placed(np.linalg.inv(s.truth), CENTRE[None])[0]
        radial = hs[bad] - centre_dev
        hs[bad] += radial / np.linalg.norm(radial, axis=1)[:, None] * rng.uniform(0.01, 0.04, (len(bad), 1))
        dirty = align_surface.align(replace(s.sensors, headshape=hs), s.scalp, s.anatomy_fiducials)
        el = s.sensors.positions
        moves.append(np.linalg.norm(_placed(clean.transform.matrix, el) - _placed(dirty.transform.matrix, el),
                                    axis=1).max())
        found = [f for f in dirty.findings if f.code == "placement.headshape-outliers"]
        assert found and set(bad.tolist()) <= set(found[0].values["indices"])
        assert not dirty.headshape_inliers[bad].any()
    # issue 4: 10 % gross outliers move the fit by less than 1 mm (here: the worst electrode, every seed)
    assert max(moves) < 0.001, f"largest move {max(moves) * 1e3:.2f} mm"


def test_fiducial_aligner_is_as_good_as_its_fiducials(scalps: dict) -> None:
    errs = []
    for seed in range(10):
        s = subject("ellipsoid", seed, surface=scalps["ellipsoid"])
        a = align_fiducial.align(s.sensors, s.scalp, s.anatomy_fiducials)
        errs.append(transform_error(a.transform.matrix, s.truth))
        assert a.transform.method == "fiducials"
        assert {"fre_m", "rms_m", "uncertainty"} <= set(a.metrics)
    errs = np.array(errs)
    # three fiducials with 3 mm noise: a few mm and a few degrees (from memory: FRE-limited)
    assert np.median(errs[:, 0]) < 0.008 and np.median(errs[:, 1]) < 5.0


def test_fiducial_aligner_exact_on_exact_fiducials(scalps: dict) -> None:
    s = subject("bumpy", 3, surface=scalps["bumpy"], fiducial_noise=0.0)
    a = align_fiducial.align(s.sensors, s.scalp, s.anatomy_fiducials)
    assert np.allclose(a.transform.matrix, s.truth, atol=1e-10)
    assert a.metrics["fre_m"] < 1e-10


def test_scaled_fiducial_fit(scalps: dict) -> None:
    s = subject("bumpy", 4, surface=scalps["bumpy"], fiducial_noise=0.0)
    fids = {k: v * 1.05 for k, v in s.sensors.fiducials.items()}
    a = align_fiducial.align(replace(s.sensors, fiducials=fids), s.scalp, s.anatomy_fiducials, scale=True)
    assert a.metrics["scale"] == pytest.approx(1 / 1.05, rel=1e-9)


@pytest.mark.parametrize(("method", "tolerance"), [(align_surface.align, 0.003), (align_fiducial.align, 0.015)])
def test_left_handed_digitizer_is_reported_as_mirrored(scalps: dict, method, tolerance: float) -> None:  # noqa: ANN001
    s = subject("ellipsoid", 7, surface=scalps["ellipsoid"])
    flip = np.array([-1.0, 1.0, 1.0])
    sensors = replace(s.sensors, positions=s.sensors.positions * flip, headshape=s.sensors.headshape * flip,
                      fiducials={k: v * flip for k, v in s.sensors.fiducials.items()})
    a = method(sensors, s.scalp, s.anatomy_fiducials)
    codes = [(f.code, f.severity) for f in a.findings]
    assert ("placement.mirrored", "fail") in codes
    assert a.transform.determinant < 0
    est = _placed(a.transform.matrix, sensors.positions)
    # once mirrored back, as accurate as the method is on a right-handed frame (tests above)
    assert np.median(np.linalg.norm(est - _placed(s.truth, s.sensors.positions), axis=1)) < tolerance


@pytest.mark.parametrize("shape", SHAPES)
def test_search_start_without_anatomy_fiducials(scalps: dict, shape: str) -> None:
    errs = []
    for seed in range(4):
        s = subject(shape, seed, surface=scalps[shape])
        a = align_surface.align(s.sensors, s.scalp, None)
        assert any(f.code == "input.fiducial-missing" for f in a.findings)
        errs.append(transform_error(a.transform.matrix, s.truth))
    errs = np.array(errs)
    # the same bounds as with fiducials (issue 4); the nose decides front from back on the symmetric ellipsoid
    assert np.median(errs[:, 0]) < 0.002 and np.median(errs[:, 1]) < 1.5
    assert errs[:, 1].max() < 5.0


def _bare(labels: tuple, positions: np.ndarray, fiducials: dict) -> Sensors:
    return Sensors(labels=labels, positions=positions, frame="device", fiducials=fiducials)


def test_too_few_points_is_a_usage_error(scalps: dict) -> None:
    s = subject("ellipsoid", 1, surface=scalps["ellipsoid"])
    two = {k: s.sensors.fiducials[k] for k in ("nasion", "lpa")}
    few = _bare(s.labels[:4], s.sensors.positions[:4], two)
    for fn in (align_surface.align, align_fiducial.align):
        with pytest.raises(UsageError, match=r"^input\.too-few-points: .*; give"):
            fn(few, s.scalp, s.anatomy_fiducials)
    with pytest.raises(UsageError, match=r"^input\.too-few-points:"):
        align_fiducial.align(s.sensors, s.scalp, None)


def test_collinear_fiducials_are_a_usage_error(scalps: dict) -> None:
    s = subject("ellipsoid", 2, surface=scalps["ellipsoid"])
    f = s.sensors.fiducials
    line = {"lpa": f["lpa"], "rpa": f["rpa"], "nasion": (f["lpa"] + f["rpa"]) / 2}
    sensors = _bare(s.labels[:3], s.sensors.positions[:3], line)
    for fn in (align_surface.align, align_fiducial.align):
        with pytest.raises(UsageError, match=r"^input\.too-few-points: .*collinear"):
            fn(sensors, s.scalp, s.anatomy_fiducials)


def test_reader_findings_are_not_lost_and_descriptors_register() -> None:
    reg = make_registry(entry_points=False, plugins=[align_fiducial, align_surface])
    names = [d.name for d in reg.descriptors("aligner")]
    assert names == ["fiducial", "surface"]
    for d in reg.descriptors("aligner"):
        assert reg.options(d, {}, "test") == d.defaults


def test_surface_fit_falls_back_to_fiducials_with_few_points(scalps: dict) -> None:
    s = subject("bumpy", 11, surface=scalps["bumpy"], fiducial_noise=0.0)
    few = _bare(s.labels[:3], s.sensors.positions[:3], dict(s.sensors.fiducials))
    a = align_surface.align(few, s.scalp, s.anatomy_fiducials)
    assert ("input.too-few-points", "warn") in [(f.code, f.severity) for f in a.findings]
    assert np.allclose(a.transform.matrix, s.truth, atol=1e-9)  # exact fiducials give the exact transform
