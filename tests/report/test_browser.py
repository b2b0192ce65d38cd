"""The HTML report of example_repo/ in a real browser (headless Chromium, Debian's ``chromium``
package): no console messages or error events, every image decodes, every internal link
finds its target, and a screenshot of the first screen is not blank. Skips, saying why,
where chromium is not installed (.ci/run installs it where the machine allows).

The browser is driven without extra packages: ``--dump-dom`` of a copy of the report with a
small check script added (the report itself has none), ``--enable-logging=stderr`` for the
console, and ``--screenshot`` of the report as written.
"""

import json
import os
import re
import shutil
import subprocess
from pathlib import Path

import pytest

FLAGS = ("--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
         "--disable-background-networking", "--disable-component-update", "--disable-sync")


def _chromium() -> str | None:
    for name in ("chromium", "chromium-browser"):
        found = shutil.which(name)
        if found:
            return found
    return None


CHROMIUM = _chromium()
pytestmark = pytest.mark.skipif(
    CHROMIUM is None, reason="headless Chromium is not installed (Debian: apt-get install "
                             "chromium; .ci/run installs it when it runs as root with apt)")

# Recorded from the first moment: error events (a resource that fails to load fires one on
# its element, caught here in the capture phase) and what the page found at load.
_FIRST = """<script>window.__egErrors = [];
window.addEventListener('error', function (e) {
  var t = e.target || {};
  window.__egErrors.push(e.message || ('failed to load ' + (t.src || t.href || t.tagName)));
}, true);</script>"""
_CHECK = """<script>window.addEventListener('load', function () {
  var imgs = Array.prototype.slice.call(document.images);
  var undecoded = imgs.filter(function (i) {
    return !(i.complete && i.naturalWidth > 0 && i.naturalHeight > 0); })
    .map(function (i) { return i.alt || i.src.slice(0, 40); });
  var links = Array.prototype.slice.call(document.querySelectorAll('a[href^="#"]'));
  var broken = links.filter(function (a) {
    return !document.getElementById(decodeURIComponent(a.getAttribute('href').slice(1))); })
    .map(function (a) { return a.getAttribute('href'); });
  var out = document.createElement('pre');
  out.id = 'eg-browser-check';
  out.textContent = JSON.stringify({images: imgs.length, undecoded: undecoded,
                                    links: links.length, broken: broken,
                                    errors: window.__egErrors});
  document.body.appendChild(out);
});</script>"""


def _browser(tmp: Path, *args: str) -> subprocess.CompletedProcess:
    profile = tmp / f"profile-{len(list(tmp.glob('profile-*')))}"  # a fresh one each run
    return subprocess.run([CHROMIUM, *FLAGS, f"--user-data-dir={profile}", *args],
                          capture_output=True, text=True, timeout=180,
                          env={**os.environ, "HOME": str(tmp)})


@pytest.fixture
def report(example_report):
    return example_report / "report.html"


def test_report_loads_cleanly_in_chromium(report, tmp_path):
    html = report.read_text(encoding="utf-8")
    # self-contained: nothing fetched from elsewhere
    assert not re.search(r"""(?:src|href)\s*=\s*["']?(?:https?:|//)""", html)
    page = tmp_path / "checked.html"
    page.write_text(html.replace("<head>", "<head>" + _FIRST, 1)
                    .replace("</body>", _CHECK + "</body>", 1), encoding="utf-8")
    run = _browser(tmp_path, "--enable-logging=stderr", "--v=0",
                   "--virtual-time-budget=10000", "--dump-dom", page.as_uri())
    assert run.returncode == 0, run.stderr[-2000:]
    found = re.search(r'<pre id="eg-browser-check">(.*?)</pre>', run.stdout, re.S)
    assert found, "the check script did not run: " + run.stdout[-500:]
    check = json.loads(found.group(1).replace("&quot;", '"').replace("&amp;", "&"))
    assert check["errors"] == []
    assert check["images"] >= 30 and check["undecoded"] == []  # pole maps, loop, fields …
    assert check["links"] >= 30 and check["broken"] == []
    console = [line for line in run.stderr.splitlines() if ":CONSOLE" in line]
    assert console == []


def test_first_screen_is_not_blank(report, tmp_path):
    from PIL import Image  # a matplotlib dependency, like the report's own figures

    shot = tmp_path / "first.png"
    run = _browser(tmp_path, "--window-size=1280,900", f"--screenshot={shot}",
                   report.as_uri())
    assert run.returncode == 0 and shot.is_file(), run.stderr[-2000:]
    img = Image.open(shot).convert("RGB")
    assert img.size == (1280, 900)
    colours = img.getcolors(maxcolors=1 << 20)
    assert colours is not None and len(colours) > 50  # text, badges, the header band
    white = sum(n for n, c in colours if min(c) >= 250)
    assert white < 0.9 * img.size[0] * img.size[1]
    # the header band is the report's ink colour (--ink, #1f3347), not a blank page
    r, g, b = img.getpixel((5, 5))
    assert (r, g, b) != (255, 255, 255) and b > r
