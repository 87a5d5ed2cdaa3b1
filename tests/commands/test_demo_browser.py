"""The demo's report in a real browser (headless Chromium): it fits a 900 px window, no
number is split across lines, every figure loads."""

from __future__ import annotations

import json
import re
import shutil
import subprocess

import pytest


def _chromium() -> str | None:
    for name in ("chromium", "chromium-browser", "google-chrome"):
        path = shutil.which(name)
        if path:
            return path
    return None


#: measured in the page once it has loaded, written into the body for --dump-dom to carry out
PROBE = """<script>
window.addEventListener('load', function () {
  var doc = document.documentElement, split = [], broken = [];
  function lines(node) {
    var range = document.createRange(); range.selectNodeContents(node);
    var tops = {};
    Array.prototype.forEach.call(range.getClientRects(), function (r) {
      if (r.width > 0) tops[Math.round(r.top)] = true; });
    return Object.keys(tops).length;
  }
  document.querySelectorAll('span.num, td:not(.text)').forEach(function (el) {
    if (lines(el) > 1) split.push(el.textContent);
  });
  var imgs = Array.prototype.slice.call(document.images);
  imgs.forEach(function (img) {
    if (!(img.complete && img.naturalWidth > 0)) broken.push(img.alt);
  });
  var wide = [];
  document.querySelectorAll('body *').forEach(function (el) {
    var r = el.getBoundingClientRect();
    if (r.right > window.innerWidth + 1 && !el.closest('.scroll')) wide.push(el.tagName);
  });
  document.body.setAttribute('data-probe', JSON.stringify({
    width: window.innerWidth, scroll_width: doc.scrollWidth, split: split,
    images: imgs.length, broken: broken, wide: wide.slice(0, 10)}));
});
</script>"""


@pytest.mark.skipif(
    _chromium() is None,
    reason="no Chromium installed (apt-get install chromium) to open the demo report",
)
def test_demo_report_in_headless_chromium_at_900_px(demo_run, tmp_path):
    page = tmp_path / "report.html"
    text = (demo_run.folder / "report.html").read_text(encoding="utf-8")
    page.write_text(text.replace("</body>", PROBE + "</body>"), encoding="utf-8")
    result = subprocess.run(
        [_chromium(), "--headless", "--no-sandbox", "--disable-gpu", "--hide-scrollbars",
         "--window-size=900,1200", "--no-first-run", "--disable-background-networking",
         "--disable-component-update", "--disable-sync", f"--user-data-dir={tmp_path / 'p'}",
         "--virtual-time-budget=10000", "--dump-dom", page.as_uri()],
        capture_output=True, text=True, timeout=180,
    )
    match = re.search(r"data-probe=\"([^\"]*)\"", result.stdout)
    assert match, result.stderr[-2000:]
    probe = json.loads(match.group(1).replace("&quot;", '"').replace("&amp;", "&"))
    assert probe["width"] == 900
    assert probe["scroll_width"] <= probe["width"], probe  # no horizontal overflow
    assert probe["wide"] == [], probe
    assert probe["split"] == [], probe  # no number broken across lines
    assert probe["images"] >= 10 and probe["broken"] == [], probe  # every figure loaded
