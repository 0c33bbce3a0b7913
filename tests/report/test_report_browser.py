"""The report in headless Chromium (Debian's `chromium`): no network requests, no console errors,
the caution visible at the top and the bottom, every embedded figure decoded, no text running out
of its box and no word broken across two lines."""

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

INSPECT = r"""(() => {
  const box = id => {
    const el = document.getElementById(id);
    if (!el) return null;
    const style = getComputedStyle(el), rect = el.getBoundingClientRect();
    return {text: el.innerText.trim(),
            shown: style.display !== "none" && style.visibility === "visible" && Number(style.opacity) > 0
                   && rect.width > 0 && rect.height > 0,
            topOnLoad: rect.top, bottomOnLoad: rect.bottom};
  };
  const texts = Array.from(document.querySelectorAll("p, li, td, th, h1, h2, h3, figcaption, summary, .caution"));
  const overflowing = texts.filter(el => el.scrollWidth > el.clientWidth + 1)
                           .map(el => el.tagName + ": " + el.innerText.slice(0, 60));
  const broken = [];
  for (const cell of texts) {
    const walker = document.createTreeWalker(cell, NodeFilter.SHOW_TEXT);
    for (let node = walker.nextNode(); node; node = walker.nextNode()) {
      for (const word of node.data.matchAll(/[\p{L}\p{N}_.]+/gu)) {  // letters, digits, '_' and '.': no break allowed
        const range = document.createRange();
        range.setStart(node, word.index);
        range.setEnd(node, word.index + word[0].length);
        const lines = new Set(Array.from(range.getClientRects()).map(r => Math.round(r.top)));
        if (lines.size > 1) broken.push(word[0]);
      }
    }
  }
  return {top: box("caution-top"), bottom: box("caution-bottom"), viewport: window.innerHeight,
          images: Array.from(document.images).map(i => i.complete && i.naturalWidth > 0),
          overflowing: overflowing, broken: broken};
})()"""

LEAKY_PAGE = """<!DOCTYPE html><html><head><meta charset="utf-8"></head><body>
<div id="caution-top" style="display:none">hidden</div>
<img src="http://fictional-host.invalid/pixel.png"><script>console.error("leaky page error")</script>
<p style="width:40px;white-space:nowrap;overflow:hidden">text that runs out of its box</p>
<table><tr><td style="width:30px;overflow-wrap:anywhere">methylation</td></tr></table>
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
    assert leaky.evaluated["overflowing"] == ["P: text that runs out of its box"]
    assert leaky.evaluated["broken"] == ["methylation"]


def test_no_text_overflows_and_no_word_is_broken(visits):
    report, _ = visits
    assert report.evaluated["overflowing"] == []
    assert report.evaluated["broken"] == []


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


def test_every_embedded_figure_decodes(visits, rendered):
    report, _ = visits
    drawn = len(list((Path(rendered) / "figures").glob("*.png")))
    assert drawn == 20 and len(report.evaluated["images"]) == drawn and all(report.evaluated["images"])
