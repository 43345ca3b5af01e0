"""Size and first paint of the report's interactive map (issue 18); never asserted in tests.

Runs the month (or loads a pickled MonthResult), renders report.html without the static
figures, and opens it in headless Chromium with a probe that records first-contentful-paint
and the time the map's script finished (``performance.now()`` after load).

    $ PYTHONPATH=src python benchmarks/bench_webmap.py demo
    $ PYTHONPATH=src python benchmarks/bench_webmap.py /tmp/world10k/scenario.toml
"""

from __future__ import annotations

import json
import pickle
import re
import shutil
import subprocess
import sys
import tempfile
import time
import warnings
from pathlib import Path

_PROBE = """<script>
window.addEventListener("load", function () {
  var p = performance.getEntriesByType("paint").map(function (e) {
    return [e.name, Math.round(e.startTime)]; });
  var pre = document.createElement("pre"); pre.id = "probe";
  pre.textContent = JSON.stringify({paint: p, load: Math.round(performance.now()),
    paths: document.querySelectorAll("#ml-units path").length});
  document.body.appendChild(pre); });
</script>"""


def main() -> None:
    """Command line: ``bench_webmap.py demo|CONFIG|RESULT.pkl``."""
    from marchland.demo import scenario_path
    from marchland.pack import monthly
    from marchland.pack._report import render_report

    arg = sys.argv[1]
    warnings.simplefilter("ignore")
    if arg.endswith(".pkl"):
        result = pickle.loads(Path(arg).read_bytes())
    else:
        result = monthly.run_month(scenario_path() if arg == "demo" else arg, "2026-10")
    t0 = time.perf_counter()
    html = render_report(result, {})
    render_s = time.perf_counter() - t0
    tmp = Path(tempfile.mkdtemp())
    page = tmp / "report.html"
    html = re.sub(r"script-src '[^']*'", "script-src 'unsafe-inline'", html)
    page.write_text(html.replace("</body>", _PROBE + "</body>"), encoding="utf-8")
    exe = shutil.which("chromium") or shutil.which("chromium-browser")
    cmd = [exe, "--headless", "--no-sandbox", "--disable-gpu", "--proxy-server=127.0.0.1:9",
           f"--user-data-dir={tmp / 'ud'}", "--window-size=1200,1600", "--dump-dom",
           page.as_uri()]  # fmt: skip
    res = subprocess.run(cmd, capture_output=True, text=True, timeout=300)
    m = re.search(r'<pre id="probe">(.*?)</pre>', res.stdout, re.S)
    probe = json.loads(m.group(1).replace("&quot;", '"')) if m else None
    print(
        json.dumps(
            {
                "units": len(result.units),
                "page_mb": round(page.stat().st_size / 1e6, 2),
                "render_s": round(render_s, 2),
                "chromium": probe,
            }
        )
    )
    shutil.rmtree(tmp, ignore_errors=True)


if __name__ == "__main__":
    main()
