"""Zonal population sums and table joins.

Covered: rasters built so the exact answer is known (constant density over a many-sided
polygon, a gradient over a box cutting cells in half), nodata cells, units partly and wholly
outside the raster, a raster in another CRS than the units, a raster without a CRS, the table
join and its errors, and the zero-population check for units with cases. Zonal means: a
two-value raster split along a unit boundary, nodata left out, cells of a longitude-latitude
grid weighted by their area on the sphere, the same cover warnings and errors. Covariate
tables: analysis-unit rows as given, district rows averaged to their province by population,
and every kind of bad row named by file, row and column.
"""

from __future__ import annotations

from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import pytest
import rasterio
import shapely
from affine import Affine

from marchland.errors import DataWarning, InputError
from marchland.inputs.population import (
    covariate_from_table,
    population_from_table,
    require_population,
    zonal_mean,
    zonal_population,
)

CELL = 100.0  # metres


def make_raster(
    path: Path, values: np.ndarray, *, crs="EPSG:3035", nodata=-1.0, x0=0.0, y0=None
) -> Path:
    rows, cols = values.shape
    y0 = rows * CELL if y0 is None else y0
    with rasterio.open(
        path,
        "w",
        driver="GTiff",
        width=cols,
        height=rows,
        count=1,
        dtype="float64",
        crs=crs,
        nodata=nodata,
        transform=Affine(CELL, 0, x0, 0, -CELL, y0),
    ) as dst:
        dst.write(values[None, :, :].astype("float64"))
    return path


def units_of(*geoms, crs="EPSG:3035") -> gpd.GeoDataFrame:
    ids = pd.Index([f"u{i}" for i in range(len(geoms))], name="unit_id")
    return gpd.GeoDataFrame(geometry=list(geoms), index=ids, crs=crs)


def test_constant_density_polygon_exact(tmp_path: Path) -> None:
    # 7 people per cell everywhere: the sum is 7 * (polygon area / cell area), exactly.
    path = make_raster(tmp_path / "c.tif", np.full((20, 20), 7.0))
    circle = shapely.Point(1000, 1000).buffer(730, quad_segs=64)
    tri = shapely.Polygon([(130, 170), (1830, 250), (700, 1900)])
    pop = zonal_population(units_of(circle, tri), path)
    np.testing.assert_allclose(
        pop.to_numpy(), 7 * np.array([circle.area, tri.area]) / CELL**2, rtol=1e-9
    )
    np.testing.assert_allclose(pop.attrs["covered"].to_numpy(), 1.0, rtol=1e-9)


def test_gradient_half_cells_exact(tmp_path: Path) -> None:
    # Cell value = its column number (0..9). A box from x=150 to x=450 covers half of column
    # 1, all of columns 2 and 3, half of column 4, over 4 rows: 4 * (0.5*1 + 2 + 3 + 0.5*4).
    values = np.tile(np.arange(10, dtype=float), (6, 1))
    path = make_raster(tmp_path / "g.tif", values)
    pop = zonal_population(units_of(shapely.box(150, 100, 450, 500)), path)
    assert pop.iloc[0] == pytest.approx(4 * (0.5 + 2 + 3 + 2.0), rel=1e-12)


def test_nodata_and_partial_coverage(tmp_path: Path) -> None:
    values = np.full((10, 10), 2.0)
    values[:, :5] = -1.0  # the left half is nodata
    path = make_raster(tmp_path / "n.tif", values)
    u = units_of(shapely.box(0, 0, 1000, 1000), shapely.box(600, 0, 1000, 1000))
    with pytest.warns(DataWarning, match=r"u0 50\.0%"):
        pop = zonal_population(u, path)
    assert pop.tolist() == pytest.approx([2.0 * 50, 2.0 * 40])
    assert pop.attrs["covered"].tolist() == pytest.approx([0.5, 1.0])


def test_partly_and_wholly_outside(tmp_path: Path) -> None:
    path = make_raster(tmp_path / "o.tif", np.ones((10, 10)))
    with pytest.warns(DataWarning, match="partly covered"):
        pop = zonal_population(units_of(shapely.box(800, 0, 1200, 100)), path)
    assert pop.iloc[0] == pytest.approx(2.0)
    with pytest.raises(InputError, match="outside the raster") as info:
        zonal_population(
            units_of(shapely.box(0, 0, 100, 100), shapely.box(5000, 0, 5100, 90)), path
        )
    assert "u1" in str(info.value) and "u0" not in str(info.value)


def test_units_in_another_crs(tmp_path: Path) -> None:
    path = make_raster(tmp_path / "p.tif", np.full((10, 10), 3.0), x0=4_000_000, y0=3_001_000)
    box = units_of(shapely.box(4_000_200, 3_000_200, 4_000_700, 3_000_600))
    direct = zonal_population(box, path).iloc[0]
    moved = zonal_population(box.to_crs("EPSG:4326"), path).iloc[0]
    assert direct == pytest.approx(3.0 * 20)
    assert moved == pytest.approx(direct, rel=1e-6)


def test_raster_errors(tmp_path: Path) -> None:
    path = make_raster(tmp_path / "x.tif", np.ones((4, 4)), crs=None)
    with pytest.raises(InputError, match="no CRS"):
        zonal_population(units_of(shapely.box(0, 0, 100, 100)), path)
    (tmp_path / "junk.tif").write_text("nope")
    with pytest.raises(InputError, match="cannot read"):
        zonal_population(units_of(shapely.box(0, 0, 100, 100)), tmp_path / "junk.tif")


def test_table_join(tmp_path: Path) -> None:
    u = units_of(shapely.box(0, 0, 1, 1), shapely.box(1, 0, 2, 1))
    csv = tmp_path / "pop.csv"
    csv.write_text("unit_id,population\nu0,1500\nu1,20\n")
    assert population_from_table(u, csv).tolist() == [1500.0, 20.0]
    csv.write_text("unit_id,population\nu0,1500\nu9,20\n")
    with pytest.raises(InputError) as info:
        population_from_table(u, csv)
    assert info.value.row == 2 and info.value.column == "unit_id"
    csv.write_text("unit_id,population\nu0,-5\n")
    with pytest.raises(InputError, match=">= 0"):
        population_from_table(u, csv)
    csv.write_text("unit_id,population\nu0,5\nu0,6\n")
    with pytest.raises(InputError, match="twice"):
        population_from_table(u, csv)
    with pytest.raises(InputError, match="no column 'pop'"):
        population_from_table(u, csv, value_column="pop")


def test_require_population() -> None:
    counts = pd.DataFrame({"unit_id": ["a", "b", "c"], "cases": pd.array([3, 0, 1], "Int64")})
    require_population(pd.Series({"a": 10.0, "b": 0.0, "c": 4.0}), counts)
    with pytest.raises(InputError, match="c"):
        require_population(pd.Series({"a": 10.0, "b": 5.0, "c": np.nan}), counts)


def test_zonal_mean_two_values_split_at_a_boundary(tmp_path: Path) -> None:
    # Columns 0-1 hold 2, columns 2-3 hold 6 (cells 100 m). u0 = x 0..200 lies on the 2s only;
    # u1 = x 150..400 covers 50 m of a 2-column and 200 m of 6s, so its area-weighted mean is
    # (50 * 2 + 200 * 6) / 250 = 5.2; u2 = x 200..400 lies on the 6s only.
    values = np.tile(np.array([2.0, 2.0, 6.0, 6.0]), (2, 1))
    path = make_raster(tmp_path / "two.tif", values)
    u = units_of(
        shapely.box(0, 0, 200, 200), shapely.box(150, 0, 400, 200), shapely.box(200, 0, 400, 200)
    )
    m = zonal_mean(u, path, name="flood")
    assert m.name == "flood" and m.index.tolist() == ["u0", "u1", "u2"]
    assert m.tolist() == pytest.approx([2.0, 5.2, 6.0], rel=1e-12)
    np.testing.assert_allclose(m.attrs["covered"].to_numpy(), 1.0, rtol=1e-9)


def test_zonal_mean_leaves_nodata_out(tmp_path: Path) -> None:
    # The left half is nodata: the mean is over the valid right half only (values 4 and 8
    # in columns 5-9: two columns of 4 and three of 8 -> (2 * 4 + 3 * 8) / 5 = 6.4), and the
    # unit is flagged as half covered rather than averaged with zeros.
    values = np.full((10, 10), -1.0)
    values[:, 5:7] = 4.0
    values[:, 7:] = 8.0
    path = make_raster(tmp_path / "n.tif", values)
    with pytest.warns(DataWarning, match=r"u0 50\.0%"):
        m = zonal_mean(units_of(shapely.box(0, 0, 1000, 1000)), path)
    assert m.iloc[0] == pytest.approx(6.4, rel=1e-12)
    with pytest.raises(InputError, match="outside the raster"):
        zonal_mean(units_of(shapely.box(0, 0, 400, 400)), path)


def test_zonal_mean_weights_geographic_cells_by_area(tmp_path: Path) -> None:
    # Two 30-degree rows of a longitude-latitude grid: 1 on 30-60 N, 0 on 0-30 N. On a sphere
    # a band's area is proportional to sin(north) - sin(south), so a unit over both has the
    # mean (sin 60 - sin 30) / sin 60 = 0.4226..., not the cell-count mean 0.5.
    with rasterio.open(
        tmp_path / "ll.tif", "w", driver="GTiff", width=1, height=2, count=1, dtype="float64",
        crs="EPSG:4326", nodata=-1.0, transform=Affine(1.0, 0, 0, 0, -30.0, 60.0),
    ) as dst:  # fmt: skip
        dst.write(np.array([[[1.0], [0.0]]]))
    u = units_of(shapely.box(0, 0, 1, 60), crs="EPSG:4326")
    expected = (np.sin(np.radians(60)) - np.sin(np.radians(30))) / np.sin(np.radians(60))
    assert zonal_mean(u, tmp_path / "ll.tif").iloc[0] == pytest.approx(expected, rel=1e-6)


def test_zonal_mean_raster_errors(tmp_path: Path) -> None:
    path = make_raster(tmp_path / "x.tif", np.ones((4, 4)), crs=None)
    with pytest.raises(InputError, match="raster has no CRS"):
        zonal_mean(units_of(shapely.box(0, 0, 100, 100)), path)


def _two_level() -> tuple[pd.DataFrame, pd.DataFrame]:
    """Province P (analysed whole) with districts a, b; province Q analysed by district c, d."""
    units = pd.DataFrame(
        {
            "parent_id": [None, "P", "P", None, "Q", "Q"],
            "population": [4000.0, 1000.0, 3000.0, 900.0, 400.0, 500.0],
        },
        index=pd.Index(["P", "a", "b", "Q", "c", "d"], name="unit_id"),
    )
    return units, units.loc[["P", "c", "d"]]


def test_covariate_table_on_analysis_units(tmp_path: Path) -> None:
    units, analysis = _two_level()
    csv = tmp_path / "water.csv"
    # a (1,000 people, 0.2) and b (3,000, 0.6) average to P: (1000*0.2 + 3000*0.6) / 4000 = 0.5.
    csv.write_text("code,share\na,0.2\nb,0.6\nc,0.1\nd,0.9\n")
    s = covariate_from_table(units, analysis, csv, id_column="code", value_column="share", name="w")
    assert s.name == "w" and s.index.tolist() == ["P", "c", "d"]
    assert s.tolist() == pytest.approx([0.5, 0.1, 0.9], rel=1e-12)
    # The province's own row is used as given.
    csv.write_text("code,share\nP,0.3\nc,0.1\nd,0.9\n")
    assert covariate_from_table(
        units, analysis, csv, id_column="code", value_column="share"
    ).tolist() == pytest.approx([0.3, 0.1, 0.9])
    # Districts without population: an unweighted mean, (0.2 + 0.6) / 2.
    no_pop = units.assign(population=0.0)
    csv.write_text("code,share\na,0.2\nb,0.6\nc,0.1\nd,0.9\n")
    got = covariate_from_table(no_pop, analysis, csv, id_column="code", value_column="share")
    assert got.iloc[0] == pytest.approx(0.4)


@pytest.mark.parametrize(
    ("rows", "row", "column", "match"),
    [
        ("a,0.2\nzz,0.6\n", 2, "code", "in no boundary file"),
        ("a,0.2\nb,lots\n", 2, "share", "a number"),
        ("a,0.2\na,0.6\n", 2, "code", "twice"),
        ("c,0.1\nQ,0.6\n", 2, "code", "coarser"),
    ],
)
def test_covariate_table_bad_rows_named(
    tmp_path: Path, rows: str, row: int, column: str, match: str
) -> None:
    units, analysis = _two_level()
    csv = tmp_path / "bad.csv"
    csv.write_text("code,share\n" + rows)
    with pytest.raises(InputError, match=match) as info:
        covariate_from_table(units, analysis, csv, id_column="code", value_column="share")
    assert (info.value.row, info.value.column) == (row, column)
    assert "bad.csv" in str(info.value)


def test_covariate_table_missing_units_and_columns(tmp_path: Path) -> None:
    units, analysis = _two_level()
    csv = tmp_path / "part.csv"
    csv.write_text("code,share\nP,0.2\nc,0.1\n")
    with pytest.raises(InputError, match=r"1 analysis unit\(s\) get no value.*: d"):
        covariate_from_table(units, analysis, csv, id_column="code", value_column="share")
    with pytest.raises(InputError, match="no column 'value'") as info:
        covariate_from_table(units, analysis, csv, id_column="code")
    assert info.value.column == "value"


def test_covariate_table_warns_when_a_province_has_only_some_districts(tmp_path: Path) -> None:
    units, analysis = _two_level()
    csv = tmp_path / "some.csv"
    csv.write_text("code,share\na,0.2\nc,0.1\nd,0.9\n")
    with pytest.warns(DataWarning, match=r"some\.csv: 1 analysis unit\(s\).*P \(1 of 2\)"):
        s = covariate_from_table(units, analysis, csv, id_column="code", value_column="share")
    assert s.tolist() == pytest.approx([0.2, 0.1, 0.9])
