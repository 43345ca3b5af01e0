"""The bundled fictional scenario: reproducible, and with the properties other modules rely on.

Covered: regeneration from the seed gives the committed files (text byte for byte, binary by
content); each country's districts tile exactly; international borders really mismatch (some
true neighbours do not touch, none lies further than 300 m) while non-neighbours across a
border stay further than 300 m; the island has no land neighbour within 300 m; district
populations lie in 5,000-900,000; the flood-share layer is a share, covers every district, and
is higher along the Senn; the outbreak reaches all four countries and its truth tables
agree with each other; every recorded dirty row is in its file and is dirty for its reason;
Quillany's week numbers agree with the epiweeks package (an outside reference).
"""

from __future__ import annotations

import csv
import datetime as dt
from pathlib import Path

import epiweeks
import geopandas as gpd
import numpy as np
import openpyxl
import pandas as pd
import pytest
import rasterio
import shapely
from exactextract import exact_extract
from geopandas.testing import assert_geodataframe_equal

from marchland.demo import generate, scenario_path
from marchland.demo._boundaries import FILES
from marchland.demo._reports import mmwr_week

ROOT = scenario_path().parents[1]
DATA = ROOT / "demo_data"
TRUTH = DATA / "truth"
TOLERANCE_M = 300.0
# A metric CRS for the whole area (the generator's own frame) to measure gaps in.
METRIC = "+proj=aeqd +lat_0=-15.5 +lon_0=-19 +datum=WGS84 +units=m +no_defs"


@pytest.fixture(scope="module")
def regenerated(tmp_path_factory) -> Path:
    root = tmp_path_factory.mktemp("demo")
    generate(root)
    return root


def _generated_files(root: Path) -> list[Path]:
    files = [p.relative_to(root) for p in (root / "boundaries").iterdir()]
    files += [p.relative_to(root) for p in (root / "demo_data").rglob("*") if p.is_file()]
    return sorted(f for f in files if f.name != "scenario.toml")


def _adm2(root: Path = ROOT) -> gpd.GeoDataFrame:
    """All districts from the four countries' files, with our column names, in METRIC."""
    parts = []
    for c, (suffix, _crs, cols2, _cols1) in FILES.items():
        g = gpd.read_file(root / "boundaries" / f"{c.lower()}_adm2{suffix}")
        g = g.rename(columns={cols2[0]: "unit_id", cols2[1]: "name", cols2[2]: "parent"})
        parts.append(g.assign(country=c).to_crs(METRIC))
    return pd.concat(parts).set_index("unit_id")


def test_regenerating_gives_the_committed_files(regenerated):
    committed = _generated_files(ROOT)
    assert committed == _generated_files(regenerated)
    for rel in committed:
        a, b = ROOT / rel, regenerated / rel
        if rel.suffix in (".gpkg", ".geojson"):
            assert_geodataframe_equal(gpd.read_file(a), gpd.read_file(b))
        elif rel.suffix == ".tif":
            with rasterio.open(a) as ra, rasterio.open(b) as rb:
                assert ra.profile == rb.profile
                np.testing.assert_array_equal(ra.read(1), rb.read(1))
        elif rel.suffix == ".xlsx":
            wa, wb = openpyxl.load_workbook(a), openpyxl.load_workbook(b)
            assert wa.sheetnames == wb.sheetnames
            for name in wa.sheetnames:
                va = list(wa[name].iter_rows(values_only=True))
                assert va == list(wb[name].iter_rows(values_only=True)), name
        else:
            assert a.read_bytes() == b.read_bytes(), rel


def test_districts_tile_exactly_within_each_country():
    adm2 = _adm2()
    for c in FILES:
        part = adm2[adm2["country"] == c]
        assert part.geometry.is_valid.all()
        assert shapely.coverage_is_valid(part.geometry.values), c


def test_provinces_are_the_union_of_their_districts():
    for c, (suffix, _crs, cols2, cols1) in FILES.items():
        adm1 = gpd.read_file(ROOT / "boundaries" / f"{c.lower()}_adm1{suffix}")
        adm2 = gpd.read_file(ROOT / "boundaries" / f"{c.lower()}_adm2{suffix}")
        assert set(adm2[cols2[2]]) == set(adm1[cols1[0]])
        assert all(
            u.startswith(p + "-") for u, p in zip(adm2[cols2[0]], adm2[cols2[2]], strict=True)
        )
        merged = adm2.dissolve(cols2[2]).geometry
        prov = adm1.set_index(cols1[0]).geometry[merged.index]
        sym = shapely.area(shapely.symmetric_difference(merged.values, prov.values))
        assert (sym < 1e-6 * shapely.area(prov.values)).all(), c


def test_borders_mismatch_but_stay_within_tolerance():
    adm2 = _adm2()
    adj = pd.read_csv(TRUTH / "adjacency.csv")
    cross = adj[adj["cross_border"]]
    assert len(cross) >= 20
    ga = adm2.geometry[cross["a"]].values
    gb = adm2.geometry[cross["b"]].values
    dist = shapely.distance(ga, gb)
    overlap = shapely.area(shapely.intersection(ga, gb))
    assert dist.max() <= TOLERANCE_M
    assert (dist > 20).sum() >= 3, "some true neighbours should not touch in the files"
    assert (overlap > 0).sum() >= 3, "some true neighbours should overlap in the files"
    # Every pair across a border that is not truly adjacent lies further apart than 300 m.
    tree = shapely.STRtree(adm2.geometry.values)
    i, j = tree.query(adm2.geometry.values, predicate="dwithin", distance=TOLERANCE_M)
    ids = adm2.index.to_numpy()
    country = adm2["country"].to_numpy()
    near = {tuple(sorted(p)) for p in zip(ids[i], ids[j], strict=True)}
    near_cross = {p for p in near if p[0][:3] != p[1][:3]}
    assert near_cross == set(zip(cross["a"], cross["b"], strict=True))
    # Inside a country the files keep the true adjacency exactly.
    within = adj[~adj["cross_border"]]
    touching = shapely.intersection(
        adm2.geometry[within["a"]].values, adm2.geometry[within["b"]].values
    )
    assert (shapely.length(touching) > 0).all()
    assert len(set(country)) == 4


def test_island_has_no_land_neighbour():
    adm2 = _adm2()
    districts = pd.read_csv(TRUTH / "districts.csv", index_col="unit_id")
    island = districts.index[districts["island"]]
    assert len(island) == 1
    others = adm2.drop(index=island)
    assert shapely.distance(others.geometry.values, adm2.geometry[island[0]]).min() > TOLERANCE_M
    links = pd.read_csv(DATA / "links.csv")
    assert island[0] not in set(links["from_id"]) | set(links["to_id"])


def test_links_join_districts_that_do_not_touch():
    adm2 = _adm2()
    links = pd.read_csv(DATA / "links.csv")
    assert set(links["kind"]) <= {"ferry", "bridge", "road"}
    assert {"ferry", "bridge"} <= set(links["kind"])
    d = shapely.distance(
        adm2.geometry[links["from_id"]].values, adm2.geometry[links["to_id"]].values
    )
    assert (d > TOLERANCE_M).all()
    ferry = links[links["kind"] == "ferry"]
    assert (ferry["from_id"].str[:3] != ferry["to_id"].str[:3]).any()


def test_district_populations_are_in_range():
    adm2 = _adm2().to_crs("EPSG:4326")
    sums = exact_extract(
        str(DATA / "population.tif"),
        adm2.reset_index(),
        "sum",
        include_cols=["unit_id"],
        output="pandas",
    ).set_index("unit_id")["sum"]
    assert len(sums) == 250
    assert sums.min() >= 5_000 and sums.max() <= 900_000
    truth = pd.read_csv(TRUTH / "population.csv", index_col="unit_id")["population"]
    assert np.allclose(sums[truth.index], truth, rtol=0.05)
    with rasterio.open(DATA / "population.tif") as r:
        assert r.nodata is not None and r.dtypes[0] == "float32"
        assert r.profile["compress"] == "deflate"


def test_flood_share_is_a_share_and_higher_along_the_senn():
    from marchland.inputs.population import zonal_mean

    with rasterio.open(DATA / "flood_share.tif") as src:
        a = src.read(1, masked=True)
        assert src.profile["compress"] == "deflate"
    assert a.min() >= 0 and a.max() <= 1
    mean = zonal_mean(_adm2(), DATA / "flood_share.tif")  # warns if a district is not covered
    river = pd.read_csv(TRUTH / "districts.csv", index_col="unit_id")["river"].reindex(mean.index)
    assert river.notna().all()
    on, off = mean[river.astype(bool)].to_numpy(), mean[~river.astype(bool)].to_numpy()
    # Invented data: the layer was drawn that way, so this is a property, not a statistic.
    assert np.median(on) > 3 * np.median(off)


def test_outbreak_truth_is_consistent():
    inc = pd.read_csv(TRUTH / "incidence.csv", parse_dates=["week"])
    first = pd.read_csv(TRUTH / "first_case.csv", parse_dates=["week"], keep_default_na=False)
    districts = pd.read_csv(TRUTH / "districts.csv", index_col="unit_id")
    assert len(inc) == 250 * inc["week"].nunique()
    assert (inc["week"].dt.day_of_week == 0).all()
    assert inc["week"].min() == pd.Timestamp("2025-04-07")
    by_country = inc.groupby(inc["unit_id"].str[:3])["cases"].sum()
    assert (by_country > 0).all() and len(by_country) == 4
    assert (inc["deaths"] <= inc["cases"]).all()
    cfr = inc["deaths"].sum() / inc["cases"].sum()
    assert 0.01 <= cfr <= 0.03
    # Deaths are likelier where care is poor.
    tot = inc.groupby("unit_id")[["cases", "deaths"]].sum()
    tot = tot[tot["cases"] >= 200]
    assert np.corrcoef(tot["deaths"] / tot["cases"], districts.loc[tot.index, "care"])[0, 1] < -0.3
    observed = inc[inc["cases"] > 0].groupby("unit_id")["week"].min()
    assert first.set_index("unit_id")["week"].sort_index().equals(observed.sort_index())
    assert len(observed) < 250, "some districts stay unaffected"
    seeds = first[first["seeded_by"] == ""]
    assert len(seeds) == 1 and seeds["week"].iloc[0] == inc["week"].min()
    assert seeds["unit_id"].iloc[0].startswith("TVR")
    assert districts.loc[seeds["unit_id"].iloc[0], "river"]
    # Every seeding district is a true neighbour or linked, and was affected earlier.
    adj = pd.read_csv(TRUTH / "adjacency.csv")
    links = pd.read_csv(DATA / "links.csv")
    pairs = set(zip(adj["a"], adj["b"], strict=True)) | {
        tuple(sorted(p)) for p in zip(links["from_id"], links["to_id"], strict=True)
    }
    rest = first[first["seeded_by"] != ""]
    assert all(
        tuple(sorted(p)) in pairs for p in zip(rest["unit_id"], rest["seeded_by"], strict=True)
    )
    wk = first.set_index("unit_id")["week"]
    assert (wk[rest["seeded_by"]].to_numpy() < rest["week"].to_numpy()).all()
    assert (rest["unit_id"].str[:3] != rest["seeded_by"].str[:3]).any()
    force = pd.read_csv(TRUTH / "force.csv")
    assert len(force) == len(inc) and (force["force"] >= 0).all()
    hot = pd.read_csv(TRUTH / "hot.csv")
    assert hot["unit_id"].isin(districts.index).all() and "2026-10" in set(hot["month"])


def _cell_rows(path: Path, sheet: str | float) -> list[list]:
    if path.suffix == ".xlsx":
        ws = openpyxl.load_workbook(path)[sheet]
        rows = [list(r) for r in ws.iter_rows(values_only=True)]
        return [["" if v is None else v for v in r] for r in rows]
    with open(path, encoding="utf-8", newline="") as f:
        return list(csv.reader(f))


def _is_number(v) -> bool:
    try:
        int(v)
    except (TypeError, ValueError):
        return False
    return True


def _is_date(v) -> bool:
    if isinstance(v, dt.date):
        return True
    for fmt in ("%Y-%m-%d", "%d/%m/%Y"):
        try:
            dt.datetime.strptime(v, fmt)
            return True
        except ValueError:
            pass
    return False


def test_every_dirty_row_is_in_its_file_and_dirty_for_its_reason():
    dirt = pd.read_csv(TRUTH / "dirt.csv", keep_default_na=False)
    reasons = {
        "blank",
        "unknown-place",
        "negative",
        "deaths-over-cases",
        "duplicate",
        "future-week",
        "unparseable",
    }
    assert set(dirt["reason"]) == reasons
    names = pd.read_csv(TRUTH / "districts.csv")["name"].str.lower().tolist()
    aliases = pd.read_csv(DATA / "aliases.csv")["alias"].str.lower().tolist()
    for r in dirt.itertuples():
        rows = _cell_rows(DATA / r.source_file, r.sheet)
        header, row = rows[0], rows[r.row]  # data row 1 is the line after the header
        assert len(row) == len(header)
        value = row[header.index(r.column)] if r.column else None
        if r.reason == "blank":
            assert all(v == "" for v in row)
        elif r.reason == "duplicate":
            assert row == rows[r.row - 1]
        elif r.reason == "negative":
            assert int(value) < 0
        elif r.reason == "deaths-over-cases":
            cases = row[
                header.index({"Deaths": "Cases", "New deaths": "New cases"}.get(r.column, "cases"))
            ]
            assert int(value) > int(cases)
        elif r.reason == "future-week":
            assert pd.Timestamp(value) > pd.Timestamp("2026-12-31")
        elif r.reason == "unknown-place":
            assert value.strip().lower() not in names + aliases
        elif r.reason == "unparseable":
            assert not (_is_number(value) or _is_date(value))
    # No other row is dirty in the simple, checkable ways.
    for path in sorted((DATA / "reports").glob("*.csv")):
        rows = _cell_rows(path, "")
        flagged = set(dirt.loc[dirt["source_file"] == f"reports/{path.name}", "row"])
        for k, row in enumerate(rows[1:], start=1):
            if k not in flagged:
                assert any(v != "" for v in row) and row != rows[k - 1], (path.name, k)


def test_quillany_weeks_follow_the_mmwr_calendar():
    # Outside reference: the epiweeks package's CDC (MMWR) calendar.
    q = pd.read_csv(DATA / "reports" / "qln_weekly.csv", dtype=str)
    sunday = pd.to_datetime(q["Reported on"], format="%d/%m/%Y") - pd.Timedelta(days=9)
    for s, yr, wk in zip(sunday, q["Yr"], q["Wk"], strict=True):
        ref = epiweeks.Week.fromdate(s.date(), system="CDC")
        assert (ref.year, ref.week) == (int(yr), int(wk))
    for day in pd.date_range("2019-12-29", "2027-12-26", freq="7D"):
        ref = epiweeks.Week.fromdate(day.date(), system="CDC")
        assert mmwr_week(day) == (ref.year, ref.week)
    gaps = pd.read_csv(TRUTH / "gaps.csv", parse_dates=["week"])
    assert len(gaps) >= 3 and not sunday.isin(gaps["week"]).any()


def test_tavrenne_files_carry_late_rows_and_corrections():
    frames = [
        pd.read_csv(p, keep_default_na=False).assign(file=p.name)
        for p in sorted((DATA / "reports").glob("tvr_weekly_*.csv"))
    ]
    t = pd.concat(frames)
    t = t[t["district_code"] != ""]
    t = t[t["week_start"] < "2027-01-01"]
    assert t.groupby("district_code")["week_start"].nunique().min() >= 80
    versions = t.groupby(["district_code", "week_start"]).size()
    assert (versions > 1).sum() >= 10
    month_of_week = t["week_start"].str[:7]
    month_of_file = t["file"].str[11:18]
    assert (month_of_file > month_of_week).sum() > (versions > 1).sum()


def test_ids_counts_and_connected_provinces():
    districts = pd.read_csv(TRUTH / "districts.csv", index_col="unit_id")
    assert districts.index.str.fullmatch(r"(TVR|OSK|MRW|QLN)-\d{2}-\d{2}").all()
    assert (districts.index.str[:6] == districts["province_id"]).all()
    counts = districts["country"].value_counts().to_dict()
    assert counts == {"TVR": 80, "OSK": 60, "MRW": 60, "QLN": 50}
    per_country = districts.groupby("country")["province_id"].nunique()
    assert per_country.between(5, 10).all()
    assert districts["name"].is_unique
    # Provinces are contiguous on land (the island belongs to a shore province).
    adj = pd.read_csv(TRUTH / "adjacency.csv")
    same = adj[adj["a"].str[:6] == adj["b"].str[:6]]
    land = districts[~districts["island"]]
    for prov, members in land.groupby("province_id").groups.items():
        members = set(members)
        reached, frontier = set(), {next(iter(members))}
        while frontier:
            reached |= frontier
            step = same[same["a"].isin(frontier) | same["b"].isin(frontier)]
            frontier = (set(step["a"]) | set(step["b"])) & members - reached
        assert reached == members, prov
