"""The report in headless Chromium (Debian's `chromium`): no network requests, no console errors,
the caution visible at the top and the bottom, every embedded figure decoded."""

from __future__ import annotations

from pathlib import Path

import pytest
from report_browser import find_chromium, visit_pages

from strataweave.caution import CAUTION

pytestmark = pytest.mark.skipif(
    find_chromium() is None,
    reason="headless browser check skipped: Debian's 'chromium' package is not installed here "
           "(.ci/run installs it with apt-get where it can)",
)

INSPECT = """(() => {
  const box = id => {
    const el = document.getElementById(id);
    if (!el) return null;
    const style = getComputedStyle(el), rect = el.getBoundingClientRect();
    return {text: el.innerText.trim(),
            shown: style.display !== "none" && style.visibility === "visible" && Number(style.opacity) > 0
                   && rect.width > 0 && rect.height > 0,
            topOnLoad: rect.top, bottomOnLoad: rect.bottom};
  };
  return {top: box("caution-top"), bottom: box("caution-bottom"), viewport: window.innerHeight,
          images: Array.from(document.images).map(i => i.complete && i.naturalWidth > 0)};
})()"""

LEAKY_PAGE = """<!DOCTYPE html><html><head><meta charset="utf-8"></head><body>
<div id="caution-top" style="display:none">hidden</div>
<img src="http://fictional-host.invalid/pixel.png"><script>console.error("leaky page error")</script>
</body></html>"""


@pytest.fixture(scope="module")
def visits(rendered, tmp_path_factory):
    leaky = tmp_path_factory.mktemp("leaky") / "leaky.html"
    leaky.write_text(LEAKY_PAGE, encoding="utf-8")
    report, leaky_visit = visit_pages([Path(rendered) / "report.html", leaky], INSPECT)
    return report, leaky_visit


def test_the_check_itself_catches_a_leaky_page(visits):
    _, leaky = visits
    assert leaky.requests == ["http://fictional-host.invalid/pixel.png"]
    assert "leaky page error" in leaky.console_errors
    assert leaky.evaluated["top"]["shown"] is False


def test_report_makes_no_network_request_and_logs_no_error(visits):
    report, _ = visits
    assert report.requests == []
    assert report.console_errors == []
    assert report.log_errors == []


def test_caution_visible_top_and_bottom(visits):
    report, _ = visits
    seen = report.evaluated
    for where in ("top", "bottom"):
        assert seen[where]["shown"], where
        assert " ".join(seen[where]["text"].split()) == " ".join(CAUTION.split())
    assert 0 <= seen["top"]["topOnLoad"] and seen["top"]["bottomOnLoad"] <= seen["viewport"]
    assert seen["bottom"]["topOnLoad"] > seen["top"]["bottomOnLoad"]


def test_every_embedded_figure_decodes(visits):
    report, _ = visits
    assert len(report.evaluated["images"]) == 15 and all(report.evaluated["images"])
