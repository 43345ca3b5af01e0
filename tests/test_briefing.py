"""The briefing layer: priority list columns and flags, report prose, map labels, atlas pages.

Covered: expected cases and need rank follow from the priority table; the out-of-reach flag
marks exactly the uncovered districts among the largest needs; item headers carry their unit
from the items file; every analysis section has its "How to read this" and the report a
glossary and a month definition; map labels never overlap each other (forced collisions
included); every atlas page has one paper size, switchable by config; the CLI help shows no
literal ``\\b`` and a terminal run says at once that it started. Invented data only (the small
grid world of ``month_world``).
"""

from __future__ import annotations

import dataclasses
import re

import geopandas as gpd
import pandas as pd
import pytest
from click.testing import CliRunner
from month_world import fake_region, write_world
from shapely.geometry import box

from marchland import cli
from marchland.figures.labels import label_units
from marchland.figures.maps import MapNotes, attack_rate_map, base_map
from marchland.pack import _briefing, bundle, monthly


@pytest.fixture(scope="module")
def month(tmp_path_factory):
    root = tmp_path_factory.mktemp("world")
    cfg = write_world(root)
    with pytest.MonkeyPatch.context() as mp:
        mp.setattr(monthly, "_open_region", fake_region)
        result = monthly.run_month(cfg, "2026-10")
    return result, bundle.write_month(result, root / "out")


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
