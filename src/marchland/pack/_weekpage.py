"""The weekly update's folder: ``OUT/YYYY-Www/`` with week.html, tables/*.csv, manifest.json.

Written like the monthly bundle: into a hidden temporary folder beside the destination, renamed
into place only when complete; an existing week is replaced only with ``overwrite=True``. The
page is one self-contained file with no script: epi curves are inline SVG.
"""

from __future__ import annotations

import json
import os
from datetime import UTC, datetime
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np
import pandas as pd

from .. import __version__
from ..figures.maps import CAUTION_LINE
from . import bundle
from ._html import CAUTIONS, _section, esc, table_html

if TYPE_CHECKING:  # pragma: no cover
    from .weekly import WeekResult

_CSS = """
body{font-family:"DejaVu Sans",Verdana,sans-serif;margin:0;background:#fbfaf6;color:#23211d}
main{max-width:960px;margin:0 auto;padding:1.2rem 1.6rem 3rem}
h1{font-size:1.45rem;margin:.2rem 0} h2{font-size:1.15rem;margin:1.6rem 0 .5rem;
border-bottom:1px solid #d8d2c2} .sub,.note{color:#5a564c;font-size:.86rem}
.caution{background:#f5ebe3;border-left:5px solid #9b3e2d;padding:.5rem .9rem;font-size:.9rem}
table{border-collapse:collapse;font-size:.82rem;background:#fff}
th,td{border:1px solid #e0dacb;padding:.2rem .45rem;text-align:left} th{background:#f0ece1}
td.n{text-align:right;font-variant-numeric:tabular-nums}
.curves{display:grid;grid-template-columns:repeat(auto-fill,minmax(280px,1fr));gap:.8rem}
.curves figure{margin:0;background:#fff;border:1px solid #e0dacb;padding:.3rem}
.curves svg{width:100%;height:auto} figcaption{font-size:.8rem}
.absent{color:#8a3b1f}
"""


def _curve(df: pd.DataFrame, title: str) -> str:
    """Bars of reported cases, the nowcast line and its band, as inline SVG."""
    w, h, pad = 300, 140, 18
    n = len(df)
    rep = df["reported"].to_numpy(dtype=float)
    now = df["nowcast"].to_numpy(dtype=float)
    lo, hi = df["lower"].to_numpy(dtype=float), df["upper"].to_numpy(dtype=float)
    top = np.nanmax(np.r_[rep, now, hi, 1.0])
    bw = (w - pad) / max(n, 1)
    x = pad + bw * (np.arange(n) + 0.5)

    def y(v: np.ndarray) -> np.ndarray:
        return h - pad - (h - 2 * pad) * v / top

    bars = "".join(
        f'<rect x="{pad + i * bw + 1:.1f}" y="{y(v):.1f}" width="{bw - 2:.1f}" '
        f'height="{h - pad - y(v):.1f}" fill="#6d7fa8"/>'
        for i, v in enumerate(np.nan_to_num(rep))
    )
    ok = np.isfinite(lo) & np.isfinite(hi)
    band = ""
    if ok.any():
        pts = [f"{a:.1f},{b:.1f}" for a, b in zip(x[ok], y(hi[ok]), strict=True)]
        pts += [f"{a:.1f},{b:.1f}" for a, b in zip(x[ok][::-1], y(lo[ok][::-1]), strict=True)]
        band = f'<polygon points="{" ".join(pts)}" fill="#9b3e2d" fill-opacity=".22"/>'
    okn = np.isfinite(now)
    line = ""
    if okn.any():
        pts = " ".join(f"{a:.1f},{b:.1f}" for a, b in zip(x[okn], y(now[okn]), strict=True))
        line = f'<polyline points="{pts}" fill="none" stroke="#9b3e2d" stroke-width="1.6"/>'
    axis = (
        f'<text x="2" y="12" font-size="9">{top:,.0f}</text>'
        f'<line x1="{pad}" y1="{h - pad}" x2="{w}" y2="{h - pad}" stroke="#7d7a72"/>'
        f'<text x="{pad}" y="{h - 4}" font-size="9">{df["week"].iloc[0]:%d %b}</text>'
        f'<text x="{w - 40}" y="{h - 4}" font-size="9">{df["week"].iloc[-1]:%d %b}</text>'
    )
    return (
        f'<figure><svg viewBox="0 0 {w} {h}" role="img" aria-label="{esc(title)}">'
        f"{bars}{band}{line}{axis}</svg><figcaption>{esc(title)}: bars reported, line the "
        "nowcast, band its 90% interval.</figcaption></figure>"
    )


def render_week(result: WeekResult) -> str:
    """Render the week's page as one HTML string (no script, nothing fetched)."""
    region = result.config.region.name
    end = result.start + pd.Timedelta(days=6)
    title = f"{region}: weekly update, {result.week}"
    label = result.config.country_label
    tot = result.totals.rename(index=lambda c: c if c == "region" else label(c))
    body = [
        _section(
            "This week",
            f'<p class="note">Week {esc(result.week)}: {result.start:%Y-%m-%d} to '
            f"{end:%Y-%m-%d}.</p>"
            + table_html(
                tot,
                {
                    "cases": "cases",
                    "deaths": "deaths",
                    "units_reporting": "units reporting",
                    "units": "units",
                },
                index="country",
                kinds={"cases": "int", "deaths": "int"},
            ),
            "week",
        )
    ]
    if result.epi is not None and len(result.epi):
        figs = "".join(
            _curve(g.sort_values("week"), label(c)) for c, g in result.epi.groupby("country")
        )
        curves = (
            '<p class="note">The last weeks are still filling in: the nowcast estimates what '
            "late reports will add (delay only, not under-reporting).</p>"
            f'<div class="curves">{figs}</div>'
        )
    else:
        curves = f'<p class="absent">No nowcast: {esc(result.absent.get("nowcast", ""))}</p>'
    body.append(_section("Epi curves with the nowcast", curves, "epi"))
    body.append(
        _section(
            f"Units newly affected this week ({len(result.newly_affected)})",
            table_html(
                result.newly_affected,
                index="unit_id",
                kinds={"cases": "int"},
                empty="No unit reported its first case this week.",
            ),
            "new",
        )
    )
    cfr = result.cfr.rename(index=lambda c: c if c == "region" else label(c))
    body.append(
        _section(
            "Case fatality this week",
            table_html(
                cfr,
                {
                    "deaths": "deaths",
                    "cases": "cases",
                    "cfr": "CFR",
                    "lower": "lower",
                    "upper": "upper",
                },
                index="country",
                kinds={
                    "cfr": "pct",
                    "lower": "pct",
                    "upper": "pct",
                    "deaths": "int",
                    "cases": "int",
                },
            )
            + '<p class="note">Exact (Clopper-Pearson) 95% interval; few cases give wide '
            "limits.</p>",
            "cfr",
        )
    )
    if result.alerts is not None:
        alerts = table_html(
            result.alerts,
            {
                "name": "unit",
                "country": "country",
                "probability": "probability now",
                "previous": "a week before",
                "rise": "rise",
                "rank": "rank",
            },
            index="unit_id",
            kinds={"probability": "pct", "previous": "pct", "rise": "pct"},
            empty="No candidate.",
        )
    else:
        alerts = f'<p class="absent">{esc(result.absent.get("border alerts", ""))}</p>'
    body.append(_section("Border alerts: largest rises in border risk", alerts, "alerts"))
    comp = result.completeness.rename(index=label)
    body.append(
        _section(
            "Reporting completeness by country",
            table_html(
                comp,
                {
                    "units": "units",
                    "units_reporting": "reporting this week",
                    "share": "share",
                    "share_4w": "share, last 4 weeks",
                },
                index="country",
                kinds={"units": "int", "units_reporting": "int", "share": "pct", "share_4w": "pct"},
            ),
            "completeness",
        )
    )
    if result.warnings:
        body.append(
            _section(
                "Warnings",
                "<ul>" + "".join(f"<li>{esc(w)}</li>" for w in result.warnings) + "</ul>",
                "warnings",
            )
        )
    items = "".join(f"<li><b>{esc(a)}</b> {esc(b)}</li>" for a, b in CAUTIONS)
    body.append(_section("Cautions", f"<ul>{items}</ul>", "cautions"))
    return "\n".join(
        [
            "<!DOCTYPE html>",
            '<html lang="en"><head><meta charset="utf-8">',
            '<meta name="viewport" content="width=device-width, initial-scale=1">',
            '<meta http-equiv="Content-Security-Policy" content="default-src \'none\'; '
            "style-src 'unsafe-inline'\">",
            f"<title>{esc(title)}</title><style>{_CSS}</style></head><body><main>",
            f"<h1>{esc(title)}</h1>",
            f'<div class="sub">Data as received by {result.as_of:%Y-%m-%d} &middot; made '
            f"by marchland {esc(__version__)} &middot; the monthly pack holds "
            "the full analysis</div>",
            f'<p class="caution">{esc(CAUTION_LINE)}</p>',
            *body,
            "</main></body></html>",
        ]
    )


def write_week(result: WeekResult, out_dir: str | os.PathLike[str], *, overwrite: bool = False):
    """Write ``OUT/YYYY-Www/`` atomically and return the folder.

    Parameters
    ----------
    result : WeekResult
    out_dir : path-like
    overwrite : bool
        Replace an existing folder of the same week (only once the new one is complete).

    Returns
    -------
    pathlib.Path
    """
    return bundle.replace_atomically(
        out_dir, result.week, lambda tmp: _write_all(result, tmp), overwrite=overwrite
    )


def _write_all(result: WeekResult, root: Path) -> None:
    tdir = root / "tables"
    tdir.mkdir()
    tables = {
        "totals": result.totals,
        "epi_nowcast": result.epi,
        "newly_affected": result.newly_affected,
        "cfr": result.cfr,
        "border_alerts": result.alerts,
        "completeness": result.completeness,
    }
    for name, df in tables.items():
        if df is not None:
            bundle._csv(df, tdir / f"{name}.csv", index=not isinstance(df.index, pd.RangeIndex))
    (root / "week.html").write_text(render_week(result), encoding="utf-8")
    cfg = result.config
    files = [
        {"path": p.relative_to(root).as_posix(), "sha256": bundle.sha256(p)}
        for p in sorted(root.rglob("*"))
        if p.is_file()
    ]
    from .monthly import config_inputs

    manifest = {
        "marchland": __version__,
        "week": result.week,
        "week_start": f"{result.start:%Y-%m-%d}",
        "as_of": f"{result.as_of:%Y-%m-%d}",
        "created_utc": datetime.now(UTC).strftime("%Y-%m-%dT%H:%M:%SZ"),
        "seed": result.seed,
        "config": None if cfg.path is None else str(cfg.path),
        "inputs": [
            {"path": bundle._rel(p, cfg.base_dir), "sha256": bundle.sha256(p)}
            for p in config_inputs(cfg)
        ],
        "versions": bundle._versions(),
        "not_computed": dict(result.absent),
        "warnings": list(result.warnings),
        "files": files,
        "varies_between_runs": {"manifest.json": "the time the folder was made (created_utc)"},
    }
    (root / "manifest.json").write_text(
        json.dumps(manifest, indent=2, ensure_ascii=False) + "\n", encoding="utf-8"
    )
