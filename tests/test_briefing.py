"""The briefing layer: priority list columns and flags, report prose, map labels, atlas pages.

Covered: expected cases and need rank follow from the priority table; the out-of-reach flag
marks exactly the uncovered districts among the largest needs; item headers carry their unit
from the items file; every analysis section has its "How to read this" and the report a
glossary and a month definition; map labels never overlap each other (forced collisions
included); every atlas page has one paper size, switchable by config; the CLI help shows no
literal ``\\b`` and a terminal run says at once that it started; the hotspot table's "Gi*
agrees" column; the report's screen copy of a figure keeps its colours and is smaller; the
border-risk PNG points to the backtest table and its atlas page carries it. Invented data only
(the small grid world of ``month_world``).
"""

from __future__ import annotations

import dataclasses
import re

import geopandas as gpd
import pandas as pd
import pytest
from click.testing import CliRunner
from month_world import write_world
from shapely.geometry import box

from marchland import cli
from marchland.figures.labels import label_units
from marchland.figures.maps import MapNotes, attack_rate_map, base_map
from marchland.pack import _briefing, bundle, monthly


@pytest.fixture(scope="module")
def month(grid_month):
    return grid_month


def test_priority_frame_adds_need_depot_and_flag(month):
    result, _ = month
    p = _briefing.priority_frame(result)
    pd.testing.assert_series_equal(
        p["expected_cases"], p["probability"] * p["planning_cases"], check_names=False
    )
    # need rank 1 is the largest expected need
    assert p.loc[p["need_rank"] == 1, "expected_cases"].iloc[0] == p["expected_cases"].max()
    a = result.depot_assignment.reindex(p.index)
    assert (p["covered"] == a["covered"]).all()
    top_k = result.config.risk.top_k
    want = (p["need_rank"] <= top_k) & ~p["covered"]
    assert ((p["flag"] != "") == want).all()
    assert list(p.index) == list(result.priorities.index)  # order stays by rank


def test_item_headers_carry_their_unit(month):
    result, written = month
    units = _briefing.item_units(result)
    assert units and set(units.values()) <= {
        "sachet",
        "litre",
        "bag",
        "kit",
        "tablet",
        "piece",
        "box",
    }
    html = (written / "report.html").read_text(encoding="utf-8")
    for item, unit in units.items():
        assert f"{item} ({_briefing._plural(unit)})" in html


def test_report_explains_each_section_and_the_month(month):
    _, written = month
    html = (written / "report.html").read_text(encoding="utf-8")
    for section in ("rates", "hotspots", "spread", "risk"):
        part = html.split(f'<section id="{section}">', 1)[1].split("</section>", 1)[0]
        assert "How to read this" in part, section
    assert '<section id="glossary">' in html
    assert "mid-week day" in html and "Order:</b> by <b>rank</b>" in html
    assert "@media print" in html


def test_labels_never_overlap_even_when_crowded():
    # 12 tiny units side by side: their names cannot all sit on their own points.
    u = gpd.GeoDataFrame(
        {"country": ["AAA"] * 12},
        index=[f"u{i}" for i in range(12)],
        geometry=[box(i * 2e3, 0, (i + 1) * 2e3, 2e3) for i in range(12)] + [],
        crs="EPSG:3035",
    )
    bm = base_map(u)
    fig = attack_rate_map(bm, pd.Series(1.0, index=u.index), MapNotes("x", "y"))
    placed = label_units(fig, bm, {i: f"Long district name {i}" for i in u.index})
    assert 0 < len(placed) < 12  # some left off rather than drawn over another
    renderer = fig.canvas.get_renderer()
    boxes = [
        t.get_window_extent(renderer) for t in fig.axes[0].texts if t.get_gid() == "unit-label"
    ]
    assert len(boxes) == len(placed)
    for i, a in enumerate(boxes):
        for b in boxes[i + 1 :]:
            assert not a.overlaps(b)


def _page_sizes(pdf_bytes: bytes) -> set[tuple[str, ...]]:
    return set(
        re.findall(rb"/MediaBox\s*\[\s*([\d.]+)\s+([\d.]+)\s+([\d.]+)\s+([\d.]+)", pdf_bytes)
    )


def test_every_atlas_page_has_the_config_paper_size(month, tmp_path):
    result, written = month
    sizes = _page_sizes((written / "atlas.pdf").read_bytes())
    assert len(sizes) == 1
    (_, _, w, h) = next(iter(sizes))
    assert (round(float(w)), round(float(h))) == (842, 595)  # A4 landscape in points
    cfg = dataclasses.replace(
        result.config, output=dataclasses.replace(result.config.output, paper="letter")
    )
    other = bundle.write_month(dataclasses.replace(result, config=cfg), tmp_path / "o")
    (_, _, w, h) = next(iter(_page_sizes((other / "atlas.pdf").read_bytes())))
    assert (round(float(w)), round(float(h))) == (792, 612)  # 11 x 8.5 in


def test_help_shows_no_literal_backslash_b():
    runner = CliRunner()
    for name in [None, *cli.cli.commands]:
        res = runner.invoke(cli.cli, [name, "--help"] if name else ["--help"])
        assert res.exit_code == 0 and "\\b" not in res.output, name
        assert "\b" not in res.output


def test_a_terminal_run_says_it_started_at_once(monkeypatch, tmp_path):
    monkeypatch.setattr(cli, "_stderr_is_terminal", lambda: True)

    def stop(*args, **kwargs):
        raise KeyboardInterrupt

    monkeypatch.setattr(monthly, "run_month", stop)
    cfg = write_world(tmp_path)
    res = CliRunner().invoke(cli.cli, ["run", str(cfg), "--month", "2026-10"])
    assert res.stderr.startswith("marchland: analysing month 2026-10")


def test_gi_agrees_compares_like_with_like():
    from marchland.pack._sections import gi_agrees
    from marchland.stats.autocorrelation import COLD, HOT, NOT_SIGNIFICANT

    label = pd.Series(["High-High", "High-High", "Low-Low", "Low-Low", "High-Low", "Low-High"])
    gi = pd.Series([HOT, NOT_SIGNIFICANT, COLD, HOT, HOT, NOT_SIGNIFICANT])
    out = gi_agrees(label, gi).tolist()
    assert out[:4] == ["yes", "no", "yes", "no"]
    # Gi* cannot show an outlier: neither "yes" nor a "no" that reads as a contradiction.
    assert out[4:] == ["not comparable (outlier)"] * 2


def test_page_copy_of_a_figure_keeps_its_colours_and_is_smaller(tmp_path):
    import io

    import numpy as np
    from PIL import Image

    from marchland.pack._html import page_png

    # A map-like picture: flat class colours plus a half-transparent band over white paper.
    rng = np.random.default_rng(5)
    palette = rng.integers(0, 256, size=(40, 3), dtype=np.uint8)
    idx = rng.integers(0, 40, size=(60, 80))
    rgba = np.dstack([palette[np.repeat(np.repeat(idx, 8, 0), 8, 1)], np.full((480, 640), 255)])
    rgba = rgba.astype(np.uint8)
    rgba[:40, :, 3] = 0  # transparent strip: must come out white, not black
    src = tmp_path / "m.png"
    Image.fromarray(rgba, "RGBA").save(src)
    out = page_png(src)
    assert len(out) < src.stat().st_size
    back = np.asarray(Image.open(io.BytesIO(out)).convert("RGB"))
    assert (back[:40] == 255).all()
    # 40 flat colours fit a 256-colour palette exactly.
    np.testing.assert_array_equal(back[40:], rgba[40:, :, :3])
    assert src.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"  # file on disk left as it was


def test_page_copy_from_opaque_pixels_skips_nothing_the_white_underlay_would_change(tmp_path):
    # Opaque pixels (every figure is saved on white) take a shortcut past laying them on
    # white: the copy must be the same bytes as the one made through the underlay, from the
    # file, with anti-aliased (many-colour) and flat (few-colour) pictures alike.
    import numpy as np
    from PIL import Image

    from marchland.pack._html import page_png

    rng = np.random.default_rng(11)
    for colours in (30, 4000):
        flat = rng.integers(0, 256, size=(colours, 3), dtype=np.uint8)
        idx = rng.integers(0, colours, size=(120, 160))
        rgba = np.dstack([flat[idx], np.full(idx.shape, 255, np.uint8)]).astype(np.uint8)
        src = tmp_path / f"o{colours}.png"
        Image.fromarray(rgba, "RGBA").save(src)
        assert page_png(src, rgba) == page_png(src)
        # One see-through pixel: the underlay is needed and applied.
        rgba[0, 0, 3] = 0
        Image.fromarray(rgba, "RGBA").save(src)
        assert page_png(src, rgba) == page_png(src)


def test_risk_png_points_to_the_backtest_table_the_atlas_shows_it(month):
    from marchland.pack import _figures

    result, written = month
    html = (written / "report.html").read_text(encoding="utf-8")
    risk = html.split('<section id="risk">', 1)[1].split("</section>", 1)[0]
    assert risk.count("<th>AUC</th>") == 1  # the table once, beside the map
    fig = next(f for n, f, _ in _figures.draw_figures(result) if n == "border_risk")
    texts = [t.get_text() for t in fig.texts]
    assert _figures.BACKTEST_POINTER in texts and not any("Brier" in t for t in texts)
    _figures.for_atlas("border_risk", fig, result)
    texts = [t.get_text() for t in fig.texts]
    assert any("Brier" in t and "score" in t for t in texts)
    assert _figures.BACKTEST_POINTER not in texts


def test_figures_are_the_same_files_whoever_draws_them(month, tmp_path):
    # Drawn in this process alone and shared with a forked copy (each takes the next figure):
    # the PNGs, their report copies and the atlas (one-page PDFs joined in atlas order) are
    # byte for byte the same, so the manifest's digests do not depend on the worker count.
    from marchland.pack._drawing import write_figures

    result, _ = month
    drawn = {}
    for workers in (1, 2):
        root = tmp_path / f"w{workers}"
        root.mkdir()
        figs = write_figures(result, root, workers=workers)
        drawn[workers] = (
            {n: (f["path"].read_bytes(), f["page"]) for n, f in figs.items()},
            (root / "atlas.pdf").read_bytes(),
        )
        assert not (root / ".pages").exists()
    assert list(drawn[1][0]) == list(drawn[2][0])  # same figures, atlas order
    for name in drawn[1][0]:
        assert drawn[1][0][name] == drawn[2][0][name], name
    assert drawn[1][1] == drawn[2][1]
    pages = len(re.findall(rb"/Type\s*/Page\b(?!s)", drawn[1][1]))
    assert pages == len(drawn[1][0]) + 1  # a cover page, then one page per figure


def test_long_unit_tables_show_their_head_and_point_to_the_csv(month, monkeypatch):
    # A continent's month has tens of thousands of candidates: the page prints the first
    # PAGE_ROWS of the risk and priority tables (ranked) and says the rest are in the CSV.
    from marchland.pack import _briefing as briefing
    from marchland.pack import _sections as sections

    result, _ = month
    n_risk, n_prio = len(result.risk), len(result.priorities)
    assert n_risk > 1 and n_prio > 1
    monkeypatch.setattr(sections, "PAGE_ROWS", 1)
    monkeypatch.setattr(briefing, "PAGE_ROWS", 1)
    html = sections._risk_section(result, {})
    assert f"First 1 of {n_risk:,} rows; all are in the CSV." in html
    ranked = result.risk.sort_values("rank").index
    assert f">{ranked[0]}<" in html and f">{ranked[1]}<" not in html
    assert f"First 1 of {n_prio:,} rows; all are in the CSV." in briefing.priority_block(result)


def test_the_provinces_table_shows_the_highest_rates_and_points_to_the_csv(month, monkeypatch):
    # At 50,000 units the provinces' table was 2,500 rows (0.52 MB of the page).
    from marchland.pack import _sections as sections

    result, _ = month
    a = result.rates_by_area
    prov = a[(a["level"] == "province") & (a["window"] == "month")]
    assert len(prov) > 1
    monkeypatch.setattr(sections, "PAGE_ROWS", 1)
    html = sections._rates_section(result, {})
    assert f"First 1 of {len(prov):,} rows; all are in the CSV." in html
    ranked = prov.sort_values("rate", ascending=False)["group"]
    assert f">{ranked.iloc[0]}<" in html and f">{ranked.iloc[1]}<" not in html
