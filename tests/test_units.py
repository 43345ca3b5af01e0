"""Boundary reading, validation, analysis level and moving counts onto analysis units.

Covered: files in different formats and CRSs (geographic and projected) read to one equal-area
CRS whose areas agree with geodesic areas (pyproj.Geod, an outside reference); GeoDataFrame
sources; per-source mappings; every validation error (no CRS, missing column, blank and
duplicate ids naming both files, empty and non-polygon geometry, missing parent, level and
country inconsistencies); invalid geometry repaired with a warning; inputs not mutated;
analysis units for mixed admin-1/admin-2 countries; counts rolled up with revisions kept.
"""

from __future__ import annotations

import warnings
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import pytest
import shapely
from pyproj import Geod

from marchland.errors import DataWarning, InputError
from marchland.inputs.reports import as_of
from marchland.inputs.units import analysis_units, counts_to_analysis, read_units


def grid(prefix: str, x0: float, y0: float, n: int, size: float, crs: str) -> gpd.GeoDataFrame:
    boxes = [shapely.box(x0 + i * size, y0, x0 + (i + 1) * size, y0 + size) for i in range(n)]
    return gpd.GeoDataFrame(
        {
            "code": [f"{prefix}-01-{i + 1:02d}" for i in range(n)],
            "name": [f"{prefix} district {i}" for i in range(n)],
            "prov_code": f"{prefix}-01",
        },
        geometry=boxes,
        crs=crs,
    )


def province(dist: gpd.GeoDataFrame, prefix: str) -> gpd.GeoDataFrame:
    return gpd.GeoDataFrame(
        {"code": [f"{prefix}-01"], "name": [f"{prefix} province"]},
        geometry=[dist.union_all()],
        crs=dist.crs,
    )


@pytest.fixture()
def files(tmp_path: Path) -> dict[str, Path]:
    a = grid("TVR", 10.0, 45.0, 3, 0.2, "EPSG:4326")
    b = grid("MRW", 0, 0, 2, 20_000, "EPSG:32633")
    b = b.set_geometry(b.translate(700_000, 5_000_000)).set_crs("EPSG:32633", allow_override=True)
    paths = {
        "tvr2": tmp_path / "tvr_adm2.geojson",
        "tvr1": tmp_path / "tvr_adm1.gpkg",
        "mrw2": tmp_path / "mrw_adm2.gpkg",
        "mrw1": tmp_path / "mrw_adm1.gpkg",
    }
    a.to_file(paths["tvr2"], driver="GeoJSON")
    province(a, "TVR").to_file(paths["tvr1"])
    b.to_file(paths["mrw2"])
    province(b, "MRW").to_file(paths["mrw1"])
    return paths


def read_all(files: dict[str, Path], **kw) -> gpd.GeoDataFrame:
    return read_units(
        [files["tvr1"], files["tvr2"], files["mrw1"], files["mrw2"]],
        id="code",
        name="name",
        country=["TVR", "TVR", "MRW", "MRW"],
        parent=[None, "prov_code", None, "prov_code"],
        level=[1, 2, 1, 2],
        **kw,
    )


def test_reads_and_projects(files: dict[str, Path]) -> None:
    u = read_all(files)
    assert list(u.columns) == [
        "name",
        "country",
        "level",
        "parent_id",
        "population",
        "source",
        "geometry",
    ]
    assert u.index.name == "unit_id" and u.index.is_unique
    assert len(u) == 2 + 3 + 2
    assert u.crs.is_projected and "laea" in u.crs.srs
    assert u.loc["TVR-01-02", "parent_id"] == "TVR-01"
    assert u.loc["MRW-01", "parent_id"] is None
    assert u.loc["TVR-01-01", "source"].endswith("tvr_adm2.geojson")
    # Equal-area: planar areas in the working CRS match geodesic areas on the ellipsoid.
    geod = Geod(ellps="WGS84")  # outside reference: PROJ's geodesic area (Karney 2013)
    ll = u.to_crs("EPSG:4326")
    geodesic = np.array([abs(geod.geometry_area_perimeter(g)[0]) for g in ll.geometry])
    np.testing.assert_allclose(u.area.to_numpy(), geodesic, rtol=1e-3)


def test_named_crs_and_level_inference(files: dict[str, Path]) -> None:
    u = read_units(
        [files["tvr1"], files["tvr2"]],
        id="code",
        name="name",
        country="TVR",
        parent=[None, "prov_code"],
        crs="EPSG:3035",
    )
    assert u.crs.to_epsg() == 3035
    assert u["level"].tolist() == [1, 2, 2, 2]
    with pytest.raises(InputError, match="projected"):
        read_units(files["tvr1"], id="code", name="name", country="TVR", crs="EPSG:4326")


def test_files_on_an_older_datum_are_shifted_into_the_working_crs() -> None:
    # The same coordinates declared NAD27 and WGS 84 are different places; the working CRS
    # carries the WGS 84 datum so pyproj applies the shift between them. Reference: pyproj's
    # own NAD27 -> WGS 84 transformation of the same point (an outside implementation).
    from pyproj import Transformer

    a = grid("OSK", -79.5, 36.0, 2, 0.1, "EPSG:4326")
    b = a.set_crs("EPSG:4267", allow_override=True)
    ua = read_units(a, id="code", name="name", country="OSK", level=2)
    ub = read_units(b, id="code", name="name", country="OSK", level=2, crs=ua.crs)
    moved = ua.geometry.centroid.distance(ub.geometry.centroid)
    x, y = Transformer.from_crs("EPSG:4267", "EPSG:4326", always_xy=True).transform(-79.45, 36.05)
    want = Geod(ellps="WGS84").inv(-79.45, 36.05, x, y)[2]
    assert want > 5  # NAD27 and WGS 84 differ by metres here, not by rounding
    np.testing.assert_allclose(moved, want, rtol=0.05)


def test_geodataframe_sources_not_mutated() -> None:
    a = grid("OSK", 5, 50, 2, 0.1, "EPSG:4326")
    before = a.copy()
    u = read_units(a, id="code", name="name", country="OSK", level=2)
    pd.testing.assert_frame_equal(a, before)
    assert u.loc["OSK-01-01", "source"] == "<GeoDataFrame 0>"
    assert u.loc["OSK-01-01", "parent_id"] is None


def test_country_column() -> None:
    a = grid("OSK", 5, 50, 2, 0.1, "EPSG:4326").assign(cc=["osk", "QLN"])
    u = read_units(a, id="code", name="name", country="cc", level=2)
    assert u["country"].tolist() == ["OSK", "QLN"]
    with pytest.raises(InputError, match="three letters"):
        read_units(a.assign(cc=["OSK", "Q"]), id="code", name="name", country="cc", level=2)


def test_no_crs(tmp_path: Path) -> None:
    a = grid("TVR", 10, 45, 2, 0.2, "EPSG:4326").set_crs(None, allow_override=True)
    with pytest.raises(InputError, match="no CRS"):
        read_units(a, id="code", name="name", country="TVR", level=2)


def test_missing_file_and_column(files: dict[str, Path], tmp_path: Path) -> None:
    with pytest.raises(InputError, match="not found"):
        read_units(tmp_path / "nope.gpkg", id="code", name="name", country="TVR", level=2)
    (tmp_path / "junk.gpkg").write_text("not a geopackage")
    with pytest.raises(InputError, match="not a vector boundary file"):
        read_units(tmp_path / "junk.gpkg", id="code", name="name", country="TVR", level=2)
    with pytest.raises(InputError) as info:
        read_units(files["tvr2"], id="dist_id", name="name", country="TVR", level=2)
    assert info.value.column == "dist_id" and info.value.file.endswith("tvr_adm2.geojson")


def test_duplicate_ids_name_both_files(files: dict[str, Path]) -> None:
    with pytest.raises(InputError) as info:
        read_units([files["tvr2"], files["tvr2"]], id="code", name="name", country="TVR", level=2)
    assert "TVR-01-01" in str(info.value)
    a = grid("TVR", 10, 45, 1, 0.2, "EPSG:4326")
    with pytest.raises(InputError, match=r"tvr_adm2.geojson and <GeoDataFrame 1>"):
        read_units([files["tvr2"], a], id="code", name="name", country="TVR", level=2)


def test_blank_id() -> None:
    a = grid("TVR", 10, 45, 3, 0.2, "EPSG:4326")
    a.loc[1, "code"] = " "
    with pytest.raises(InputError) as info:
        read_units(a, id="code", name="name", country="TVR", level=2)
    assert info.value.row == 2


def test_geometry_checks() -> None:
    a = grid("TVR", 10, 45, 3, 0.2, "EPSG:4326")
    empty = a.copy()
    empty.loc[2, "geometry"] = shapely.Polygon()
    with pytest.raises(InputError) as info:
        read_units(empty, id="code", name="name", country="TVR", level=2)
    assert info.value.row == 3
    pts = a.copy()
    pts.loc[0, "geometry"] = shapely.Point(10, 45)
    with pytest.raises(InputError, match="polygons"):
        read_units(pts, id="code", name="name", country="TVR", level=2)
    bow = a.copy()  # a self-crossing "bow tie" is invalid and repairable
    bow.loc[0, "geometry"] = shapely.Polygon([(10, 45), (10.2, 45.2), (10.2, 45), (10, 45.2)])
    with pytest.warns(DataWarning, match="repaired 1 invalid"):
        u = read_units(bow, id="code", name="name", country="TVR", level=2)
    assert u.is_valid.all() and u.geom_type.isin(["Polygon", "MultiPolygon"]).all()


def test_hierarchy_checks(files: dict[str, Path]) -> None:
    with pytest.raises(InputError, match="parent 'TVR-01'.*no boundary file"):
        read_units(
            files["tvr2"], id="code", name="name", country="TVR", parent="prov_code", level=2
        )
    d = grid("TVR", 10, 45, 2, 0.2, "EPSG:4326")
    p = province(d, "TVR")
    with pytest.raises(InputError, match="same or finer level"):
        read_units(
            [p, d], id="code", name="name", country="TVR", parent=[None, "prov_code"], level=[2, 2]
        )
    with pytest.raises(InputError, match="another country"):
        read_units(
            [p, d],
            id="code",
            name="name",
            country=["OSK", "TVR"],
            parent=[None, "prov_code"],
            level=[1, 2],
        )
    with pytest.raises(InputError, match="level-1 unit cannot have a parent"):
        read_units(
            [p, d], id="code", name="name", country="TVR", parent=[None, "prov_code"], level=[1, 1]
        )
    with pytest.raises(InputError, match="one value per source"):
        read_units([p, d], id="code", name="name", country="TVR", level=[1, 2, 2])


def test_analysis_units_mixed_levels(files: dict[str, Path]) -> None:
    u = read_all(files)
    u = u.assign(population=np.where(u["level"] == 2, 100.0, np.nan))
    counts = pd.DataFrame({"unit_id": ["TVR-01-02", "MRW-01"]})
    a = analysis_units(u, counts)
    assert sorted(a.index) == ["MRW-01", "TVR-01-01", "TVR-01-02", "TVR-01-03"]
    assert a.loc["MRW-01", "population"] == 200.0
    # The dissolved province covers exactly its districts: no gap, no overlap.
    districts = u[(u["country"] == "MRW") & (u["level"] == 2)]
    assert a.loc["MRW-01", "geometry"].symmetric_difference(districts.union_all()).area < 1e-3
    assert a.loc["MRW-01", "name"] == "MRW province"
    # Total area is preserved over the region.
    np.testing.assert_allclose(a.area.sum(), u[u["level"] == 2].area.sum(), rtol=1e-9)
    # A country with no counts is analysed at its finest level.
    assert set(analysis_units(u, counts.iloc[:0]).index) == set(u.index[u["level"] == 2])


def weekly(rows: list[tuple]) -> pd.DataFrame:
    df = pd.DataFrame(rows, columns=["unit_id", "week", "cases", "deaths", "received"])
    df["week"] = pd.to_datetime(df["week"])
    df["received"] = pd.to_datetime(df["received"])
    df["cases"] = df["cases"].astype("Int64")
    df["deaths"] = df["deaths"].astype("Int64")
    df["source"] = "s"
    df["row"] = np.arange(1, len(df) + 1)
    return df


def test_counts_roll_up_keeps_revisions(files: dict[str, Path]) -> None:
    u = read_all(files)
    counts = weekly(
        [
            ("MRW-01-01", "2026-01-05", 3, 0, "2026-01-12"),
            ("MRW-01-02", "2026-01-05", 4, 1, "2026-01-12"),
            ("MRW-01-01", "2026-01-05", 5, 0, "2026-01-26"),  # a correction two weeks later
            ("MRW-01", "2026-01-12", 7, None, "2026-01-19"),
            ("TVR-01-01", "2026-01-05", 2, 0, "2026-01-12"),
        ]
    )
    counts = counts.assign(file="f.csv", sheet="", implied=False)
    a = analysis_units(u, counts)
    assert "MRW-01" in a.index  # province rows force province level for MRW
    moved = counts_to_analysis(counts, u, a)
    assert moved["implied"].notna().all() and moved["file"].notna().all()
    latest = as_of(moved).set_index(["unit_id", "week"])
    assert latest.loc[("MRW-01", pd.Timestamp("2026-01-05")), "cases"] == 9
    early = as_of(moved, "2026-01-20").set_index(["unit_id", "week"])
    assert early.loc[("MRW-01", pd.Timestamp("2026-01-05")), "cases"] == 7
    assert early.loc[("MRW-01", pd.Timestamp("2026-01-05")), "deaths"] == 1
    assert pd.isna(latest.loc[("MRW-01", pd.Timestamp("2026-01-12")), "deaths"])
    assert latest.loc[("TVR-01-01", pd.Timestamp("2026-01-05")), "cases"] == 2
    assert len(counts) == 5 and "_aid" not in counts  # input untouched


def test_counts_that_cannot_be_placed(files: dict[str, Path]) -> None:
    u = read_all(files)
    counts = weekly([("TVR-01", "2026-01-05", 3, 0, "2026-01-12")])
    a = analysis_units(u, pd.DataFrame({"unit_id": ["TVR-01-01"]}))
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        with pytest.raises(InputError, match="not an analysis unit"):
            counts_to_analysis(counts, u, a)


def test_units_from_config(files: dict[str, Path]) -> None:
    from marchland.config.load import config_from_dict
    from marchland.inputs.units import units_from_config

    raw = {
        "region": {"crs": "EPSG:3035"},
        "boundaries": [
            {
                "path": str(files["tvr1"]),
                "id": "code",
                "name": "name",
                "country": "TVR",
                "level": 1,
                "layer": "tvr_adm1",
            },
            {
                "path": str(files["tvr2"]),
                "id": "code",
                "name": "name",
                "country": "TVR",
                "level": 2,
                "parent": "prov_code",
            },
        ],
    }
    u = units_from_config(config_from_dict(raw))
    assert u.crs.to_epsg() == 3035
    assert u["level"].tolist() == [1, 2, 2, 2]
    raw["boundaries"][0]["layer"] = "no_such_layer"
    with pytest.raises(InputError, match="tvr_adm1.gpkg"):
        units_from_config(config_from_dict(raw))
