"""Cohorts: isolation of bad subjects, Dask equals serial, crash and resume, concurrent runs.

The subjects are copies of the demo subject with their electrodes jittered (so each
differs), plus two planted bad ones: a malformed electrode row and a scalp file that is
not a mesh.
"""
from __future__ import annotations

import json
import os
import shutil
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest

from prep.cohort import load_cohort, run_cohort, work_lock

N_GOOD = 4
BAD = {"sub-bad-row": "input.unreadable", "sub-bad-mesh": "input.unreadable"}


def _demo_dir() -> Path:
    from prep_demo import recipe_path
    return recipe_path().parent


def _jitter_bids(src: Path, dst: Path, seed: int) -> None:
    rng = np.random.default_rng(seed)
    lines = src.read_text().splitlines()
    out = [lines[0]]
    header = lines[0].split("\t")
    ix = [header.index(c) for c in ("x", "y", "z")]
    for line in lines[1:]:
        parts = line.split("\t")
        for i in ix:
            parts[i] = f"{float(parts[i]) + rng.normal(scale=0.5):.3f}"
        out.append("\t".join(parts))
    dst.write_text("\n".join(out) + "\n")


def _decimated_ply(path: Path, keep: float = 0.15) -> bytes:
    import fast_simplification
    import trimesh

    mesh = trimesh.load(path, process=False, force="mesh")
    v, f = fast_simplification.simplify(np.asarray(mesh.vertices), np.asarray(mesh.faces), 1.0 - keep)
    return trimesh.Trimesh(v, f, process=False).export(file_type="ply")


@pytest.fixture(scope="module")
def cohort_dir(tmp_path_factory: pytest.TempPathFactory) -> Path:
    import tomllib

    root = tmp_path_factory.mktemp("cohort")
    demo = _demo_dir()
    recipe = tomllib.loads((demo / "recipe.toml").read_text())
    inputs = recipe["inputs"]
    names = [f"sub-{i:02d}" for i in range(1, N_GOOD + 1)] + list(BAD)
    small_cortex = {f: _decimated_ply(demo / f) for f in inputs["cortex"]}
    for k, name in enumerate(names):
        sub = root / name
        sub.mkdir()
        for key, val in inputs.items():
            for f in ([val] if isinstance(val, str) else val if isinstance(val, list) else []):
                if (demo / f).is_file():
                    shutil.copy(demo / f, sub / f)
                    side = (demo / f).with_name(f.replace("_electrodes.tsv", "_coordsystem.json"))
                    if side.is_file():
                        shutil.copy(side, sub / side.name)
        _jitter_bids(demo / inputs["sensors"], sub / inputs["sensors"], seed=k)
        for f in inputs["cortex"]:  # smaller cortices keep the cohort tests quick
            (sub / f).write_bytes(small_cortex[f])
    with open(root / "sub-bad-row" / inputs["sensors"], "a") as fh:
        fh.write("Oops\t1.0\tnot-a-number\t3.0\tEEG\n")
    (root / "sub-bad-mesh" / inputs["scalp"]).write_bytes(b"this is not a mesh\n" * 10)
    def entry(name: str) -> str:
        lines = [f'[[subjects]]\nid = "{name}"\n[subjects.inputs]']
        for key, val in inputs.items():
            if isinstance(val, list):
                val = [f"{name}/{v}" for v in val]
            elif isinstance(val, str) and (demo / val).is_file():
                val = f"{name}/{val}"
            lines.append(f"{key} = {json.dumps(val)}")
        return "\n".join(lines)

    subjects = "\n".join(entry(n) for n in names)
    (root / "cohort.toml").write_text(
        '[cohort]\nname = "jitter"\n[shared.patches]\ncount = 300\n[shared.align]\nmethod = "surface"\n'
        + subjects + "\n")
    return root


def _statuses(results: list[dict]) -> dict[str, tuple[str, tuple[str, ...]]]:
    return {r["subject"]: (r["status"], tuple(r["codes"])) for r in results}


@pytest.fixture(scope="module")
def serial(cohort_dir: Path) -> list[dict]:
    cohort = load_cohort(cohort_dir / "cohort.toml", work=str(cohort_dir / "w-serial"),
                         out=str(cohort_dir / "o-serial"))
    return run_cohort(cohort, report=False)


def test_bad_subjects_are_isolated_with_codes(serial: list[dict]) -> None:
    st = _statuses(serial)
    for name, code in BAD.items():
        assert st[name][0] == "unusable" and code in st[name][1]
    good = [r for r in serial if r["subject"] not in BAD]
    assert len(good) == N_GOOD and all(r["status"] == "done" for r in good)
    for r in good:
        assert set(r["steps_computed"]) == {"align", "patches", "forward", "passport"}


@pytest.mark.cluster
def test_dask_local_cluster_matches_serial(cohort_dir: Path, serial: list[dict]) -> None:
    cohort = load_cohort(cohort_dir / "cohort.toml", work=str(cohort_dir / "w-dask"), out=str(cohort_dir / "o-dask"))
    results = run_cohort(cohort, workers=2, local_cluster=True, report=False)
    assert _statuses(results) == _statuses(serial)
    for a, b in zip(serial, results):
        if a["status"] == "done":
            assert a["array_sha256"] == b["array_sha256"], a["subject"]


def test_killed_run_resumes_without_recomputing(cohort_dir: Path, serial: list[dict]) -> None:
    work, out = cohort_dir / "w-kill", cohort_dir / "o-kill"
    cmd = [sys.executable, "-m", "prep", "batch", str(cohort_dir / "cohort.toml"), "--work", str(work),
           "--out", str(out), "--no-report", "--json"]
    proc = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, start_new_session=True)
    deadline = time.time() + 120
    while time.time() < deadline and not (work / "sub-02" / "steps").is_dir():
        time.sleep(0.05)
    time.sleep(0.3)
    os.killpg(proc.pid, signal.SIGKILL)
    proc.wait()
    # nothing half-written under a final name: every stored step and bundle is readable
    for f in work.rglob("*.npz"):
        np.load(f, allow_pickle=False).close()
    from prep.bundle import verify_bundle
    for b in out.glob("*-forward"):
        assert verify_bundle(b) == []
    finished_before = {p.parent.name for p in work.glob("*/result.json")}
    rerun = subprocess.run(cmd, capture_output=True, text=True, timeout=600)
    assert rerun.returncode == 1, rerun.stderr  # the two bad subjects
    results = {r["subject"]: r for r in json.loads(rerun.stdout)["subjects"]}
    for name in finished_before - set(BAD):
        assert results[name]["steps_computed"] == [], name   # nothing recomputed
    assert not list(work.rglob(".*.part")) and not list(out.rglob(".*.part"))
    for a in serial:
        if a["status"] == "done":
            assert results[a["subject"]]["array_sha256"] == a["array_sha256"], a["subject"]


def test_second_run_on_same_work_folder_refuses(cohort_dir: Path) -> None:
    work = cohort_dir / "w-lock"
    with work_lock(work):
        out = subprocess.run([sys.executable, "-m", "prep", "batch", str(cohort_dir / "cohort.toml"),
                              "--work", str(work), "--out", str(cohort_dir / "o-lock")],
                             capture_output=True, text=True, timeout=120)
    assert out.returncode == 2
    assert "being prepared by headprep pid" in out.stderr
    assert not (cohort_dir / "o-lock").exists() or not list((cohort_dir / "o-lock").iterdir())
