"""Tests for marchland.supplies.plan: priority list, planning quantities, totals, depot choice.

Covered here:
- quantities against a hand-computed example (arithmetic stated beside each value), the
  floating-point trap of ceil(), missing population, rank order, inputs left unchanged;
- risk-weighted totals per country and per depot catchment, by hand;
- the readers (supply items, depot sites) and every bad input named by file, row and column;
- depots: existing depots always open, k = 0 assignment only, the uncovered list, the
  region check, the CRS check; hypothesis: covered weight never falls as k grows and never
  exceeds the total weight.
The comparison of spopt's answer with exhaustive search is in
tests/reference/test_supplies_reference.py.
"""

from __future__ import annotations

import io
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from pyproj import Transformer
from shapely.geometry import box

from marchland.errors import InputError
from marchland.supplies import (
    SupplyPlan,
    affected_quantities,
    assign_depots,
    choose_depots,
    forecast_case_totals,
    prioritise,
    reach_areas,
    read_depots,
    read_supply_items,
    totals,
)
from marchland.supplies._input import ITEM_UNITS

CRS = "EPSG:3035"
ITEMS_CSV = """# Example values for the test, not guidance.
item,unit,per_case,basis,buffer_share
ors,sachet,10,all,0.2
iv_fluid,litre,8,severe,0.1
aqua_tabs,tablet,30,all,
"""


def _units() -> gpd.GeoDataFrame:
    ids = pd.Index(["TVR-01-01", "TVR-01-02", "OSK-02-01", "OSK-02-02"], name="unit_id")
    return gpd.GeoDataFrame(
        {
            "name": ["Aldo", "Brin", "Cass", "Dorn"],
            "country": ["TVR", "TVR", "OSK", "OSK"],
            "population": [50_000, 12_345, 20_000, np.nan],
        },
        geometry=[box(x, 0, x + 10_000, 10_000) for x in (0, 20_000, 40_000, 60_000)],
        index=ids,
        crs=CRS,
    )


def _risk() -> pd.DataFrame:
    ids = _units().index
    return pd.DataFrame(
        {
            "probability": [0.3, 0.1, 0.6, 0.2],
            "rank": [2, 4, 1, 3],
            "cross_border": [True, False, True, False],
            "part_distance": [0.1, 0.2, 0.3, 0.4],
        },
        index=ids,
    )


def _plan(severe_share: float = 0.2) -> SupplyPlan:
    items = read_supply_items(io.StringIO(ITEMS_CSV))
    return SupplyPlan(items, 0.001, 0.003, 0.008, severe_share=severe_share)


# --- quantities ------------------------------------------------------------------------------
def test_quantities_by_hand():
    out = prioritise(_risk(), _units(), plan=_plan())
    aldo = out.loc["TVR-01-01"]
    # Aldo: 50,000 people x 0.003 = 150 planning cases (low 50,000 x 0.001 = 50, high x 0.008 = 400)
    assert aldo["planning_cases"] == pytest.approx(150.0)
    assert aldo["planning_cases_low"] == pytest.approx(50.0)
    assert aldo["planning_cases_high"] == pytest.approx(400.0)
    # ors: 150 x 10 x 1.2 = 1800 exactly
    assert aldo["ors"] == 1800
    # iv_fluid (severe): 150 x 0.2 x 8 x 1.1 = 264 exactly; in floating point 264.00000000000006,
    # which a bare ceil() would turn into 265
    assert aldo["iv_fluid"] == 264
    # aqua_tabs, empty buffer = 0: 150 x 30 = 4500
    assert aldo["aqua_tabs"] == 4500
    brin = out.loc["TVR-01-02"]
    # Brin: 12,345 x 0.003 = 37.035 cases
    assert brin["planning_cases"] == pytest.approx(37.035)
    # ors: 37.035 x 10 x 1.2 = 444.42 -> 445
    assert brin["ors"] == 445
    # iv_fluid: 37.035 x 0.2 x 8 x 1.1 = 65.1816 -> 66
    assert brin["iv_fluid"] == 66
    # aqua_tabs: 37.035 x 30 = 1111.05 -> 1112
    assert brin["aqua_tabs"] == 1112


# --- districts with cases: quantities from the forecast --------------------------------------
def _fake_forecast(seed: int = 3, known=(True, True, True, False)):
    import types

    rng = np.random.default_rng(seed)
    paths = rng.negative_binomial(2, 0.1, size=(4, 4, 500)).astype(np.int32)  # week, unit, path
    units = pd.DataFrame({"start_known": list(known)}, index=_units().index)
    weeks = pd.date_range("2026-10-05", periods=4, freq="7D")
    return types.SimpleNamespace(paths=paths, units=units, weeks=weeks)


@pytest.mark.parametrize("q", [0.5, 0.9, 0.975])
def test_affected_quantities_are_per_case_amounts_times_quantile_of_summed_paths(q):
    fc = _fake_forecast()
    ft = forecast_case_totals(fc, quantile=q)
    out = affected_quantities(ft, _units(), plan=_plan())
    # By hand: per unit, sum each path over the 4 weeks, then numpy's inverted-cdf quantile
    # (an order statistic of the sums, so a whole number: the products below are exact).
    sums = fc.paths.sum(axis=0)
    for k, uid in enumerate(_units().index[:3]):
        upper = float(np.sort(sums[k])[int(np.ceil(q * sums.shape[1])) - 1])
        assert ft.loc[uid, "upper"] == upper
        assert out.loc[uid, "forecast_cases_upper"] == upper
        assert out.loc[uid, "forecast_cases"] == pytest.approx(sums[k].mean())
        assert out.loc[uid, "ors"] == np.ceil(round(upper * 10 * 1.2, 9))
        assert out.loc[uid, "iv_fluid"] == np.ceil(round(upper * 0.2 * 8 * 1.1, 9))
        assert out.loc[uid, "aqua_tabs"] == upper * 30
    # A unit whose start was unknown gets no quantity, and the table runs largest first.
    assert out.loc["OSK-02-02", ["ors", "iv_fluid"]].isna().all()
    assert list(out["forecast_cases_upper"].dropna()) == sorted(
        out["forecast_cases_upper"].dropna(), reverse=True
    )
    assert out.attrs["quantile"] == q and out.attrs["weeks"] == 4


def test_affected_quantities_from_a_real_forecast(monkeypatch):
    # The functions read a projections.Forecast as it is (paths, units, weeks).
    import types
    import warnings

    from marchland.errors import DataWarning
    from marchland.projections import forecast
    from marchland.projections._synthetic import simulate_outbreak
    from marchland.supplies import plan as plan_module

    sim = simulate_outbreak(3, 14, seed=2)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DataWarning)
        fc = forecast(
            sim.counts,
            sim.units,
            sim.graph,
            as_of=sim.panel.columns[-1] + pd.Timedelta(days=9),
            seed=1,
            n_paths=300,
        )
    units = sim.units.assign(name=sim.units.index)
    out = affected_quantities(forecast_case_totals(fc, quantile=0.9), units, plan=_plan())
    totals = fc.paths.sum(axis=0)
    upper = np.quantile(totals, 0.9, axis=1, method="inverted_cdf")
    expect = pd.Series(upper * 30.0, index=fc.units.index)
    np.testing.assert_array_equal(out["aqua_tabs"].astype(float), expect.reindex(out.index))
    assert len(out) == len(units)
    # Read a few units at a time from the forecast's compact paths: the same totals as from
    # its dense paths in one go.
    monkeypatch.setattr(plan_module, "TOTALS_BLOCK", 2)
    dense = types.SimpleNamespace(paths=fc.paths, units=fc.units, weeks=fc.weeks)
    pd.testing.assert_frame_equal(
        forecast_case_totals(fc, quantile=0.9), forecast_case_totals(dense, quantile=0.9)
    )


def test_affected_bad_input():
    fc = _fake_forecast()
    for q in (0.2, 1.0):
        with pytest.raises(ValueError, match="'quantile' needs to be at least 0.5"):
            forecast_case_totals(fc, quantile=q)
    ft = forecast_case_totals(fc)
    with pytest.raises(InputError, match="not in the units table"):
        affected_quantities(ft.rename(index={"TVR-01-01": "ZZZ"}), _units(), plan=_plan())
    with pytest.raises(InputError, match="'upper'"):
        affected_quantities(ft.drop(columns="upper"), _units(), plan=_plan())


def test_severe_share_changes_only_severe_items():
    a = prioritise(_risk(), _units(), plan=_plan(0.2))
    b = prioritise(_risk(), _units(), plan=_plan(0.4))
    assert (a["ors"] == b["ors"]).all() and (a["aqua_tabs"] == b["aqua_tabs"]).all()
    # 150 x 0.4 x 8 x 1.1 = 528
    assert b.loc["TVR-01-01", "iv_fluid"] == 528


def test_priority_table_shape_and_order():
    risk, units = _risk(), _units()
    risk_copy, units_copy = risk.copy(), units.copy()
    out = prioritise(risk, units, plan=_plan())
    assert list(out.index) == ["OSK-02-01", "TVR-01-01", "OSK-02-02", "TVR-01-02"]
    assert out.index.name == "unit_id"
    assert list(out.columns) == [
        "rank",
        "name",
        "country",
        "probability",
        "population",
        "planning_cases_low",
        "planning_cases",
        "planning_cases_high",
        "cross_border",
        "ors",
        "iv_fluid",
        "aqua_tabs",
    ]
    assert str(out["ors"].dtype) == "Int64"
    # Dorn has no population: no planning cases, no quantities, but it stays on the list
    assert pd.isna(out.loc["OSK-02-02", "planning_cases"])
    assert pd.isna(out.loc["OSK-02-02", "ors"])
    pd.testing.assert_frame_equal(risk, risk_copy)
    pd.testing.assert_frame_equal(units, units_copy)


def test_silent_and_drivers_are_carried():
    risk = _risk().assign(silent=[False, True, False, False], drivers=["OSK-02-01", "", "", ""])
    out = prioritise(risk, _units(), plan=_plan())
    assert bool(out.loc["TVR-01-02", "silent"]) is True
    assert out.loc["TVR-01-01", "drivers"] == "OSK-02-01"
    assert "part_distance" not in out.columns


def test_prioritise_bad_input():
    risk = _risk()
    risk.index = ["TVR-01-01", "TVR-01-02", "OSK-02-01", "QLN-09-09"]
    with pytest.raises(InputError, match="QLN-09-09"):
        prioritise(risk, _units(), plan=_plan())
    units = _units()
    units.loc["TVR-01-01", "population"] = -5
    with pytest.raises(InputError, match="population"):
        prioritise(_risk(), units, plan=_plan())
    with pytest.raises(InputError, match="probability"):
        prioritise(_risk().drop(columns="probability"), _units(), plan=_plan())


# --- totals ----------------------------------------------------------------------------------
def test_totals_per_country_by_hand():
    plan = _plan()
    pri = prioritise(_risk(), _units(), plan=plan)
    out = totals(pri, plan=plan)
    assert list(out.index) == ["OSK", "TVR"]
    tvr = out.loc["TVR"]
    assert tvr["units"] == 2
    # ors if it arrives everywhere: 1800 + 445 = 2245
    assert tvr["ors"] == 2245
    # risk-weighted: 0.3 x 1800 + 0.1 x 445 = 540 + 44.5 = 584.5 -> 585
    assert tvr["ors_risk_weighted"] == 585
    # expected cases: 0.3 x 150 + 0.1 x 37.035 = 48.7035
    assert tvr["expected_cases"] == pytest.approx(48.7035)
    osk = out.loc["OSK"]
    # Cass 20,000 x 0.003 = 60 cases, ors 60 x 12 = 720; Dorn has no population
    assert osk["ors"] == 720
    # 0.6 x 720 = 432
    assert osk["ors_risk_weighted"] == 432


def test_totals_per_catchment():
    plan = _plan()
    pri = prioritise(_risk(), _units(), plan=plan)
    catchment = pd.Series({"TVR-01-01": "D1", "OSK-02-01": "D1", "TVR-01-02": "D2"}, name="depot")
    out = totals(pri, plan=plan, by=catchment)
    assert out.index.name == "depot"
    # D1 = Aldo + Cass: ors 1800 + 720 = 2520; risk-weighted 0.3 x 1800 + 0.6 x 720 = 972
    assert out.loc["D1", "ors"] == 2520
    assert out.loc["D1", "ors_risk_weighted"] == 972
    assert out.loc["(none)", "units"] == 1
    assert out["units"].sum() == len(pri)
    with pytest.raises(InputError, match="nowhere"):
        totals(pri, plan=plan, by="nowhere")


# --- readers and plan ------------------------------------------------------------------------
def test_read_supply_items():
    items = read_supply_items(io.StringIO(ITEMS_CSV))
    assert items["item"].tolist() == ["ors", "iv_fluid", "aqua_tabs"]
    assert items["buffer_share"].tolist() == [0.2, 0.1, 0.0]
    assert items.attrs["note"] == "Example values for the test, not guidance."
    assert set(items["unit"]) <= set(ITEM_UNITS)


def _bad_items(tmp_path: Path, row: str) -> Path:
    path = tmp_path / "items.csv"
    path.write_text(
        "# test\nitem,unit,per_case,basis,buffer_share\nors,sachet,10,all,0.2\n" + row + "\n"
    )
    return path


@pytest.mark.parametrize(
    ("row", "column", "words"),
    [
        ("soap,crate,2,all,0", "unit", "one of"),
        ("soap,piece,-2,all,0", "per_case", ">= 0"),
        ("soap,piece,two,all,0", "per_case", ">= 0"),
        ("soap,piece,2,all,-0.1", "buffer_share", ">= 0"),
        ("soap,piece,2,mild,0", "basis", "one of"),
        ("ors,piece,2,all,0", "item", "repeated"),
        ("population,piece,2,all,0", "item", "reserved"),
        (",piece,2,all,0", "item", "empty"),
    ],
)
def test_bad_supply_items(tmp_path, row, column, words):
    path = _bad_items(tmp_path, row)
    with pytest.raises(InputError, match=words) as info:
        read_supply_items(path)
    assert info.value.file == str(path)
    assert info.value.row == 2
    assert info.value.column == column


def test_supply_items_missing_column(tmp_path):
    path = tmp_path / "items.csv"
    path.write_text("item,unit,per_case,basis\nors,sachet,10,all\n")
    with pytest.raises(InputError) as info:
        read_supply_items(path)
    assert info.value.column == "buffer_share"


def test_plan_checks_rates():
    items = read_supply_items(io.StringIO(ITEMS_CSV))
    with pytest.raises(InputError, match="low <= mid <= high"):
        SupplyPlan(items, 0.01, 0.003, 0.008)
    with pytest.raises(InputError, match="between 0 and 1"):
        SupplyPlan(items, 0.001, 0.003, 1.5)
    with pytest.raises(InputError, match="severe_share"):
        SupplyPlan(items, 0.001, 0.003, 0.008, severe_share=-0.1)


def test_plan_from_config_dataclass_and_mapping(tmp_path):
    from marchland.config.schema import PlanningRates, SuppliesConfig

    path = tmp_path / "items.csv"
    path.write_text(ITEMS_CSV)
    cfg = SuppliesConfig(
        items=path, planning_attack_rate=PlanningRates(0.002, 0.004, 0.01), severe_share=0.3
    )
    plan = SupplyPlan.from_config(cfg)
    assert (plan.attack_rate_low, plan.attack_rate_mid, plan.attack_rate_high) == (
        0.002,
        0.004,
        0.01,
    )
    assert plan.severe_share == 0.3
    assert plan.note == "Example values for the test, not guidance."
    same = SupplyPlan.from_config(
        {"items": "items.csv", "planning_attack_rate": {"low": 0.002, "mid": 0.004, "high": 0.01}},
        base=tmp_path,
    )
    assert same.item_names == plan.item_names
    with pytest.raises(InputError, match="planning_attack_rate"):
        SupplyPlan.from_config({"items": path})


# --- depot sites -----------------------------------------------------------------------------
DEPOTS_CSV = """site,name,lon,lat,existing
D1,North store,10.0,52.0,yes
D2,River store,10.5,52.2,
D3,Lake store,11.0,51.8,no
"""


def test_read_depots_reprojects():
    sites = read_depots(io.StringIO(DEPOTS_CSV), CRS)
    assert sites.index.name == "site"
    assert sites["existing"].tolist() == [True, False, False]
    assert sites["row"].tolist() == [1, 2, 3]
    # pyproj directly, as the independent transform
    x, y = Transformer.from_crs("EPSG:4326", CRS, always_xy=True).transform(10.5, 52.2)
    assert sites.geometry["D2"].x == pytest.approx(x)
    assert sites.geometry["D2"].y == pytest.approx(y)
    assert sites.crs == CRS


@pytest.mark.parametrize(
    ("row", "column"),
    [
        ("D4,Far,200,52,no", "lon"),
        ("D4,Far,10,lat,no", "lat"),
        ("D4,Far,10,52,maybe", "existing"),
        ("D1,Again,10,52,no", "site"),
    ],
)
def test_bad_depots(tmp_path, row, column):
    path = tmp_path / "depots.csv"
    path.write_text(DEPOTS_CSV + row + "\n")
    with pytest.raises(InputError) as info:
        read_depots(path, CRS)
    assert info.value.file == str(path)
    assert info.value.row == 4
    assert info.value.column == column


# --- depot choice ----------------------------------------------------------------------------
def _line_instance():
    """Five districts 50 km apart on a line; four sites near them."""
    ids = pd.Index([f"U{i}" for i in range(5)], name="unit_id")
    units = gpd.GeoDataFrame(
        {
            "probability": [0.5, 0.2, 0.9, 0.4, 0.1],
            "population": [1000, 4000, 1000, 2000, 3000],
        },
        geometry=[box(x, 0, x + 10_000, 10_000) for x in range(0, 250_000, 50_000)],
        index=ids,
        crs=CRS,
    )
    sites = gpd.GeoDataFrame(
        {"name": list("abcd"), "existing": [True, False, False, False]},
        geometry=gpd.points_from_xy([5_000, 55_000, 155_000, 205_000], [5_000] * 4),
        index=pd.Index(["S0", "S1", "S2", "S3"], name="site"),
        crs=CRS,
    )
    return units, sites


def test_existing_depot_stays_open():
    units, sites = _line_instance()
    out = choose_depots(units, sites, k=1, reach_km=60)
    assert "S0" in out.index and len(out) == 2
    # weights 500, 800, 900, 800, 300; centres at 5, 55, 105, 155, 205 km. S0 (5 km) covers
    # U0, U1 (1300). Best extra site: S2 (155 km) covers U2, U3, U4 (900 + 800 + 300 = 2000);
    # S3 (205 km) covers U3, U4 (1100); S1 (55 km) adds only U2 (900).
    assert set(out.index) == {"S0", "S2"}
    assert out["covered_weight"].sum() == pytest.approx(3300.0)
    assert out.loc["S0", "existing"] and out.loc["S2", "new"]
    # 1000 + 2000 + 3000 people
    assert out.loc["S2", "covered_population"] == pytest.approx(6000.0)
    assert (out["reach_km"] == 60).all()


def test_k_zero_is_assignment_to_existing():
    units, sites = _line_instance()
    out = choose_depots(units, sites, k=0, reach_km=60)
    assert list(out.index) == ["S0"]
    assert out.loc["S0", "covered_units"] == 2
    assign = assign_depots(units, out)
    assert (assign["depot"] == "S0").all()
    assert assign["covered"].tolist() == [True, True, False, False, False]
    assert out.loc["S0", "covered_weight"] == pytest.approx(1300.0)
    # U4's centre is at 205 km, S0 at 5 km
    assert assign.loc["U4", "distance_km"] == pytest.approx(200.0)


def test_k_zero_without_existing_depots():
    units, sites = _line_instance()
    sites = sites.assign(existing=False)
    out = choose_depots(units, sites, k=0, reach_km=60)
    assert len(out) == 0
    assign = assign_depots(units, out, reach_km=60)
    assert assign["depot"].isna().all() and not assign["covered"].any()


def test_uncovered_and_catchment_agree_with_depots():
    units, sites = _line_instance()
    out = choose_depots(units, sites, k=1, reach_km=60)
    assign = assign_depots(units, out)
    covered = assign[assign["covered"]]
    by_depot = covered.groupby("depot")["weight"].sum()
    pd.testing.assert_series_equal(
        by_depot.sort_index(), out["covered_weight"].sort_index(), check_names=False
    )
    uncovered = assign[~assign["covered"]]
    assert uncovered.empty
    out = choose_depots(units, sites.assign(existing=False), k=1, reach_km=60)
    uncovered = assign_depots(units, out).query("~covered")
    # one depot: S1 covers U0-U2 (500 + 800 + 900 = 2200), more than S2 with U2-U4 (2000)
    assert list(out.index) == ["S1"]
    assert list(uncovered.index) == ["U3", "U4"]


def test_candidates_and_units_separately():
    units, sites = _line_instance()
    candidates = pd.DataFrame(units.drop(columns="geometry")).iloc[[1, 2, 3]]
    out = choose_depots(candidates, sites, k=1, reach_km=60, units=units)
    # only U1 (800), U2 (900), U3 (800) count; S0 covers U1, S2 covers U2 and U3
    assert set(out.index) == {"S0", "S2"}
    assert out["covered_weight"].sum() == pytest.approx(2500.0)


def test_plain_site_table_with_lon_lat():
    units, _ = _line_instance()
    wgs = gpd.GeoSeries(gpd.points_from_xy([5_000, 155_000], [5_000, 5_000]), crs=CRS).to_crs(
        "EPSG:4326"
    )
    table = pd.DataFrame(
        {"site": ["A", "B"], "name": ["a", "b"], "lon": wgs.x, "lat": wgs.y, "existing": ["", ""]}
    )
    out = choose_depots(units, table, k=1, reach_km=60)
    assert list(out.index) == ["B"]
    assert out.loc["B", "x"] == pytest.approx(155_000, abs=0.01)


@pytest.mark.parametrize("k", [-1, 4, 1.5, True])
def test_bad_k(k):
    units, sites = _line_instance()
    with pytest.raises(InputError) as info:
        choose_depots(units, sites, k=k, reach_km=60)
    assert info.value.column == "k"


@pytest.mark.parametrize("reach", [0, -5, float("nan"), "far"])
def test_bad_reach(reach):
    units, sites = _line_instance()
    with pytest.raises(InputError) as info:
        choose_depots(units, sites, k=1, reach_km=reach)
    assert info.value.column == "reach_km"


def test_site_outside_region_is_named(tmp_path):
    units, _ = _line_instance()
    inside = gpd.GeoSeries(gpd.points_from_xy([5_000], [5_000]), crs=CRS).to_crs("EPSG:4326")
    far = gpd.GeoSeries(gpd.points_from_xy([5_000], [400_000]), crs=CRS).to_crs("EPSG:4326")
    near = gpd.GeoSeries(gpd.points_from_xy([5_000], [60_000]), crs=CRS).to_crs("EPSG:4326")
    path = tmp_path / "depots.csv"
    path.write_text(
        "site,name,lon,lat\n"
        f"A,in,{inside.x[0]},{inside.y[0]}\n"
        f"B,just outside,{near.x[0]},{near.y[0]}\n"
        f"C,far,{far.x[0]},{far.y[0]}\n"
    )
    sites = read_depots(path, CRS)
    with pytest.raises(InputError, match="outside the region") as info:
        choose_depots(units, sites, k=1, reach_km=60)
    assert info.value.file == str(path)
    assert info.value.row == 3
    # B lies 50 km outside the units, within the 60 km reach: allowed
    out = choose_depots(units, sites.drop(index="C"), k=2, reach_km=60)
    assert set(out.index) == {"A", "B"}


def test_geographic_crs_is_refused():
    units, sites = _line_instance()
    with pytest.raises(InputError, match="projected CRS in metres"):
        choose_depots(units.to_crs("EPSG:4326"), sites, k=1, reach_km=60)


def test_depots_leave_inputs_alone():
    units, sites = _line_instance()
    u, s = units.copy(), sites.copy()
    choose_depots(units, sites, k=2, reach_km=60)
    pd.testing.assert_frame_equal(units, u)
    pd.testing.assert_frame_equal(sites, s)


# --- properties ------------------------------------------------------------------------------
@st.composite
def _instances(draw):
    n_units = draw(st.integers(1, 12))
    n_sites = draw(st.integers(1, 6))
    seed = draw(st.integers(0, 2**32 - 1))
    rng = np.random.default_rng(seed)
    xy = rng.uniform(0, 200_000, size=(n_units, 2))
    units = gpd.GeoDataFrame(
        {
            "probability": rng.uniform(0, 1, n_units),
            "population": rng.integers(0, 50_000, n_units),
        },
        geometry=[box(x - 2_000, y - 2_000, x + 2_000, y + 2_000) for x, y in xy],
        index=pd.Index([f"U{i}" for i in range(n_units)], name="unit_id"),
        crs=CRS,
    )
    # each site within 15 km of some district, so none is outside the region at any reach
    site_xy = xy[rng.integers(0, n_units, n_sites)] + rng.uniform(-10_000, 10_000, (n_sites, 2))
    sites = gpd.GeoDataFrame(
        {"name": [f"s{i}" for i in range(n_sites)], "existing": rng.uniform(size=n_sites) < 0.2},
        geometry=gpd.points_from_xy(site_xy[:, 0], site_xy[:, 1]),
        index=pd.Index([f"S{i}" for i in range(n_sites)], name="site"),
        crs=CRS,
    )
    return units, sites


@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(_instances(), st.floats(20, 150))
def test_covered_weight_grows_with_k(instance, reach):
    units, sites = instance
    total = float((units["probability"] * units["population"]).sum())
    n_new = int((~sites["existing"]).sum())
    previous = -1.0
    for k in range(n_new + 1):
        covered = choose_depots(units, sites, k=k, reach_km=reach)["covered_weight"].sum()
        assert covered >= previous - 1e-6 * max(total, 1.0)
        assert covered <= total * (1 + 1e-9) + 1e-9
        previous = covered


# --- distance along the graph (checked against networkx in tests/reference) ------------------
def _line_graph(units):
    from marchland.graph import BorderGraph

    ids = list(units.index)
    pairs = [(a, b) for a, b in zip(ids[:-1], ids[1:], strict=True) if (a, b) != ("U1", "U2")]
    edges = pd.DataFrame(
        {
            "focal": [a for a, _ in pairs] + [b for _, b in pairs],
            "neighbor": [b for _, b in pairs] + [a for a, _ in pairs],
            "shared_m": 1.0,
            "gap_m": 0.0,
            "cross_border": False,
            "kind": "shared-boundary",
        }
    )
    return BorderGraph(edges, units.index)


def test_graph_distance_goes_round_a_gap():
    units, sites = _line_instance()
    graph = _line_graph(units)  # U1 and U2 not linked: no way between the two halves
    out = choose_depots(units, sites, k=0, reach_km=60, distance="graph", graph=graph)
    assert out.loc["S0", "distance"] == "graph"
    assign = assign_depots(units, out, graph=graph)
    assert assign.loc["U1", "distance_km"] == pytest.approx(50.0)
    assert np.isinf(assign.loc["U2", "distance_km"]) and not assign.loc["U2", "covered"]
    # the same graph as a plain libpysal Graph gives the same answer
    out2 = choose_depots(units, sites, k=0, reach_km=60, distance="graph", graph=graph.graph)
    assert out2["covered_weight"].tolist() == out["covered_weight"].tolist()


def test_graph_distance_bad_input():
    units, sites = _line_instance()
    with pytest.raises(InputError, match="one of"):
        choose_depots(units, sites, k=1, reach_km=60, distance="road")
    with pytest.raises(InputError, match="graph="):
        choose_depots(units, sites, k=1, reach_km=60, distance="graph")
    graph = _line_graph(units)
    with pytest.raises(InputError, match="not in the units table"):
        choose_depots(units.iloc[1:], sites, k=1, reach_km=60, distance="graph", graph=graph)


def test_reach_areas():
    units, sites = _line_instance()
    out = choose_depots(units, sites, k=1, reach_km=60)
    areas = reach_areas(out)
    assert list(areas.index) == list(out.index)
    # every centre assigned as covered lies inside its depot's circle
    assign = assign_depots(units, out)
    for unit, row in assign[assign["covered"]].iterrows():
        assert areas.geometry[row["depot"]].contains(units.geometry[unit].centroid)


@pytest.mark.parametrize("reader", [read_supply_items, lambda p: read_depots(p, CRS)])
def test_unreadable_tables(tmp_path, reader):
    empty = tmp_path / "empty.csv"
    empty.write_text("")
    with pytest.raises(InputError) as info:
        reader(empty)
    assert info.value.file == str(empty)
    with pytest.raises(InputError, match="cannot read"):
        reader(tmp_path / "missing.csv")


def test_plan_from_single_rate_and_note(tmp_path):
    items = read_supply_items(io.StringIO(ITEMS_CSV))
    plan = SupplyPlan.from_config({"items": items, "planning_attack_rate": 0.004})
    assert plan.attack_rate_low == plan.attack_rate_high == 0.004
    # the note rides along with the items table read by read_supply_items
    assert plan.note == "Example values for the test, not guidance."


def test_depot_without_id(tmp_path):
    path = tmp_path / "depots.csv"
    path.write_text(DEPOTS_CSV + " ,Nameless,10,52,no\n")
    with pytest.raises(InputError, match="needs an id") as info:
        read_depots(path, CRS)
    assert (info.value.row, info.value.column) == (4, "site")


# --- the demo scenario -----------------------------------------------------------------------
@pytest.fixture(scope="module")
def demo():
    import warnings

    from marchland.demo import scenario_path
    from marchland.pack.region import open_region
    from marchland.risk.score import border_risk

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        region = open_region(scenario_path())
    cfg = region.config
    as_of = pd.Timestamp("2026-10-31") + pd.Timedelta(days=cfg.region.as_of_lag_days)
    risk = border_risk(
        region.counts, region.units, region.graph, as_of=as_of, horizon_weeks=cfg.risk.horizon_weeks
    )
    plan = SupplyPlan.from_config(cfg.supplies)
    sites = read_depots(cfg.supplies.depots, region.units.crs)
    return region, risk, plan, sites


def test_demo_priorities(demo):
    region, risk, plan, _ = demo
    assert "not guidance" in plan.note
    pri = prioritise(risk, region.units, plan=plan)
    assert set(pri.index) == set(risk.index) and pri["rank"].is_monotonic_increasing
    # the quantities again, straight from the CSV with plain pandas and the stated formula
    raw = pd.read_csv(region.config.supplies.items, comment="#")
    cases = region.units["population"].reindex(pri.index) * plan.attack_rate_mid
    for rec in raw.itertuples():
        share = plan.severe_share if rec.basis == "severe" else 1.0
        want = np.ceil(np.round(cases * share * rec.per_case * (1 + rec.buffer_share), 9))
        assert pri[rec.item].astype(float).tolist() == want.tolist()
    by_country = totals(pri, plan=plan)
    assert by_country["units"].sum() == len(pri)
    for name in plan.item_names:
        assert by_country[name].sum() == pri[name].sum()
        assert (by_country[f"{name}_risk_weighted"] <= by_country[name]).all()


def test_demo_depots_against_exhaustive_search(demo):
    from itertools import combinations

    from scipy.spatial.distance import cdist

    region, risk, plan, sites = demo
    cfg = region.config.supplies
    pri = prioritise(risk, region.units, plan=plan)
    out = choose_depots(pri, sites, k=cfg.k, reach_km=cfg.reach_km, units=region.units)
    existing = sites["existing"].to_numpy()
    assert len(out) == existing.sum() + cfg.k and out["existing"].sum() == existing.sum()
    centres = region.units.geometry.reindex(pri.index).centroid
    within = (
        cdist(
            np.column_stack([centres.x, centres.y]),
            np.column_stack([sites.geometry.x, sites.geometry.y]),
        )
        / 1000
        <= cfg.reach_km
    )
    w = (pri["probability"] * pri["population"]).to_numpy()
    fixed = list(np.flatnonzero(existing))
    free = list(np.flatnonzero(~existing))
    best = max(
        float(w[within[:, fixed + list(extra)].any(axis=1)].sum())
        for extra in combinations(free, cfg.k)
    )
    assert out["covered_weight"].sum() == pytest.approx(best, rel=1e-9)
    assign = assign_depots(pri, out, units=region.units)
    assert assign.loc[assign["covered"], "weight"].sum() == pytest.approx(best, rel=1e-9)
    catchments = totals(pri, plan=plan, by=assign["depot"])
    assert catchments["units"].sum() == len(pri)
    # along the graph no district is nearer than in a straight line, so coverage cannot grow
    along = choose_depots(
        pri,
        sites,
        k=cfg.k,
        reach_km=cfg.reach_km,
        units=region.units,
        distance="graph",
        graph=region.graph,
    )
    assert along["covered_weight"].sum() <= best * (1 + 1e-9)
    every = sites.assign(reach_km=cfg.reach_km)
    straight = assign_depots(pri, every, units=region.units)
    graph = assign_depots(pri, every, units=region.units, distance="graph", graph=region.graph)
    assert (graph["distance_km"] >= straight["distance_km"] - 1e-6).all()


def test_demo_k_zero_uses_existing_depots_only(demo):
    region, risk, plan, sites = demo
    pri = prioritise(risk, region.units, plan=plan)
    out = choose_depots(pri, sites, k=0, reach_km=120, units=region.units)
    assert set(out.index) == set(sites.index[sites["existing"]])
    assign = assign_depots(pri, out, units=region.units)
    assert set(assign["depot"]) <= set(out.index)


def test_site_geodataframe_checks():
    units, sites = _line_instance()
    as_text = sites.assign(existing=["yes", "no", "", "no"])
    out = choose_depots(units, as_text, k=1, reach_km=60)
    assert set(out.index) == {"S0", "S2"}
    with pytest.raises(InputError) as info:
        choose_depots(units, sites.assign(existing=["yes", "maybe", "", ""]), k=1, reach_km=60)
    assert (info.value.row, info.value.column) == (2, "existing")
    areas = sites.set_geometry(sites.buffer(100.0))
    with pytest.raises(InputError, match="points"):
        choose_depots(units, areas, k=1, reach_km=60)
    # sites in another CRS are reprojected, not refused
    out = choose_depots(units, sites.to_crs("EPSG:4326"), k=1, reach_km=60)
    assert set(out.index) == {"S0", "S2"}
