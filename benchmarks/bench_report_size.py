"""Size of a month's report.html and what it is made of (issue 18: keep the page under 15 MB).

Reads finished month folders (``marchland run ... --out DIR`` or ``marchland demo``), so the
heavy run is done once and measured here. For each report: total size, the embedded figures
(base64 data URIs), the interactive map's script and data, and the rest (tables, prose); the
maps/*.png on disk beside it, for comparison with what the page embeds.

Run:  .venv/bin/python benchmarks/bench_report_size.py MONTH_DIR [MONTH_DIR ...]

Measured 2026-12-02 (RESULTS.md, "Report page size"): demo 7.85 MB before, 2.21 MB after;
10,000 districts 12.67 MB after (35.3 MB with the same figures embedded at full colour).
"""

from __future__ import annotations

import re
import sys
from pathlib import Path

MB = 1e6


def breakdown(month_dir: Path) -> dict[str, float]:
    """Return the report's size parts in MB."""
    html = (month_dir / "report.html").read_text(encoding="utf-8")

    def mb(parts: list[str]) -> float:
        return sum(len(x.encode("utf-8")) for x in parts) / MB

    total = len(html.encode("utf-8"))
    imgs = re.findall(r'src="data:image/[a-z]+;base64,[A-Za-z0-9+/=]+"', html)
    svg = re.findall(r'<svg id="ml-svg".*?</svg>', html, flags=re.S)
    data = re.findall(r'<script type="application/json" id="ml-data">.*?</script>', html, re.S)
    script = re.findall(r"<script>.*?</script>", html, flags=re.S)
    tables = re.findall(r"<table\b.*?</table>", html, flags=re.S)
    maps = sorted((month_dir / "maps").glob("*.png"))
    parts = {
        "embedded figures": mb(imgs),
        "map SVG (one path per unit)": mb(svg),
        "map data block (JSON)": mb(data),
        "map script": mb(script),
        "tables": mb(tables),
    }
    return {
        "report.html": total / MB,
        **parts,
        "figures embedded (count)": len(imgs),
        "rest (prose, styles, markup)": total / MB - sum(parts.values()),
        "maps/*.png on disk": sum(p.stat().st_size for p in maps) / MB,
    }


def main(argv: list[str]) -> None:
    """Print one block per month folder."""
    if not argv:
        raise SystemExit(__doc__)
    for arg in argv:
        d = Path(arg)
        print(d)
        for k, v in breakdown(d).items():
            print(f"  {k:<30} {v:8.2f}" if isinstance(v, float) else f"  {k:<30} {v:8d}")


if __name__ == "__main__":
    main(sys.argv[1:])
