"""The report's interactive map in headless Chromium: hover, click and search work, no request.

A check script added before ``</body>`` drives the map with synthetic DOM events after the
load event (mouse move and click on a unit's path, typing an alias into the search box and
submitting) and writes what the page then shows into the DOM, with every resource fetched
(Resource Timing). The copy keeps the report's Content-Security-Policy minus nothing: the map's
script must run under it (allowed by its hash). Chromium is found as in test_report_browser:
skipped with a reason on a user's machine, a failure under ``CI=true``.
"""

from __future__ import annotations

import dataclasses
import json
import re
import subprocess

import numpy as np
import pandas as pd
import pytest
import shapely
from shapely.geometry import box
from test_report_browser import _chromium

from marchland.figures import _mapclass as mc
from marchland.pack import _webmap, bundle

_DRIVE = """<script>
window.addEventListener("load", function () {
  var out = {};
  var p = document.querySelectorAll("#ml-units path")[%(i)d];
  var r = p.getBoundingClientRect();
  var at = {bubbles: true, clientX: r.left + r.width / 2, clientY: r.top + r.height / 2};
  p.dispatchEvent(new MouseEvent("mousemove", at));
  var tip = document.getElementById("ml-tip");
  out.tip = tip.hidden ? null : tip.getAttribute("data-unit");
  out.tipText = tip.textContent;
  p.dispatchEvent(new MouseEvent("click", at));
  var info = document.getElementById("ml-info");
  out.clicked = info.getAttribute("data-unit");
  out.spark = info.querySelectorAll("svg.ml-spark rect").length;
  var q = document.getElementById("ml-q");
  q.value = "%(alias)s";
  q.dispatchEvent(new Event("input", {bubbles: true}));
  out.hits = document.querySelectorAll("#ml-hits li").length;
  q.form.dispatchEvent(new Event("submit", {bubbles: true, cancelable: true}));
  out.found = info.getAttribute("data-unit");
  out.viewBox = document.getElementById("ml-svg").getAttribute("viewBox");
  document.querySelectorAll('input[name="ml-layer"]')[%(layer)d].click();
  out.fill = p.getAttribute("fill");
  out.fetched = performance.getEntriesByType("resource").map(function (e) { return e.name; });
  var pre = document.createElement("pre");
  pre.id = "marchland-check";
  pre.textContent = JSON.stringify(out);
  document.body.appendChild(pre);
});
</script>"""


@pytest.fixture(scope="module")
def month(grid_month, tmp_path_factory):
    result = grid_month[0]
    # A report spelling that is neither id nor name, as place-name matching records it.
    extra = pd.DataFrame({"source": ["x"], "place": ["Old Ninefive"], "unit_id": ["BBB-02-0905"]})
    result = dataclasses.replace(
        result,
        matches=extra if result.matches is None else pd.concat([result.matches, extra]),
    )
    return result, bundle.write_month(result, tmp_path_factory.mktemp("webmap")) / "report.html"


def _drive(report, tmp_path, **params) -> dict:
    exe = _chromium()
    html = report.read_text(encoding="utf-8")
    # The check script is not the map's: allow inline scripts in this copy only.
    html = html.replace("script-src ", "script-src 'unsafe-inline' ")
    html = re.sub(r"script-src 'unsafe-inline' '[^']*'", "script-src 'unsafe-inline'", html)
    page = tmp_path / "page.html"
    page.write_text(html.replace("</body>", (_DRIVE % params) + "</body>"), encoding="utf-8")
    cmd = [
        exe, "--headless", "--no-sandbox", "--disable-gpu", "--disable-background-networking",
        "--disable-component-update", "--disable-sync", "--no-first-run",
        "--proxy-server=127.0.0.1:9", f"--user-data-dir={tmp_path / 'ud'}",
        "--window-size=1200,1600", "--virtual-time-budget=10000", "--dump-dom", page.as_uri(),
    ]  # fmt: skip
    res = subprocess.run(cmd, capture_output=True, text=True, timeout=120)
    m = re.search(r'<pre id="marchland-check">(.*?)</pre>', res.stdout, re.S)
    assert m, f"the check did not run; chromium said: {res.stderr[-2000:]}"
    return json.loads(m.group(1).replace("&quot;", '"').replace("&amp;", "&"))


def test_hover_click_search_and_layer_switch_work_with_nothing_fetched(month, tmp_path):
    result, report = month
    data, layers = _webmap.map_data(result)
    ids = data["id"]
    hover = ids.index("AAA-01-0000")
    target = ids.index("BBB-02-0905")
    # Search by a name that is neither the unit's id nor its name: a spelling from the reports.
    alias = "ninefive"
    risk = [k for k, lay in enumerate(data["layers"]) if lay["key"] == "risk"][0]
    got = _drive(report, tmp_path, i=hover, alias=alias, layer=risk)
    assert got["tip"] == "AAA-01-0000"
    n = len(ids)
    assert _webmap.decode(data["layers"][0]["text"], n)[hover] in got["tipText"]
    assert got["clicked"] == "AAA-01-0000"
    assert got["spark"] == len(data["weeks"]) > 0
    assert got["hits"] >= 1 and got["found"] == ids[target]
    assert got["viewBox"] != "" and got["viewBox"] != report.read_text().split('viewBox="')[1]
    lay = data["layers"][risk]
    expected = lay["palette"][_webmap.uncodes(lay["cls"], n)[hover]]
    assert got["fill"].lower() == expected.lower()
    assert got["fetched"] == []


def test_map_colours_are_the_static_maps_classes(month):
    result, _ = month
    data, _ = _webmap.map_data(result)
    lay = data["layers"][0]
    r = result.rates
    bins = mc._rate_bounds(result.rates_history, 5)
    want, _ = mc._rate_colours(r["month_rate"].where(r["month_weeks_reported"] > 0), bins)
    got = [lay["palette"][c].split("|")[0] for c in _webmap.uncodes(lay["cls"], len(lay["cls"]))]
    assert got == want.reindex(result.units.index).tolist()


def test_svg_paths_keep_shared_borders_shared():
    # Two squares sharing a wobbly edge: after simplification both hold the same vertices there.
    edge = [(1.0, y / 10) for y in range(11)]
    edge = [(x + 0.003 * np.sin(7 * y), y) for x, y in edge]
    a = shapely.Polygon([(0, 0), *edge, (0, 1)])
    b = shapely.Polygon([(2, 0), (2, 1), *edge[::-1]])
    paths, _ = _webmap.svg_paths([a, b], tolerance=0.01)
    simple = shapely.coverage_simplify(np.array([a, b]), 0.01)
    assert shapely.intersection(simple[0], simple[1]).area == pytest.approx(0, abs=1e-12)
    assert all(p.startswith("M") and p.endswith("z") for p in paths)
    assert _webmap.svg_paths([box(0, 0, 1, 1)], tolerance=0)[0] == [
        "M10000 10000l0-10000-10000 0 0 10000z"  # box() runs from (1, 0) anticlockwise
    ]
