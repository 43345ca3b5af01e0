"""Maps and epi curves: the furniture every map must carry, one shared class scheme, gaps.

Covered: every map function draws country borders heavier than district borders, a legend
that names its units, a scale bar, a north arrow, the as-of date, the source and the caution
line; the class breaks agree with mapclassify's Fisher-Jenks (an outside implementation);
small multiples share one scheme; a reported zero and a missing report look different; epi
curves shade exactly the last ``delay_weeks`` complete weeks up to the as-of date (as-of on a
Tuesday, a Sunday, a Monday) and leave unreported weeks as gaps; every country is named once,
inside itself and clear of the legend; background, holes and islands, "not tested" units and the
scale bar stay readable; ``maps`` imports no analysis module.
"""

from __future__ import annotations

import subprocess
import sys
import warnings

import geopandas as gpd
import mapclassify
import matplotlib.colors as mcolors
import numpy as np
import pandas as pd
import pytest
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.collections import PatchCollection, PathCollection
from month_world import grid_units
from shapely.geometry import Point, Polygon, box

from marchland.figures import maps

NOTES = maps.MapNotes("2026-11-03", "Source: invented test reports.", "Grid world")


@pytest.fixture(scope="module")
def base():
    return maps.base_map(grid_units())


@pytest.fixture(scope="module")
def units():
    return grid_units()


def _texts(fig):
    out = [t.get_text() for t in fig.texts]
    for ax in fig.axes:
        out += [t.get_text() for t in ax.texts]
    for leg in fig.legends:
        out += [t.get_text() for t in leg.texts] + [leg.get_title().get_text()]
    return out


def _all_maps(base, units):
    rng = np.random.default_rng(0)
    rate = pd.Series(rng.gamma(1.0, 20.0, len(units)), index=units.index)
    hist = pd.DataFrame({f"M{i}": rate * (i + 1) / 3 for i in range(6)})
    labels = pd.Series("Not significant", index=units.index)
    labels.iloc[:5] = "High-High"
    colours = {"High-High": "#4a1c6e", "Not significant": "#d9d9d6"}
    arrival = pd.Series(
        pd.Timestamp("2026-03-02") + pd.to_timedelta(np.arange(len(units)) * 7, "D"),
        index=units.index,
    )
    prob = pd.Series(np.linspace(0.01, 0.6, 10), index=units.index[-10:])
    depots = gpd.GeoDataFrame(
        {"name": ["Store"]}, geometry=[Point(units.union_all().centroid)], crs=units.crs
    )
    return {
        "rate": maps.attack_rate_map(base, rate, NOTES, period="October 2026"),
        "multiples": maps.rate_small_multiples(base, hist, NOTES),
        "clusters": maps.cluster_map(base, labels, colours, NOTES),
        "arrival": maps.arrival_map(base, arrival, NOTES),
        "risk": maps.risk_map(base, prob, units.index[:20], NOTES, silent=units.index[-1:]),
        "priorities": maps.priority_map(
            base,
            pd.Series(range(1, 11), index=units.index[-10:]),
            NOTES,
            depots=depots,
            reach_km=40,
        ),
    }


@pytest.fixture(scope="module")
def every_map(base, units):
    return _all_maps(base, units)


@pytest.mark.parametrize("name", ["rate", "multiples", "clusters", "arrival", "risk", "priorities"])
def test_every_map_has_its_furniture(every_map, name):
    fig = every_map[name]
    texts = _texts(fig)
    joined = " ".join(texts)
    assert "N" in texts, "north arrow label"
    assert any(t.endswith(" km") for t in texts), "scale bar with its unit"
    assert "2026-11-03" in joined and "invented test reports" in joined
    assert maps.CAUTION_LINE in texts
    assert "not a diagnosis" in maps.CAUTION_LINE and "field epidemiologists" in maps.CAUTION_LINE
    assert fig.legends, "a legend"
    title = fig.legends[0].get_title().get_text()
    assert any(
        unit in title
        for unit in ("per 100,000", "Probability", "rank", "number of", "week of first case")
    ), title


@pytest.mark.parametrize("name", ["rate", "clusters", "arrival", "risk", "priorities"])
def test_country_borders_heavier_than_district_borders(every_map, name):
    ax = every_map[name].axes[0]
    widths = [np.max(c.get_linewidths()) for c in ax.collections if len(c.get_linewidths())]
    district = [
        w for c, w in zip(ax.collections, widths, strict=True) if isinstance(c, PatchCollection)
    ]
    assert max(widths) == pytest.approx(maps.COUNTRY_EDGE["linewidth"])
    assert maps.COUNTRY_EDGE["linewidth"] > 3 * maps.DISTRICT_EDGE["linewidth"]
    assert min(district) == pytest.approx(maps.DISTRICT_EDGE["linewidth"])


def test_rate_classes_match_mapclassify_fisher_jenks():
    # Outside implementation: mapclassify's exact Fisher-Jenks on the same positive values.
    x = np.random.default_rng(5).lognormal(2, 1, 200)
    ours = maps.rate_classes(np.concatenate([x, [0, 0, np.nan]]), k=5)
    with warnings.catch_warnings():
        warnings.filterwarnings("ignore", message="Numba not installed")
        ref = mapclassify.FisherJenks(x, k=5).bins
    np.testing.assert_allclose(ours, ref)


@pytest.mark.parametrize(
    ("dataset", "column"),
    [("columbus", "CRIME"), ("sids2", "SIDR79"), ("baltim", "PRICE"), ("sids2", "NWR74")],
)
@pytest.mark.parametrize("k", [3, 5, 7])
def test_natural_breaks_equal_mapclassify_on_libpysal_data(dataset, column, k):
    # Outside implementation and open data: mapclassify.FisherJenks on columns of datasets
    # libpysal ships (columbus crime, North Carolina SIDS rates, Baltimore house prices); the
    # rounded copy has many ties, where both keep the longest last class.
    from libpysal import examples

    from marchland.figures._mapclass import natural_breaks

    col = gpd.read_file(examples.get_path(f"{dataset}.shp"))[column].to_numpy(dtype=float)
    for x in (np.sort(col), np.sort(col.round(0))):
        ours = natural_breaks(x, k)
        ref = mapclassify.FisherJenks(x, k=k).bins
        np.testing.assert_allclose(ours, ref, rtol=1e-12)


def test_rate_classes_thinned_are_deterministic_and_span_the_data():
    x = np.random.default_rng(6).lognormal(2, 1.5, 3000)
    a, b = maps.rate_classes(x), maps.rate_classes(x[::-1])
    np.testing.assert_array_equal(a, b)
    assert np.all(np.diff(a) > 0) and a[-1] == x.max() and a[0] > x.min()


def test_few_distinct_values_give_one_class_each():
    assert maps.rate_classes([0, 5, 5, 9]).tolist() == [5.0, 9.0]
    assert maps.rate_classes([0, np.nan]).size == 0


def _facecolours(ax):
    coll = next(c for c in ax.collections if isinstance(c, PatchCollection))
    return [mcolors.to_hex(c) for c in coll.get_facecolors()]


def test_small_multiples_share_one_scheme(base, units):
    rates = pd.DataFrame(
        {"A": np.linspace(1, 100, len(units)), "B": np.linspace(1, 100, len(units))[::-1]},
        index=units.index,
    )
    fig = maps.rate_small_multiples(base, rates, NOTES)
    a, b = (_facecolours(ax) for ax in fig.axes[:2])
    # The same value gets the same colour in both panels (B is A reversed).
    assert a == b[::-1]
    # And a panel alone would have been classed the same way (pooled == per panel here).
    assert len(set(a)) == 5


def test_zero_and_missing_are_drawn_differently(base, units):
    rate = pd.Series(10.0, index=units.index)
    rate.iloc[0] = 0.0
    rate.iloc[1] = np.nan
    fig = maps.attack_rate_map(base, rate, NOTES)
    cols = _facecolours(fig.axes[0])
    assert cols[0] == maps.ZERO_COLOUR
    assert cols[1] == maps.NO_REPORT_COLOUR
    labels = [t.get_text() for t in fig.legends[0].texts]
    assert "0 (reported zero)" in labels and "no report in the period" in labels
    hatched = [
        c for c in fig.axes[0].collections if isinstance(c, PatchCollection) and c.get_hatch()
    ]
    assert len(hatched) == 1 and len(hatched[0].get_paths()) == 1


def test_cluster_map_refuses_a_label_without_colour(base, units):
    with pytest.raises(ValueError, match="missing"):
        maps.cluster_map(base, pd.Series("Odd", index=units.index), {"High-High": "#000"}, NOTES)


def test_epi_curve_shades_delay_and_keeps_gaps():
    weeks = pd.date_range("2026-08-03", periods=12, freq="7D")  # Mondays to 2026-10-19
    df = pd.DataFrame({"cases": np.arange(1.0, 13.0), "deaths": np.ones(12)}, index=weeks)
    df = df.drop(weeks[5])  # a week nobody reported
    fig = maps.epi_curves(
        {"Area": df}, NOTES, as_of="2026-10-27", delay_weeks=2, title="Weekly cases"
    )
    ax = fig.axes[0]
    bars = next(c for c in ax.collections if c.get_label() == "cases (bars)")
    lefts = pd.to_datetime([p.vertices[0, 0] for p in bars.get_paths()], unit="D")
    assert weeks[5] not in lefts and weeks[6] in lefts and len(lefts) == 11
    span = [p for p in ax.patches if p.get_label().startswith("last 2 complete weeks")]
    assert len(span) == 1
    x0, x1 = span[0].get_x(), span[0].get_x() + span[0].get_width()
    # On Tuesday 27 October the week of the 26th is not over: the last two whole weeks are
    # those starting 12 and 19 October.
    assert pd.to_datetime(x0, unit="D") == pd.Timestamp("2026-10-12")
    assert pd.to_datetime(x1, unit="D") == pd.Timestamp("2026-10-26")
    # Deaths share the cases' axis (no second scale to make them look larger than cases).
    assert len(fig.axes) == 1
    line = next(ln for ln in ax.lines if ln.get_label().startswith("deaths"))
    assert np.isnan(np.asarray(line.get_ydata(), dtype=float)).sum() == 1
    assert maps.CAUTION_LINE in _texts(fig)


def _delay_span(ax):
    span = [p for p in ax.patches if "complete weeks" in p.get_label()]
    assert len(span) == 1
    x0 = span[0].get_x()
    return (
        pd.to_datetime(x0, unit="D"),
        pd.to_datetime(x0 + span[0].get_width(), unit="D"),
    )


@pytest.mark.parametrize(
    ("as_of", "first_shaded"),
    [
        # The demo's case: as of Tuesday 3 November, weeks (Mondays) reported up to 26 October.
        # Complete weeks up to the as-of date end on Sunday 1 November: 19 and 26 October.
        ("2026-11-03", "2026-10-19"),
        ("2026-11-01", "2026-10-19"),  # a Sunday: the week of 26 October just ended
        ("2026-11-02", "2026-10-19"),  # a Monday: the new week has only begun
        ("2026-10-31", "2026-10-12"),  # a Saturday: the week of 26 October is still open
    ],
)
def test_epi_delay_zone_is_the_last_complete_weeks(as_of, first_shaded):
    weeks = pd.date_range("2026-08-03", "2026-10-26", freq="7D")
    df = pd.DataFrame({"cases": 10.0, "deaths": 1.0}, index=weeks)
    fig = maps.epi_curves({"Area": df}, NOTES, as_of=as_of, delay_weeks=2, title="t")
    ax = fig.axes[0]
    x0, x1 = _delay_span(ax)
    first = pd.Timestamp(first_shaded)
    assert (x0, x1) == (first, first + pd.Timedelta(days=14)), "two whole weeks, no more"
    assert x1 <= pd.Timestamp(as_of) + pd.Timedelta(days=1), "no shaded day after the as-of date"
    # What the legend promises is what is shaded: the bars of those weeks are drawn paler.
    assert any(t.get_text() == "last 2 complete weeks: reporting incomplete" for t in _legend(fig))
    bars = next(c for c in ax.collections if c.get_label() == "cases (bars)")
    lefts = pd.to_datetime([p.vertices[0, 0] for p in bars.get_paths()], unit="D")
    pale = [mcolors.to_hex(c) != mcolors.to_hex(maps.CASE_BAR) for c in bars.get_facecolors()]
    assert list(lefts[np.array(pale)]) == [w for w in weeks if w >= first]
    assert sum(pale) == (2 if first_shaded == "2026-10-19" else 3)  # an open week is paler too
    as_of_line = [ln for ln in ax.lines if ln.get_label().startswith("as-of date")]
    assert len(as_of_line) == 1
    assert pd.to_datetime(as_of_line[0].get_xdata()[0], unit="D") == pd.Timestamp(
        as_of
    ) + pd.Timedelta(days=1)


def _legend(fig):
    return [t for leg in fig.legends for t in leg.texts]


def test_epi_panels_share_one_time_axis():
    a = pd.DataFrame(
        {"cases": [1.0, 2.0], "deaths": [0.0, 0.0]},
        index=pd.to_datetime(["2026-01-05", "2026-01-12"]),
    )
    b = pd.DataFrame({"cases": [3.0], "deaths": [0.0]}, index=pd.to_datetime(["2026-06-01"]))
    fig = maps.epi_curves({"A": a, "B": b}, NOTES, as_of="2026-06-10", delay_weeks=1, title="t")
    panels = [ax for ax in fig.axes if ax.get_title(loc="left") in ("A", "B")]
    assert len(panels) == 2 and panels[0].get_xlim() == panels[1].get_xlim()


def test_save_figure_writes_png_at_200_dpi(tmp_path, every_map):
    from matplotlib.backends.backend_pdf import PdfPages
    from PIL import Image

    with PdfPages(tmp_path / "a.pdf") as pdf:
        maps.save_figure(every_map["rate"], tmp_path / "r.png", pdf=pdf)
        assert pdf.get_pagecount() == 1
    with Image.open(tmp_path / "r.png") as im:
        assert im.size == (round(maps._MAP_SIZE[0] * 200), round(maps._MAP_SIZE[1] * 200))
        assert round(im.info["dpi"][0]) == 200


def test_maps_imports_no_analysis_module():
    code = (
        "import sys, marchland.figures.maps; "
        "bad = [m for m in ('rates', 'hotspots', 'spread', 'risk', 'supplies', 'region', "
        "'reports', 'units', 'graph') if 'marchland.' + m in sys.modules]; print(bad)"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "[]"


def test_input_text_is_drawn_literally_never_as_mathtext(base, units, tmp_path):
    # "$...$" would be parsed as mathtext (and "$\frac$" would fail to draw).
    notes = maps.MapNotes("2026-11-03", "Source: files $\\frac$.", "Cash $\\frac$ region")
    depots = gpd.GeoDataFrame(
        {"name": ["Store $\\frac$"]}, geometry=[Point(units.union_all().centroid)], crs=units.crs
    )
    fig = maps.priority_map(base, pd.Series({units.index[0]: 1}), notes, depots=depots, reach_km=30)
    maps.save_figure(fig, tmp_path / "p.png")
    weeks = pd.date_range("2026-08-03", periods=3, freq="7D")
    epi = maps.epi_curves(
        {"Prov $\\frac$": pd.DataFrame({"cases": [1, 2, 3], "deaths": 0}, index=weeks)},
        notes,
        as_of="2026-08-25",
        delay_weeks=1,
        title="t",
    )
    maps.save_figure(epi, tmp_path / "e.png")
    assert "Store $\\frac$" in _texts(fig)


def _country_texts(ax):
    return [t for t in ax.texts if t.get_gid() == "country-label"]


@pytest.mark.parametrize("name", ["rate", "clusters", "arrival", "risk", "priorities"])
def test_every_country_is_named_once_inside_itself_and_clear_of_the_legend(every_map, base, name):
    fig = every_map[name]
    ax = fig.axes[0]
    labels = _country_texts(ax)
    assert sorted(t.get_text() for t in labels) == sorted(base.countries.index)
    for t in labels:
        x, y = t.get_position()
        assert base.countries.loc[t.get_text(), "geometry"].contains(Point(x, y))
        assert t.get_path_effects(), "a halo keeps the name readable over dark fills"
    renderer = FigureCanvasAgg(fig).get_renderer()
    legend_box = fig.legends[0].get_window_extent(renderer)
    ax_box = ax.get_window_extent(renderer)
    for t in labels:
        box_ = t.get_window_extent(renderer)
        assert not box_.overlaps(legend_box)
        assert ax_box.contains(box_.x0, box_.y0) and ax_box.contains(box_.x1, box_.y1)


def test_small_multiples_name_the_countries_in_every_panel(every_map, base):
    panels = every_map["multiples"].axes
    assert len(panels) == 6
    for ax in panels:
        assert sorted(t.get_text() for t in _country_texts(ax)) == sorted(base.countries.index)


def test_country_names_replace_codes_where_given(units):
    code = sorted(units["country"].unique())[0]
    bm = maps.base_map(units, country_names={code: "Named Land"})
    fig = maps.attack_rate_map(bm, pd.Series(1.0, index=units.index), NOTES)
    texts = sorted(t.get_text() for t in _country_texts(fig.axes[0]))
    others = sorted(set(units["country"]) - {code})
    assert texts == sorted(["Named Land", *others])


@pytest.fixture(scope="module")
def lake_world():
    # A country with a lake (a hole) and a small island district in it, next to another country.
    outer = box(0, 0, 200_000, 200_000)
    lake = box(80_000, 80_000, 120_000, 120_000)
    island = box(97_000, 97_000, 101_000, 101_000)
    units = gpd.GeoDataFrame(
        {"country": ["AAA", "AAA", "BBB"]},
        index=["land", "isle", "east"],
        geometry=[
            Polygon(outer.exterior.coords, [lake.exterior.coords]),
            island,
            box(200_000, 0, 400_000, 200_000),
        ],
        crs="EPSG:3035",
    )
    return maps.base_map(units)


def test_background_and_holes_differ_from_every_pale_fill(lake_world):
    fig = maps.attack_rate_map(lake_world, pd.Series({"land": 5.0, "isle": 0.0}), NOTES)
    ax = fig.axes[0]
    bg = mcolors.to_hex(ax.get_facecolor())
    assert bg == maps.OUTSIDE_COLOUR
    for pale in (maps.ZERO_COLOUR, maps.NO_REPORT_COLOUR, maps.OTHER_COLOUR, "#ffffff"):
        assert bg != mcolors.to_hex(pale)
    assert "outside the analysis units" in [t.get_text() for t in _legend(fig)]


def test_an_island_too_small_to_see_gets_a_dot_in_its_own_fill(lake_world):
    rate = pd.Series({"land": 5.0, "isle": 0.0, "east": np.nan})
    fig = maps.attack_rate_map(lake_world, rate, NOTES)
    dots = [c for c in fig.axes[0].collections if isinstance(c, PathCollection)]
    assert len(dots) == 1
    ((x, y),) = dots[0].get_offsets()
    assert lake_world.units.loc["isle", "geometry"].contains(Point(x, y))
    assert [mcolors.to_hex(c) for c in dots[0].get_facecolors()] == [maps.ZERO_COLOUR]
    assert dots[0].get_zorder() > 5, "drawn over the country border that would hide it"
    # Missing is not zero: the unreported country is hatched, the island (a zero) is not.
    hatched = [
        c for c in fig.axes[0].collections if isinstance(c, PatchCollection) and c.get_hatch()
    ]
    assert len(hatched) == 1 and len(hatched[0].get_paths()) == 1
    labels = [t.get_text() for t in _legend(fig)]
    assert "0 (reported zero)" in labels and "no report in the period" in labels


def test_untested_units_are_patterned_in_map_and_legend(lake_world):
    labels = pd.Series({"land": "flat", "isle": "untested", "east": "flat"})
    colours = {"flat": "#d9d9d6", "untested": "#ffffff"}
    fig = maps.cluster_map(lake_world, labels, colours, NOTES, untested=["untested"])
    ax = fig.axes[0]
    hatched = [c for c in ax.collections if isinstance(c, PatchCollection) and c.get_hatch()]
    assert len(hatched) == 1 and hatched[0].get_hatch() == maps.NOT_TESTED_HATCH
    assert len(hatched[0].get_paths()) == 1
    leg = fig.legends[0]
    entry = next(
        h for h, t in zip(leg.legend_handles, leg.texts, strict=False) if "untested" in t.get_text()
    )
    assert entry.get_hatch() == maps.NOT_TESTED_HATCH
    plain = maps.cluster_map(lake_world, labels, colours, NOTES)
    assert not [c for c in plain.axes[0].collections if getattr(c, "get_hatch", lambda: None)()]


@pytest.mark.parametrize("name", ["rate", "multiples"])
def test_scale_bar_sits_on_a_white_box_that_holds_its_labels(every_map, name):
    fig = every_map[name]
    ax = fig.axes[0]
    renderer = FigureCanvasAgg(fig).get_renderer()
    km = next(t for t in ax.texts if t.get_text().endswith(" km"))
    boxes = [
        p
        for p in ax.patches
        if mcolors.to_hex(p.get_facecolor()) == "#ffffff" and p.get_zorder() < km.get_zorder()
    ]
    backing = max(boxes, key=lambda p: p.get_width())
    assert backing.get_alpha() >= 0.9
    assert backing.get_zorder() > 5, "above the fills and the country borders"
    outer = backing.get_window_extent(renderer)
    for t in ax.texts:
        if t.get_gid() == "country-label" or t.get_text() == "N":
            continue
        inner = t.get_window_extent(renderer)
        assert outer.x0 <= inner.x0 and inner.x1 <= outer.x1, t.get_text()
        assert outer.y0 <= inner.y0 and inner.y1 <= outer.y1, t.get_text()


def test_a_country_name_keeps_off_the_scale_bar_where_the_country_allows():
    # Country AAA is a strip along the bottom whose point-on-surface (its middle) would sit
    # under the scale bar; BBB is everything above and to the right of it.
    units = gpd.GeoDataFrame(
        {"country": ["AAA", "BBB"]},
        index=["a", "b"],
        geometry=[
            box(0, 0, 250_000, 40_000),
            box(0, 40_000, 500_000, 400_000).union(box(250_000, 0, 500_000, 40_000)),
        ],
        crs="EPSG:3035",
    )
    bm = maps.base_map(units)
    fig = maps.attack_rate_map(bm, pd.Series({"a": 1.0, "b": 2.0}), NOTES)
    ax = fig.axes[0]
    renderer = FigureCanvasAgg(fig).get_renderer()
    backing = max(
        (p for p in ax.patches if mcolors.to_hex(p.get_facecolor()) == "#ffffff"),
        key=lambda p: p.get_width(),
    ).get_window_extent(renderer)
    for t in _country_texts(ax):
        x, y = t.get_position()
        assert bm.countries.loc[t.get_text(), "geometry"].contains(Point(x, y))
        assert not t.get_window_extent(renderer).overlaps(backing), t.get_text()
