"""The report page: verdict rules, self-containment, numbers read back against the bundle, the command."""
from __future__ import annotations

import json
import re
import shutil
from html.parser import HTMLParser
from pathlib import Path

import numpy as np
import pytest

from conftest import LIFTED, SPARSE, SUNK, make_synthetic_bundle
from prep import PluginError, ReportSection, hookimpl, make_registry
from prep.bundle import load_bundle
from prep.cli import main
from prep.model import Finding
from prep.report import Assets, build_report, deciding_findings, verdict_of


class Page(HTMLParser):
    """Collects text by element id, electrode-table rows, images, links and scripts."""

    def __init__(self, text: str) -> None:
        super().__init__()
        self.by_id: dict[str, str] = {}
        self.attrs_by_id: dict[str, dict[str, str]] = {}
        self.rows: dict[str, list[str]] = {}
        self.images: list[dict[str, str]] = []
        self.tags: list[str] = []
        self.refs: list[str] = []
        self.section_ids: list[str] = []
        self._open: list[tuple[str, str | None]] = []
        self._row: str | None = None
        self._cell: list[str] | None = None
        self._cells: list[str] = []
        self.feed(text)

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        a = {k: v or "" for k, v in attrs}
        self.tags.append(tag)
        self.refs += [a[k] for k in ("src", "href") if k in a]
        if tag == "img":
            self.images.append(a)
        if tag == "section" and "id" in a:
            self.section_ids.append(a["id"])
        if "id" in a:
            self.attrs_by_id[a["id"]] = a
            self.by_id.setdefault(a["id"], "")
        if tag == "tr" and "data-label" in a:
            self._row, self._cells = a["data-label"], []
        if tag == "td" and self._row is not None:
            self._cell = []
        if tag not in ("img", "meta", "link", "br", "path", "circle", "rect"):
            self._open.append((tag, a.get("id")))

    def handle_endtag(self, tag: str) -> None:
        if tag == "td" and self._cell is not None:
            self._cells.append("".join(self._cell).strip())
            self._cell = None
        if tag == "tr" and self._row is not None:
            self.rows[self._row] = self._cells
            self._row = None
        if any(t == tag for t, _ in self._open):
            while self._open and self._open.pop()[0] != tag:
                pass

    def handle_data(self, data: str) -> None:
        for _, ident in self._open:
            if ident:
                self.by_id[ident] += data
        if self._cell is not None:
            self._cell.append(data)


@pytest.fixture(scope="module")
def page(report_page: Path) -> Page:
    return Page(report_page.read_text(encoding="utf-8"))


# ------------------------------------------------------------------ verdict rules
def _f(sev: str) -> Finding:
    return Finding(code="mesh.open", severity=sev, message=f"a {sev}")


def test_verdict_rules() -> None:
    # the rule stated in the issue: fail beats warn beats pass; info never changes it
    assert verdict_of([]) == "pass"
    assert verdict_of([_f("info")]) == "pass"
    assert verdict_of([_f("info"), _f("warn")]) == "review"
    assert verdict_of([_f("warn"), _f("fail"), _f("info")]) == "fail"
    assert [f.severity for f in deciding_findings([_f("warn"), _f("fail"), _f("info")])] == ["fail"]
    assert [f.severity for f in deciding_findings([_f("warn"), _f("info")])] == ["warn"]
    assert deciding_findings([_f("info")]) == []


def test_verdict_lists_at_most_a_few_deciding_findings(sparse_bundle: Path, registry) -> None:  # noqa: ANN001
    from prep.report import MAX_DECIDING

    b = load_bundle(sparse_bundle)
    many = [Finding(code="placement.off-scalp", severity="fail", message=f"electrode E{i:02d} is off")
            for i in range(MAX_DECIDING + 3)]
    b.manifest["findings"] = [f.to_dict() for f in many]
    page = Page(build_report(b, registry))
    assert "and 3 more of the same severity" in page.by_id["verdict"]
    assert int(page.by_id["count-fail"]) == MAX_DECIDING + 3


class _ThirdParty:
    """A throwaway plugin with two sections, one of which crashes."""

    @staticmethod
    @hookimpl
    def headprep_register_report_sections() -> list[ReportSection]:
        return [ReportSection(name="zz_first", title="Mine", order=-5, render=lambda b, a: "<p>mine</p>"),
                ReportSection(name="aa_empty", order=50, render=lambda b, a: ""),
                ReportSection(name="boom", order=60, render=lambda b, a: 1 / 0)]


def test_sections_of_any_plugin_sort_by_order_and_crashes_name_the_plugin(sparse_bundle: Path) -> None:
    b = load_bundle(sparse_bundle)
    with pytest.raises(PluginError, match="boom"):
        build_report(b, make_registry(entry_points=False, plugins=[_ThirdParty()]))

    class Quiet:
        @staticmethod
        @hookimpl
        def headprep_register_report_sections() -> list[ReportSection]:
            return _ThirdParty.headprep_register_report_sections()[:2]

    page = Page(build_report(b, make_registry(entry_points=False, plugins=[Quiet()])))
    # the verdict stays first even before a section of negative order; empty sections are left out
    assert page.section_ids == ["verdict", "s-zz_first"]


def test_assets_refuse_pictures_without_alt_text() -> None:
    png = b"\x89PNG\r\n\x1a\n" + b"\0" * 16
    with pytest.raises(ValueError, match="alt"):
        Assets().png(png, "  ")
    assert 'alt="a grey square"' in Assets().png(png, "a grey square")


# ------------------------------------------------------------------ the page
def test_page_is_self_contained(page: Page) -> None:
    assert "script" not in page.tags  # no code on the page at all
    assert not any(r.startswith(("http:", "https:", "//", "file:")) for r in page.refs)
    assert page.images and all(i["src"].startswith("data:image/png;base64,") for i in page.images)
    assert all(i.get("alt", "").strip() for i in page.images)


def test_verdict_comes_first_then_sections_in_order(page: Page) -> None:
    assert page.section_ids[0] == "verdict"
    assert page.section_ids[1:] == ["s-electrodes", "s-layers", "s-cortex", "s-passport", "s-findings",
                                    "s-provenance"]


def test_numbers_match_the_bundle(page: Page, report_bundle: Path) -> None:
    b = load_bundle(report_bundle)
    findings = b.findings
    # verdict by word (and data attribute), and the counts
    assert page.attrs_by_id["verdict"]["data-verdict"] == verdict_of(findings) == "fail"
    assert page.by_id["verdict-word"].strip() == "FAIL"
    for sev in ("fail", "warn", "info"):
        assert int(page.by_id[f"count-{sev}"]) == sum(f.severity == sev for f in findings)
    assert f"electrode {LIFTED} lies 14.0 mm off the skin" in page.by_id["verdict"]
    # the electrode table: one row per electrode, distances and shifts to the 0.1 mm shown
    labels = b.sensor_labels
    assert list(page.rows) == list(labels)
    sd = b.arrays["placement_signed_distance"]
    shift = [r["shift_m"] for r in b.manifest["placement"]["per_electrode"]]
    for lab in (LIFTED, SUNK, labels[0], labels[-1]):
        i = labels.index(lab)
        dist, moved, codes = page.rows[lab][1:4]
        assert float(dist) == pytest.approx(sd[i] * 1e3, abs=0.051)
        assert float(moved) == pytest.approx(shift[i] * 1e3, abs=0.051)
    assert page.rows[LIFTED][3] == "placement.off-scalp"
    assert page.rows[SUNK][3] == "placement.inside-scalp"
    assert page.rows[labels[0]][3] == "none"
    assert int(page.attrs_by_id["electrode-summary"]["data-flagged"]) == 2
    # the lead field: shape, rank (numpy.linalg.matrix_rank) and condition number
    lf = b.arrays["leadfield"]
    assert page.by_id["lf-shape"] == f"{lf.shape[0]} electrodes \u00d7 {lf.shape[1]} sources"
    assert int(page.by_id["lf-rank"]) == np.linalg.matrix_rank(lf) == lf.shape[0] - 1
    s = np.linalg.svd(lf, compute_uv=False)  # reference: numpy's SVD
    cond = s[0] / s[lf.shape[0] - 2]
    assert float(page.by_id["lf-cond"]) == pytest.approx(cond, rel=1e-3)
    assert float(page.attrs_by_id["lf-cond"]["data-value"]) == pytest.approx(cond, rel=1e-12)


def test_provenance_lists_inputs_plugins_and_kit(report_page: Path, report_bundle: Path) -> None:
    text = report_page.read_text(encoding="utf-8")
    man = load_bundle(report_bundle).manifest
    for item in man["inputs"]:
        assert item["sha256"] in text and item["file"] in text
    assert "report_sections" in text and "headprep 0.1.0" in text
    assert "off_scalp_mm" in text  # a parameter


def test_sparse_bundle_degrades_to_plain_sentences(sparse_page: Path) -> None:
    p = Page(sparse_page.read_text(encoding="utf-8"))
    text = sparse_page.read_text(encoding="utf-8")
    assert "no head-model layers and no sphere model" in text
    assert "no distances to the skin" in text and "no scalp mesh" in text
    assert "no cortex mesh" in text
    assert "no source depths" in text and "no resolution metrics" in text
    assert "computed here from the stored lead field" in text  # spectrum falls back to the lead field
    assert all(i.get("alt", "").strip() for i in p.images)
    assert p.rows and all(r[1] == "" for r in p.rows.values())  # no distances to show


def test_sphere_model_sections_show_circles(tmp_path: Path, registry) -> None:  # noqa: ANN001
    bundle = load_bundle(make_synthetic_bundle(tmp_path / "sph", **{**SPARSE, "spheres": True}))
    text = build_report(bundle, registry)
    assert "concentric spheres" in text and "3 concentric spheres" in text
    assert 'data-verdict="fail"' in text


# ------------------------------------------------------------------ the command
def test_command_writes_page_and_exits_with_verdict(sparse_bundle: Path, tmp_path: Path, capsys) -> None:  # noqa: ANN001
    out = tmp_path / "page.html"
    assert main(["report", str(sparse_bundle), "--out", str(out), "--json"]) == 1  # a fail finding
    doc = json.loads(capsys.readouterr().out)
    assert doc["verdict"] == "fail" and Path(doc["report"]) == out and out.stat().st_size == doc["bytes"]
    assert out.stat().st_mode & 0o044  # readable by others (umask permitting): a page to share
    # an existing page is kept unless --force
    before = out.read_bytes()
    assert main(["report", str(sparse_bundle), "--out", str(out)]) == 2
    assert "--force" in capsys.readouterr().err and out.read_bytes() == before
    assert main(["report", str(sparse_bundle), "--out", str(out), "--force"]) == 1


def test_pass_verdict_exits_zero(tmp_path: Path, capsys) -> None:  # noqa: ANN001
    bundle = make_synthetic_bundle(tmp_path / "clean.zip", findings=[], **SPARSE)  # a zipped bundle
    out = tmp_path / "clean.html"
    assert main(["report", str(bundle), "--out", str(out)]) == 0
    assert "verdict PASS" in capsys.readouterr().out
    assert 'data-verdict="pass"' in out.read_text(encoding="utf-8")


def test_damaged_bundle_exits_2_and_writes_nothing(report_bundle: Path, tmp_path: Path, capsys) -> None:  # noqa: ANN001
    broken = tmp_path / "broken"
    shutil.copytree(report_bundle, broken)
    lf = broken / "arrays" / "leadfield.npy"
    data = bytearray(lf.read_bytes())
    data[-1] ^= 0xFF
    lf.write_bytes(bytes(data))
    out = tmp_path / "never.html"
    assert main(["report", str(broken), "--out", str(out)]) == 2
    err = capsys.readouterr().err
    assert "leadfield" in err and "checksum" in err
    assert not out.exists() and not list(tmp_path.glob(".never.html*"))
    assert main(["report", str(tmp_path / "missing"), "--out", str(out)]) == 2
    assert not out.exists()


def test_cli_help_mentions_out(capsys) -> None:  # noqa: ANN001
    with pytest.raises(SystemExit):
        main(["report", "--help"])
    assert re.search(r"--out FILE", capsys.readouterr().out)
