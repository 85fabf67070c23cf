"""The report of the invented demo subject, as ``headprep demo`` writes it (slow: runs the whole pipeline)."""
from __future__ import annotations

import json
from pathlib import Path

import pytest

from _chromium import find_chromium, open_page
from prep.bundle import load_bundle
from prep.cli import main
from test_report import Page

pytestmark = pytest.mark.slow


def test_demo_report_agrees_with_its_bundle(tmp_path: Path, capsys) -> None:  # noqa: ANN001
    status = main(["demo", "--out", str(tmp_path / "demo"), "--json"])
    doc = json.loads(capsys.readouterr().out)
    assert status in (0, 1)
    pages = list((tmp_path / "demo").glob("*-report.html"))
    assert len(pages) == 1, doc
    bundles = [p for p in (tmp_path / "demo").iterdir() if p.is_dir() or p.suffix == ".zip"]
    bundle = load_bundle(bundles[0])
    man = bundle.manifest
    page = Page(pages[0].read_text(encoding="utf-8"))
    # the page's verdict is the pipeline's
    assert page.attrs_by_id["verdict"]["data-verdict"] == man["verdict"]
    assert list(page.rows) == list(bundle.sensor_labels)
    for row, per in zip(page.rows.values(), man["placement"]["per_electrode"]):
        assert float(row[1]) == pytest.approx(per["signed_distance_m"] * 1e3, abs=0.051)
    cond = man["passport"]["leadfield-spectrum"]["condition_number"]
    assert float(page.attrs_by_id["lf-cond"]["data-value"]) == pytest.approx(cond, rel=1e-12)
    assert all(i["src"].startswith("data:image/png;base64,") and i["alt"].strip() for i in page.images)
    chromium = find_chromium()
    if chromium is not None:  # the real subject's page also opens cleanly
        images, events, pixels = open_page(chromium, pages[0], tmp_path / "profile")
        assert images and all(im["w"] > 0 for im in images)
        assert not [e for e in events if e["method"] == "Runtime.exceptionThrown"]
        assert float(pixels.var()) > 1e-3
