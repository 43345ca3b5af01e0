"""Mechanics that keep a continent-sized month quick: shared map Paths, coverage simplification,
the province-panel cap, GeoParquet boundaries in, and the command line's progress bar.

Covered: the Paths built once per base map hold the same rings as shapely's coordinates
(polygons, holes, multipolygons, a mix); simplifying a country as one coverage keeps its units
edge to edge (no gap, no overlap; simplifying unit by unit does open gaps, so the check can
fail); thousands of small districts get no "island" dot each; a GeoParquet boundary file reads
the same as its GeoPackage; the province cap keeps the provinces with most cases.
"""

from __future__ import annotations

import io

import geopandas as gpd
import numpy as np
import pandas as pd
import pytest
import shapely
from shapely.geometry import MultiPolygon, Polygon, box

from marchland.figures import maps
from marchland.figures._mapkit import _unit_paths


def _wiggly_grid(n: int, size: float = 10_000.0, seed: int = 3) -> gpd.GeoDataFrame:
    """An n x n grid whose inner vertices are jittered: shared edges that are not straight."""
    rng = np.random.default_rng(seed)
    k = 8  # points per cell side
    xs = np.linspace(0, n * size, n * k + 1)
    gx, gy = np.meshgrid(xs, xs, indexing="ij")
    jx = rng.uniform(-0.3, 0.3, gx.shape) * size / k
    jy = rng.uniform(-0.3, 0.3, gy.shape) * size / k
    inner = (gx > 0) & (gx < xs[-1]) & (gy > 0) & (gy < xs[-1])
    gx, gy = gx + np.where(inner, jx, 0), gy + np.where(inner, jy, 0)
    polys = []
    for i in range(n):
        for j in range(n):
            a, b = i * k, j * k
            ring = (
                [(gx[a + t, b], gy[a + t, b]) for t in range(k)]
                + [(gx[a + k, b + t], gy[a + k, b + t]) for t in range(k)]
                + [(gx[a + k - t, b + k], gy[a + k - t, b + k]) for t in range(k)]
                + [(gx[a, b + k - t], gy[a, b + k - t]) for t in range(k)]
            )
            # Start each ring mid-edge, as real boundary files do: simplifying a ring anchors
            # on its first vertex, so neighbours simplify their shared edge differently.
            r = int(rng.integers(1, 4 * k))
            polys.append(Polygon(ring[r:] + ring[:r]))
    ids = [f"u{i:03d}" for i in range(n * n)]
    return gpd.GeoDataFrame({"country": "AAA"}, index=ids, geometry=polys, crs="EPSG:3035")


@pytest.mark.parametrize(
    "geoms",
    [
        [box(0, 0, 1, 1), box(2, 0, 3, 1)],
        [box(0, 0, 10, 10).difference(box(2, 2, 4, 4)), box(20, 0, 21, 1)],
        [MultiPolygon([box(0, 0, 1, 1), box(5, 5, 6, 6).difference(box(5.2, 5.2, 5.4, 5.4))])],
        [box(0, 0, 1, 1), MultiPolygon([box(3, 0, 4, 1), box(6, 0, 7, 1)]), box(9, 9, 10, 10)],
    ],
)
def test_unit_paths_hold_every_ring_of_each_unit(geoms):
    s = gpd.GeoSeries(geoms)
    paths = _unit_paths(s)
    assert len(paths) == len(geoms)
    for geom, path in zip(geoms, paths, strict=True):
        # Same vertices as shapely's, ring by ring (orientation aside), one MOVETO per ring.
        rings = shapely.get_rings(shapely.get_parts(geom))
        assert (path.codes == path.MOVETO).sum() == len(rings)
        got = sorted(map(tuple, np.round(path.vertices, 9).tolist()))
        want = sorted(map(tuple, np.round(shapely.get_coordinates(rings), 9).tolist()))
        assert got == want


def test_a_hole_is_drawn_open():
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    from marchland.figures._mapkit import _UnitPolygons

    g = box(0, 0, 10, 10).difference(box(2, 2, 6, 6))
    fig = Figure(figsize=(1, 1), dpi=100)
    canvas = FigureCanvasAgg(fig)
    ax = fig.add_axes((0, 0, 1, 1))
    ax.set_xlim(0, 10)
    ax.set_ylim(0, 10)
    ax.axis("off")
    paths = _unit_paths(gpd.GeoSeries([g]))
    ax.add_collection(_UnitPolygons(paths, facecolors=["#000000"], linewidths=0), autolim=False)
    canvas.draw()
    px = np.asarray(canvas.buffer_rgba())
    assert tuple(px[60, 40, :3]) == (255, 255, 255), "inside the hole (4, 4): background"
    assert tuple(px[90, 10, :3]) == (0, 0, 0), "inside the polygon (1, 1): filled"


def test_a_country_simplified_as_one_coverage_stays_edge_to_edge():
    units = _wiggly_grid(6)
    tol = 400.0
    simple = maps.base_map(units, simplify_m=tol).units.geometry
    assert int(shapely.get_num_coordinates(simple.to_numpy()).sum()) < int(
        shapely.get_num_coordinates(units.geometry.to_numpy()).sum()
    ), "the simplification did simplify"
    whole = shapely.union_all(simple.to_numpy())
    # No gap (one polygon, no hole) and no overlap (areas add up).
    assert whole.geom_type == "Polygon" and len(whole.interiors) == 0
    assert simple.area.sum() == pytest.approx(whole.area, rel=1e-9)
    assert shapely.coverage_is_valid(simple.to_numpy())
    # Unit by unit, the same tolerance opens gaps and overlaps: the checks above can fail.
    alone = units.geometry.simplify(tol, preserve_topology=True)
    assert not shapely.coverage_is_valid(alone.to_numpy())
    apart = shapely.union_all(alone.to_numpy())
    assert apart.geom_type != "Polygon" or len(apart.interiors) > 0


def test_thousands_of_small_districts_get_no_island_dot_each():
    units = _wiggly_grid(40)  # 1,600 units, each 1/40 of the side (< 1/50 only by the rule)
    lone = gpd.GeoDataFrame(
        {"country": ["AAA"]},
        index=["isle"],
        geometry=[box(-30_000, 0, -29_500, 500)],
        crs=units.crs,
    )
    base = maps.base_map(pd.concat([units, lone]))
    assert base.units["small"].sum() == 1 and bool(base.units.loc["isle", "small"])


def test_geoparquet_boundaries_read_like_the_geopackage(tmp_path):
    pytest.importorskip("pyarrow")
    from marchland.inputs.units import read_units

    src = _wiggly_grid(3).reset_index(names="code").assign(name=lambda d: d["code"].str.upper())
    src = src.drop(columns="country")
    src.to_file(tmp_path / "b.gpkg", driver="GPKG")
    src.to_parquet(tmp_path / "b.parquet")
    a = read_units(tmp_path / "b.gpkg", id="code", name="name", country="AAA")
    b = read_units(tmp_path / "b.parquet", id="code", name="name", country="AAA")
    pd.testing.assert_frame_equal(
        a.drop(columns=["geometry", "source"]), b.drop(columns=["geometry", "source"])
    )
    assert a.geometry.geom_equals_exact(b.geometry, tolerance=1e-6).all()


def test_province_cap_keeps_the_provinces_with_most_cases():
    from marchland.pack._steps import busiest

    weeks = pd.date_range("2026-01-05", periods=3, freq="7D")
    per = {
        f"P{i:02d}": pd.DataFrame({"cases": [i, np.nan, 1.0], "deaths": 0.0}, index=weeks)
        for i in range(20)
    }
    assert busiest(sorted(per), per, "cases", 3) == ["P17", "P18", "P19"]
    assert busiest(["P01", "P02"], per, "cases", 3) == ["P01", "P02"]


def test_cli_progress_bar_counts_on_a_terminal_only():
    from rich.console import Console

    from marchland.cli import _StepDisplay

    out = io.StringIO()
    term = Console(file=out, force_terminal=True, width=100)
    with _StepDisplay(term) as steps:
        for i in range(1, 5):
            steps.count("maps and atlas pages", i, 4)
    assert "4/4" in out.getvalue() or "3/4" in out.getvalue()
    plain = io.StringIO()
    with _StepDisplay(Console(file=plain, force_terminal=False)) as steps:
        steps.count("maps and atlas pages", 1, 4)
    assert plain.getvalue() == ""


def test_province_fan_charts_made_only_for_the_provinces_drawn(grid_month, monkeypatch):
    """Choosing the drawn provinces from summed totals equals building every panel first."""
    from marchland.figures import maps
    from marchland.pack import _outlook, _steps

    result, _ = grid_month
    monkeypatch.setattr(_steps, "MAX_PROVINCE_PANELS", 1)  # the grid has 2 per country
    fc = result.forecast
    prov = _steps.province_of(result.units)
    every = _outlook._fan_series(result, prov, fc)  # a frame for every province, as before
    country_of = result.units.groupby(prov)["country"].first()
    notes = maps.MapNotes("2026-11-03", "test", "grid")
    made = {
        name: fn
        for name, fn, _ in _outlook.outlook_figures(result, notes, None)
        if name.startswith("epi_forecast_provinces_")
    }
    assert sorted(made) == ["epi_forecast_provinces_AAA", "epi_forecast_provinces_BBB"]
    for country in ("AAA", "BBB"):
        ids = sorted(p for p in every if country_of[p] == country)
        (want,) = _steps.busiest(ids, every, "filled")
        panels = made[f"epi_forecast_provinces_{country}"].__defaults__[0]
        (label,) = panels
        assert label.endswith(f"({want})")
        pd.testing.assert_frame_equal(panels[label], every[want])


def test_a_step_import_does_not_keep_the_steps_data_alive(tmp_path, monkeypatch):
    # A library that keeps an exception from its own import (pulp keeps its optional solvers'
    # import errors) keeps every frame that called the import, and their locals. Steps load
    # their modules through _load: the data of the step that loaded one must still be freed.
    import gc
    import sys
    import weakref

    from marchland.pack._steps import _load

    (tmp_path / "keeps_its_error.py").write_text(
        "try:\n    import a_module_that_is_not_there\nexcept ImportError as e:\n    err = e\n"
        "value = 1\n"
    )
    monkeypatch.syspath_prepend(str(tmp_path))
    monkeypatch.delitem(sys.modules, "keeps_its_error", raising=False)

    class Data:  # stands for a step's inputs
        pass

    def step() -> weakref.ref:
        data = Data()
        mod, missing = _load("keeps_its_error", ("value", "absent_name"))
        assert mod.value == 1 and missing == ["absent_name"]
        return weakref.ref(data)

    ref = step()
    gc.collect()
    assert ref() is None
    assert sys.modules["keeps_its_error"].err.__traceback__ is not None  # the trap was set
    # An import error reaches the caller.
    with pytest.raises(ModuleNotFoundError):
        _load("no_such_module_here", ())
