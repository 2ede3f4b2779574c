"""Headless Chromium for the report tests: load a report at 1280 px and measure what a reader
would trip on (broken images, images not inline, horizontal overflow), and take a screenshot.

The page is copied with a small script appended that writes its measurements into the DOM;
``--dump-dom`` prints the DOM after the page (and the script) ran.
"""

from __future__ import annotations

import json
import re
import shutil
import subprocess
from pathlib import Path

WIDTH_PX = 1280
FLAGS = ("--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
         "--disable-background-networking", "--disable-component-update", "--disable-sync",
         "--hide-scrollbars")

_PROBE = """
<script>
window.addEventListener('load', function () {
  var imgs = Array.prototype.slice.call(document.images);
  var out = {
    images: imgs.length,
    broken: imgs.filter(function (i) { return !(i.complete && i.naturalWidth > 0); }).map(function (i) { return i.alt; }),
    not_inline: imgs.filter(function (i) { return i.src.indexOf('data:') !== 0; }).map(function (i) { return i.src; }),
    external: Array.prototype.slice.call(document.querySelectorAll('link[href],script[src],iframe,object,embed'))
                   .map(function (e) { return e.outerHTML.slice(0, 80); }),
    scroll_width: document.documentElement.scrollWidth,
    inner_width: window.innerWidth,
    wide: Array.prototype.slice.call(document.body.querySelectorAll('*')).filter(function (e) {
      var r = e.getBoundingClientRect(); return r.right > window.innerWidth + 1;
    }).map(function (e) { return e.tagName; }).slice(0, 10)
  };
  var pre = document.createElement('pre');
  pre.id = 'coilshift-probe';
  pre.textContent = 'PROBE' + JSON.stringify(out) + 'EBORP';
  document.body.appendChild(pre);
});
</script>
"""


def chromium() -> str | None:
    """The Chromium executable, or None when it is not installed."""
    return shutil.which("chromium") or shutil.which("chromium-browser")


def _run(exe: str, args: list[str], profile: Path, timeout: float = 90.0) -> subprocess.CompletedProcess:
    profile.mkdir(parents=True, exist_ok=True)
    return subprocess.run([exe, *FLAGS, f"--user-data-dir={profile}", f"--window-size={WIDTH_PX},900", *args],
                          capture_output=True, text=True, timeout=timeout)


def probe(report: Path, work: Path) -> dict:
    """Load ``report`` at 1280 px and return the measurements (see ``_PROBE``)."""
    exe = chromium()
    work.mkdir(parents=True, exist_ok=True)
    page = work / ("probe-" + report.name)
    page.write_text(report.read_text(encoding="utf-8").replace("</body>", _PROBE + "</body>"), encoding="utf-8")
    r = _run(exe, ["--virtual-time-budget=5000", "--dump-dom", page.as_uri()], work / "profile-dom")
    m = re.search(r"PROBE(\{.*?\})EBORP", r.stdout, re.S)
    assert m, f"no measurements from chromium: {r.stderr[-500:]}"
    return json.loads(m.group(1))


def screenshot(report: Path, png: Path, height_px: int = 6000) -> Path:
    """A full-width screenshot of the top ``height_px`` of the report."""
    exe = chromium()
    r = subprocess.run([exe, *FLAGS, f"--user-data-dir={png.parent / ('profile-' + png.stem)}",
                        f"--window-size={WIDTH_PX},{height_px}", f"--screenshot={png}", report.as_uri()],
                       capture_output=True, text=True, timeout=90)
    assert png.is_file(), r.stderr[-500:]
    return png
