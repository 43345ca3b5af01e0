"""Maps and epi curves: the furniture every map must carry, one shared class scheme, gaps.

Covered: every map function draws country borders heavier than district borders, a legend
that names its units, a scale bar, a north arrow, the as-of date, the source and the caution
line; the class breaks agree with mapclassify's Fisher-Jenks (an outside implementation);
small multiples share one scheme; a reported zero and a missing report look different; epi
curves shade the reporting-delay weeks and leave unreported weeks as gaps; ``maps`` imports no
analysis module.
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
from matplotlib.collections import PatchCollection
from month_world import grid_units
from shapely.geometry import Point

from marchland import maps

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
    span = [p for p in ax.patches if p.get_label().startswith("last 2 weeks")]
    assert len(span) == 1
    x0, x1 = span[0].get_x(), span[0].get_x() + span[0].get_width()
    # On Tuesday 27 October the week of the 26th is not over: the last two whole weeks are
    # those starting 12 and 19 October.
    assert pd.to_datetime(x0, unit="D") == pd.Timestamp("2026-10-12")
    assert pd.to_datetime(x1, unit="D") == pd.Timestamp("2026-10-26")
    line = fig.axes[1].lines[0]
    assert np.isnan(np.asarray(line.get_ydata(), dtype=float)).sum() == 1
    assert maps.CAUTION_LINE in _texts(fig)


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
        "import sys, marchland.maps; "
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
