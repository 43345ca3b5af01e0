"""report.html in a real browser: headless Chromium renders it, every image loads, no request.

Chromium (Debian's ``chromium`` package) loads a copy of the report with a small check script
added before ``</body>``; after the load event the script writes, into the DOM, how many images
the page has, how many decoded, and every resource the page fetched (Resource Timing). The
copy drops the report's Content-Security-Policy, so a stray reference would really be fetched
and seen, not silently blocked; a proxy to a closed local port keeps anything from leaving the
machine. A control page with a broken image and a remote image shows the check can fail.

Without Chromium the tests skip with a reason on a user's machine; under ``CI=true`` a missing
Chromium is a failure.
"""

from __future__ import annotations

import json
import re
import shutil
import subprocess

import pytest
from system_tools import need

_CHECK = """<script>
window.addEventListener("load", function () {
  var imgs = Array.prototype.slice.call(document.images);
  var out = {images: imgs.length,
             loaded: imgs.filter(function (i) { return i.complete && i.naturalWidth > 0; }).length,
             fetched: performance.getEntriesByType("resource")
                        .map(function (e) { return e.name; })};
  var pre = document.createElement("pre");
  pre.id = "marchland-check";
  pre.textContent = JSON.stringify(out);
  document.body.appendChild(pre);
});
</script>"""


def _chromium() -> str:
    return need(("chromium", "chromium-browser"), "Chromium", "chromium", "report not rendered")


def _render(html_path, tmp_path) -> dict:
    exe = _chromium()
    page = tmp_path / "page.html"
    html = html_path.read_text(encoding="utf-8")
    html = re.sub(r'<meta http-equiv="Content-Security-Policy"[^>]*>', "", html)
    assert "</body>" in html
    page.write_text(html.replace("</body>", _CHECK + "</body>"), encoding="utf-8")
    cmd = [
        exe,
        "--headless",
        "--no-sandbox",
        "--disable-gpu",
        "--disable-background-networking",
        "--disable-component-update",
        "--disable-sync",
        "--no-first-run",
        "--proxy-server=127.0.0.1:9",
        f"--user-data-dir={tmp_path / 'ud'}",
        "--virtual-time-budget=10000",
        "--dump-dom",
        page.as_uri(),
    ]
    res = subprocess.run(cmd, capture_output=True, text=True, timeout=120)
    m = re.search(r'<pre id="marchland-check">(.*?)</pre>', res.stdout, re.S)
    assert m, f"the check did not run; chromium said: {res.stderr[-2000:]}"
    return json.loads(m.group(1).replace("&quot;", '"').replace("&amp;", "&"))


@pytest.fixture(scope="module")
def report(grid_month):
    return grid_month[1] / "report.html"


def test_report_renders_with_every_image_and_no_request(report, tmp_path):
    got = _render(report, tmp_path)
    assert got["images"] >= 8
    assert got["loaded"] == got["images"]
    assert [u for u in got["fetched"] if not u.startswith("data:")] == []


def test_report_html_references_nothing_outside(report):
    html = report.read_text(encoding="utf-8")
    assert not re.search(r"https?://|//[a-z0-9.-]+\.[a-z]{2,}/", html, re.I)
    # One executable script, the map's own, allowed by its hash; the rest is a JSON data block.
    from marchland.pack import _webmap

    scripts = re.findall(r"<script([^>]*)>", html, re.I)
    assert sorted(scripts) == ["", ' type="application/json" id="ml-data"']
    assert f"<script>{_webmap.script()}</script>" in html
    assert f"script-src {_webmap.script_hash()}" in html
    assert not re.search(r"\b(fetch|XMLHttpRequest|WebSocket|import\()", _webmap.script())


def test_the_check_catches_a_broken_image_and_a_remote_request(tmp_path):
    bad = tmp_path / "bad.html"
    bad.write_text(
        '<!DOCTYPE html><html><body><img src="missing.png">'
        '<img src="http://example.invalid/a.png"></body></html>'
    )
    got = _render(bad, tmp_path)
    assert got["images"] == 2 and got["loaded"] == 0
    assert any(u.startswith("http://example.invalid") for u in got["fetched"])


@pytest.mark.parametrize(
    ("ci", "outcome"), [("true", pytest.fail.Exception), ("", pytest.skip.Exception)]
)
def test_missing_chromium_fails_under_ci_and_skips_elsewhere(monkeypatch, ci, outcome):
    monkeypatch.setattr(shutil, "which", lambda name: None)
    monkeypatch.setenv("CI", ci)
    with pytest.raises(outcome, match="Chromium is not installed"):
        _chromium()
