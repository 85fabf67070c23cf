"""Placement checks and place_sensors on synthetic subjects: lifted, swapped, mirrored, clean.

A fake montage-template plugin (registered only here) places the same
10-10-like test layout on the scalp, with a few mm of jitter and a small
global rotation, as a real rule-based template would disagree with a cap.
"""
from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest

from prep import MontageTemplate, Sensors, Surface, hookimpl, make_registry
from prep.geometry.registration import rotvec_to_matrix
from prep.geometry.surface import closest_points
from prep.placement import PlacementResult, place_sensors
from prep_plugins import align_fiducial, align_surface, check_placement

from aligners.synthetic_heads import CENTRE, layout, scalp, subject

SHAPES = ("ellipsoid", "bumpy")


class FakeTemplate:
    """A montage template for tests: the test layout projected onto the given scalp."""

    def __init__(self, jitter_m: float = 0.004, tilt_deg: float = 3.0) -> None:
        self.jitter_m = jitter_m
        self.tilt_deg = tilt_deg
        self.calls: list[str] = []

    def place(self, scalp: Surface, fiducials: dict, system: str = "10-10") -> Sensors:
        self.calls.append(system)
        labels, dirs = layout()
        rng = np.random.default_rng(len(labels))
        dirs = dirs @ rotvec_to_matrix([np.radians(self.tilt_deg), 0, 0]).T
        far = CENTRE + dirs * 0.2 + rng.normal(0, self.jitter_m, dirs.shape)
        on, _, _ = closest_points(scalp.vertices, scalp.faces, CENTRE + (far - CENTRE) * 0.45)
        return Sensors(labels=labels, positions=on, frame=scalp.frame)

    @hookimpl
    def headprep_register_montage_templates(self) -> list[MontageTemplate]:
        return [MontageTemplate(name="fake-grid", place=self.place, systems=("10-20", "10-10"))]


def _registry(template: bool = True):  # noqa: ANN202
    plugins = [align_fiducial, align_surface, check_placement]
    if template:
        plugins.append(FakeTemplate())
    return make_registry(entry_points=False, plugins=plugins)


@pytest.fixture(scope="module")
def scalps() -> dict:
    return {shape: scalp(shape) for shape in SHAPES}


def _codes(res: PlacementResult, severity: str | None = None) -> list[tuple[str, frozenset]]:
    return [(f.code, frozenset(f.subjects)) for f in res.findings if severity is None or f.severity == severity]


def _relabel(sensors: Sensors, mapping: dict[str, str]) -> Sensors:
    return replace(sensors, labels=tuple(mapping.get(lab, lab) for lab in sensors.labels))


@pytest.mark.parametrize("shape", SHAPES)
def test_clean_subjects_have_no_fail(scalps: dict, shape: str) -> None:
    reg = _registry()
    for seed in range(5):
        s = subject(shape, seed, surface=scalps[shape])
        res = place_sensors(reg, s.sensors, s.scalp, s.anatomy_fiducials)
        assert not _codes(res, "fail"), _codes(res, "fail")
        assert res.report.metrics["placement"]["swap_check"] == "reference layout"


@pytest.mark.parametrize("shape", SHAPES)
def test_planted_swaps_are_named(scalps: dict, shape: str) -> None:
    reg = _registry()
    for seed in range(5):
        s = subject(shape, 20 + seed, surface=scalps[shape])
        # a far pair and a neighbour pair exchanged in the file
        sensors = _relabel(s.sensors, {"Fp1": "O2", "O2": "Fp1", "C3": "C1", "C1": "C3"})
        res = place_sensors(reg, sensors, s.scalp, s.anatomy_fiducials)
        swaps = {subj for code, subj in _codes(res, "fail") if code == "placement.swapped"}
        assert swaps == {frozenset({"Fp1", "O2"}), frozenset({"C3", "C1"})}, _codes(res)


def test_a_three_cycle_is_named_as_a_cycle(scalps: dict) -> None:
    s = subject("bumpy", 31, surface=scalps["bumpy"])
    sensors = _relabel(s.sensors, {"F3": "P4", "P4": "Oz", "Oz": "F3"})
    res = place_sensors(_registry(), sensors, s.scalp, s.anatomy_fiducials)
    found = [f for f in res.findings if f.code == "placement.swapped"]
    assert len(found) == 1 and set(found[0].subjects) == {"F3", "P4", "Oz"}
    assert "cycle" in found[0].message


@pytest.mark.parametrize("shape", SHAPES)
def test_mirrored_labels_are_one_mirror_finding(scalps: dict, shape: str) -> None:
    s = subject(shape, 40, surface=scalps[shape])
    mirror = {lab: check_placement.counterpart(lab) or lab for lab in s.labels}
    res = place_sensors(_registry(), _relabel(s.sensors, mirror), s.scalp, s.anatomy_fiducials)
    codes = [c for c, _ in _codes(res, "fail")]
    assert "placement.mirrored" in codes
    assert "placement.swapped" not in codes  # the mirror explains them; not listed pair by pair


@pytest.mark.parametrize("shape", SHAPES)
def test_lifted_electrodes_are_flagged(scalps: dict, shape: str) -> None:
    reg = _registry()
    for seed in range(5):
        s = subject(shape, 50 + seed, surface=scalps[shape])
        rng = np.random.default_rng(seed)
        i = int(rng.integers(len(s.labels)))
        lift = rng.uniform(0.012, 0.020)
        # move electrode i away from the head centre (device frame) by 12-20 mm
        inv = np.linalg.inv(s.truth)
        centre = inv[:3, :3] @ CENTRE + inv[:3, 3]
        pos = s.sensors.positions.copy()
        pos[i] += (pos[i] - centre) / np.linalg.norm(pos[i] - centre) * lift
        res = place_sensors(reg, replace(s.sensors, positions=pos), s.scalp, s.anatomy_fiducials)
        off = [f for f in res.findings if f.code == "placement.off-scalp" and s.labels[i] in f.subjects]
        assert off, (lift, _codes(res))
        d = res.report.arrays["placement_signed_distance_m"][i]
        assert d > 0.006
        assert not [c for c, _ in _codes(res, "fail") if c != "placement.off-scalp"]


def test_electrodes_below_the_skin(scalps: dict) -> None:
    s = subject("ellipsoid", 60, surface=scalps["ellipsoid"], electrode_noise=0.0)
    placed = s.sensors.transformed(align_fiducial.align(s.sensors, s.scalp, s.anatomy_fiducials).transform)
    pos = s.true_positions.copy()
    pos[5] = CENTRE + (pos[5] - CENTRE) * 0.85
    rep = check_placement.run(replace(placed, positions=pos), s.scalp, s.anatomy_fiducials, None)
    inside = [f for f in rep.findings if f.code == "placement.inside-scalp"]
    assert inside and inside[0].subjects == (s.labels[5],)
    assert rep.arrays["signed_distance_m"][5] < -0.006


def test_whole_montage_off_the_scalp_is_a_misfit(scalps: dict) -> None:
    s = subject("ellipsoid", 61, surface=scalps["ellipsoid"], electrode_noise=0.0)
    pos = CENTRE + (s.true_positions - CENTRE) * 1.15
    sensors = Sensors(labels=s.labels, positions=pos, frame="anatomy")
    rep = check_placement.run(sensors, s.scalp)
    assert ("placement.misfit", "fail") in [(f.code, f.severity) for f in rep.findings]


def test_without_a_template_swaps_are_skipped_with_a_note(scalps: dict) -> None:
    s = subject("ellipsoid", 3, surface=scalps["ellipsoid"])
    res = place_sensors(_registry(template=False), s.sensors, s.scalp, s.anatomy_fiducials)
    notes = [f for f in res.findings if f.code == "placement.unchecked"]
    assert notes and notes[0].severity == "info" and "montage-template" in notes[0].message
    assert res.report.metrics["placement"]["swap_check"] == "skipped"


def test_result_shapes_frames_and_table(scalps: dict) -> None:
    s = subject("bumpy", 5, surface=scalps["bumpy"])
    tpl = FakeTemplate()
    reg = make_registry(entry_points=False, plugins=[align_fiducial, align_surface, check_placement, tpl])
    res = place_sensors(reg, s.sensors, s.scalp, s.anatomy_fiducials, method="fiducial",
                        check_options={"off_scalp_fail_m": 0.02})
    assert tpl.calls == ["10-10"]  # the finest system the template offers
    assert res.placed.frame == res.projected.frame == "anatomy"
    assert res.alignment.transform.method == "fiducials"
    n = len(s.labels)
    d = res.report.arrays["placement_signed_distance_m"]
    assert d.shape == (n,) and res.report.arrays["placement_projected_m"].shape == (n, 3)
    on = closest_points(s.scalp.vertices, s.scalp.faces, res.projected.positions)[1]
    assert np.abs(on).max() < 1e-9
    table = res.report.metrics["placement"]["electrodes"]
    assert [row["label"] for row in table] == list(s.labels)
    assert table[0]["signed_distance_m"] == pytest.approx(d[0])


def test_unknown_options_are_refused(scalps: dict) -> None:
    from prep import UsageError
    s = subject("bumpy", 6, surface=scalps["bumpy"])
    with pytest.raises(UsageError, match="unknown option"):
        place_sensors(_registry(), s.sensors, s.scalp, s.anatomy_fiducials, options={"nope": 1})


def test_label_sides() -> None:
    side = check_placement.label_side
    assert (side("C3"), side("C4"), side("Cz"), side("FT10"), side("AFF1h"), side("EOG")) == (-1, 1, 0, 1, -1, 0)
    cp = check_placement.counterpart
    assert (cp("Fp1"), cp("T8"), cp("Oz"), cp("CCP5h")) == ("Fp2", "T7", None, "CCP6h")


@pytest.mark.parametrize("shape", SHAPES)
def test_with_the_installed_rules_template(scalps: dict, shape: str) -> None:
    """Integration: electrodes where the installed template puts 10-10, then a planted far and near swap."""
    reg = make_registry()
    if not reg.descriptors("montage_template"):
        pytest.skip("no montage template installed")
    s = subject(shape, 70, surface=scalps[shape])
    tpl = reg.descriptors("montage_template")[0]
    ref = tpl.place(s.scalp, s.anatomy_fiducials, system="10-10")
    rng = np.random.default_rng(70)
    inv = np.linalg.inv(s.truth)
    pos = ref.positions @ inv[:3, :3].T + inv[:3, 3] + rng.normal(0, 0.002, ref.positions.shape)
    sensors = replace(s.sensors, labels=ref.labels, positions=pos, kinds=None, original_labels=None)
    clean = place_sensors(reg, sensors, s.scalp, s.anatomy_fiducials)
    assert not _codes(clean, "fail"), _codes(clean, "fail")
    assert clean.report.metrics["placement"]["swap_check"] == "reference layout"
    res = place_sensors(reg, _relabel(sensors, {"Fp1": "O2", "O2": "Fp1", "C3": "C1", "C1": "C3"}),
                        s.scalp, s.anatomy_fiducials)
    swaps = {subj for code, subj in _codes(res, "fail") if code == "placement.swapped"}
    assert swaps == {frozenset({"Fp1", "O2"}), frozenset({"C3", "C1"})}


@pytest.mark.parametrize("factor", [1000.0, 0.1])
def test_wrong_units_end_in_a_misfit_not_a_crash(scalps: dict, factor: float) -> None:
    s = subject("bumpy", 2, surface=scalps["bumpy"])
    k = factor  # millimetres read as metres, or centimetres read as millimetres
    bad = replace(s.sensors, positions=s.sensors.positions * k, headshape=s.sensors.headshape * k,
                  fiducials={a: v * k for a, v in s.sensors.fiducials.items()})
    res = place_sensors(_registry(template=False), bad, s.scalp, s.anatomy_fiducials)
    assert ("placement.misfit", "fail") in {(f.code, f.severity) for f in res.findings}


def test_non_finite_electrode_is_carried_not_checked(scalps: dict) -> None:
    s = subject("bumpy", 2, surface=scalps["bumpy"])
    pos = s.sensors.positions.copy()
    pos[3] = np.nan
    res = place_sensors(_registry(), replace(s.sensors, positions=pos), s.scalp, s.anatomy_fiducials)
    row = res.report.metrics["placement"]["electrodes"][3]
    assert row["signed_distance_m"] is None and row["projected_m"] is None
    assert not _codes(res, "fail")
