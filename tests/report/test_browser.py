"""The report opened from disk in a real headless Chromium (marker ``browser``).

Every image decodes, the console stays clean, nothing is fetched from a
network, and a screenshot is not blank. Skipped only where no Chromium
executable can be found (CI installs Debian's ``chromium``).
"""
from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from _chromium import find_chromium, open_page

pytestmark = pytest.mark.browser

CHROMIUM = find_chromium()
needs_chromium = pytest.mark.skipif(
    CHROMIUM is None, reason="no Chromium executable found (install Debian's 'chromium' package, "
                             "or set HEADPREP_CHROMIUM)")

@needs_chromium
def test_report_in_chromium(report_page: Path, tmp_path: Path) -> None:
    images, events, pixels = open_page(CHROMIUM, report_page, tmp_path / "profile")
    # every picture is inline and decodes, with alt text
    assert len(images) >= 10
    for im in images:
        assert im["scheme"] == "data", im
        assert im["complete"] and im["w"] > 0 and im["h"] > 0, im
        assert im["alt"].strip(), im
    # no console errors, no uncaught exceptions, no error log entries
    errors = [e for e in events
              if (e["method"] == "Runtime.consoleAPICalled" and e["params"]["type"] in ("error", "assert"))
              or e["method"] == "Runtime.exceptionThrown"
              or (e["method"] == "Log.entryAdded" and e["params"]["entry"]["level"] == "error")]
    assert errors == []
    # nothing but the page itself (file:) and inline data: URIs was requested
    urls = [e["params"]["request"]["url"] for e in events if e["method"] == "Network.requestWillBeSent"]
    assert report_page.resolve().as_uri() in urls
    assert [u for u in urls if u.split(":")[0] not in ("file", "data")] == []
    assert [u for u in urls if u.startswith("file:")] == [report_page.resolve().as_uri()]
    # a screenshot that is not blank: pixel variance well above a flat page (common practice)
    assert pixels.shape[0] == 900 and pixels.shape[1] == 1200
    assert float(pixels.var()) > 1e-3
    assert len(np.unique((pixels * 255).astype(np.uint8).reshape(-1, 3), axis=0)) > 50


@needs_chromium
def test_degraded_report_in_chromium(sparse_page: Path, tmp_path: Path) -> None:
    """A bundle without layers, cortex, placement or passport still opens cleanly."""
    images, events, pixels = open_page(CHROMIUM, sparse_page, tmp_path / "profile")
    assert all(im["w"] > 0 and im["alt"].strip() for im in images)
    assert not [e for e in events if e["method"] == "Runtime.exceptionThrown"]
    assert float(pixels.var()) > 1e-3
