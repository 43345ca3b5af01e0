"""Unit tests for marchland.spread.arrival on small invented data.

Covered: the as-of view (a retrospective correction moves a first case), missing weeks are not
zeros (confirmation rule and quiet periods), re-introduction episodes, never-reporting units,
shuffled row order, string ids, inputs left unchanged, and clear errors for bad options.
Outside checks (pointpats, networkx, statsmodels, the demo truth) are in tests/reference/.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from marchland.spread import affected_episodes, first_cases

W0 = pd.Timestamp("2026-03-02")  # a Monday


def _counts(rows):
    """rows: (unit, week_number, cases, received_offset_days)."""
    df = pd.DataFrame(rows, columns=["unit_id", "w", "cases", "lag"])
    week = W0 + pd.to_timedelta(df["w"] * 7, unit="D")
    return pd.DataFrame(
        {
            "unit_id": df["unit_id"],
            "week": week,
            "cases": pd.array(df["cases"], dtype="Int64"),
            "deaths": pd.array([pd.NA] * len(df), dtype="Int64"),
            "received": week + pd.to_timedelta(df["lag"], unit="D"),
            "source": "test.csv",
            "row": np.arange(1, len(df) + 1),
        }
    )


def _wk(n):
    return W0 + pd.Timedelta(days=7 * n)


def test_first_reported_week_and_never_affected():
    c = _counts([("a", 0, 0, 7), ("a", 1, 3, 7), ("b", 2, 1, 7), ("c", 0, 0, 7)])
    got = first_cases(c)
    assert got.name == "first_week"
    assert got.index.name == "unit_id"
    assert got["a"] == _wk(1) and got["b"] == _wk(2)
    assert pd.isna(got["c"])


def test_retrospective_correction_moves_first_case():
    # Week 1 first reported as 0 (received day 8) and corrected to 4 on day 30.
    c = _counts([("a", 1, 0, 8), ("a", 2, 2, 8), ("a", 1, 4, 30)])
    assert first_cases(c, as_of=_wk(1) + pd.Timedelta(days=20))["a"] == _wk(2)
    assert first_cases(c)["a"] == _wk(1)
    # A correction downwards moves it later.
    c2 = _counts([("a", 1, 4, 8), ("a", 2, 2, 8), ("a", 1, 0, 30)])
    assert first_cases(c2)["a"] == _wk(2)


def test_as_of_ignores_reports_not_yet_received():
    c = _counts([("a", 1, 5, 10)])
    assert pd.isna(first_cases(c, as_of=_wk(1) + pd.Timedelta(days=9))["a"])
    assert first_cases(c, as_of=_wk(1) + pd.Timedelta(days=10))["a"] == _wk(1)


def test_min_cases_threshold():
    c = _counts([("a", 0, 1, 7), ("a", 1, 2, 7), ("a", 2, 5, 7)])
    assert first_cases(c, min_cases=2)["a"] == _wk(1)
    assert first_cases(c, min_cases=5)["a"] == _wk(2)
    assert pd.isna(first_cases(c, min_cases=6)["a"])


def test_confirmation_rule_counts_calendar_weeks_not_rows():
    # Positive in weeks 0 and 5 with weeks 1-4 missing: consecutive rows, but not within 3
    # calendar weeks, so (2, 3) does not confirm week 0.
    c = _counts([("a", 0, 2, 7), ("a", 5, 2, 7), ("a", 6, 1, 7)])
    assert first_cases(c)["a"] == _wk(0)
    assert first_cases(c, confirm=(2, 3))["a"] == _wk(5)


def test_confirmation_rule_missing_week_inside_window_is_not_zero_nor_case():
    # Weeks 0 and 2 positive, week 1 missing: 2 of 3 -> confirmed at week 0.
    c = _counts([("a", 0, 1, 7), ("a", 2, 1, 7)])
    assert first_cases(c, confirm=(2, 3))["a"] == _wk(0)
    # 3 of 3 needs week 1 reported positive: not confirmed.
    assert pd.isna(first_cases(c, confirm=(3, 3))["a"])


def test_confirmation_waits_for_reports():
    c = _counts([("a", 0, 1, 7), ("a", 1, 1, 20)])
    assert pd.isna(first_cases(c, confirm=(2, 2), as_of=_wk(0) + pd.Timedelta(days=10))["a"])
    assert first_cases(c, confirm=(2, 2))["a"] == _wk(0)


def test_units_argument_adds_never_reporting_units():
    c = _counts([("b", 0, 1, 7)])
    got = first_cases(c, units=pd.Index(["z", "b"]))
    assert got.index.tolist() == ["z", "b"]
    assert pd.isna(got["z"]) and got["b"] == _wk(0)


def test_shuffled_rows_same_result_and_input_unchanged():
    rows = [("a", w, int(w % 3 == 2), 7) for w in range(10)]
    rows += [("b", w, int(w > 4), 7) for w in range(10)]
    c = _counts(rows)
    before = c.copy()
    got = first_cases(c)
    shuffled = c.sample(frac=1.0, random_state=np.random.default_rng(3).integers(1 << 30))
    pd.testing.assert_series_equal(got, first_cases(shuffled))
    pd.testing.assert_frame_equal(c, before)
    assert got["a"] == _wk(2) and got["b"] == _wk(5)


def test_episodes_need_reported_quiet_weeks():
    rows = [("a", 0, 3, 7)] + [("a", w, 0, 7) for w in range(1, 5)] + [("a", 5, 1, 7)]
    c = _counts(rows)
    ep = affected_episodes(c, reintroduction_weeks=4)
    assert ep["start"].tolist() == [_wk(0), _wk(5)]
    assert ep["episode"].tolist() == [1, 2]
    assert ep["cases"].tolist() == [3, 1]
    assert affected_episodes(c, reintroduction_weeks=5)["episode"].tolist() == [1]
    # The same gap unreported is not a quiet period.
    silent = c[c["week"].isin([_wk(0), _wk(5)])]
    assert len(affected_episodes(silent, reintroduction_weeks=1)) == 1
    # first_cases with the rule returns the start of the latest episode.
    assert first_cases(c, reintroduction_weeks=4)["a"] == _wk(5)
    assert first_cases(c)["a"] == _wk(0)


def test_episodes_with_confirmation_start_at_first_confirmed_week():
    rows = [("a", 0, 1, 7), ("a", 1, 0, 7), ("a", 2, 0, 7), ("a", 3, 2, 7), ("a", 4, 2, 7)]
    ep = affected_episodes(_counts(rows), confirm=(2, 2), reintroduction_weeks=4)
    assert ep["start"].tolist() == [_wk(3)]
    assert ep["end"].tolist() == [_wk(4)]


def test_episodes_several_units_vectorised():
    rows = []
    for u, gap in [("a", 2), ("b", 6), ("c", 0)]:
        rows.append((u, 0, 1, 7))
        rows += [(u, 1 + k, 0, 7) for k in range(gap)]
        rows.append((u, 1 + gap, 1, 7))
    ep = affected_episodes(_counts(rows), reintroduction_weeks=3)
    assert ep.groupby("unit_id").size().to_dict() == {"a": 1, "b": 2, "c": 1}


@pytest.mark.parametrize(
    ("kwargs", "match"),
    [
        ({"min_cases": 0}, "min_cases"),
        ({"min_cases": 1.5}, "min_cases"),
        ({"confirm": (3, 2)}, "confirm"),
        ({"confirm": "2 of 3"}, "confirm"),
        ({"confirm": "23"}, "confirm"),
        ({"reintroduction_weeks": 0}, "reintroduction_weeks"),
    ],
)
def test_bad_options_raise_clear_errors(kwargs, match):
    c = _counts([("a", 0, 1, 7)])
    with pytest.raises(ValueError, match=match):
        first_cases(c, **kwargs)


def test_weeks_from_two_calendars_are_refused():
    c = _counts([("a", 0, 1, 7)])
    extra = c.assign(week=c["week"] - pd.Timedelta(days=1), unit_id="b")
    with pytest.raises(ValueError, match="whole weeks"):
        first_cases(pd.concat([c, extra], ignore_index=True))


def test_numpy_integers_are_accepted():
    c = _counts([("a", 0, 1, 7), ("a", 1, 2, 7)])
    assert first_cases(c, min_cases=np.int64(2))["a"] == _wk(1)


def test_empty_counts():
    c = _counts([("a", 0, 1, 7)]).iloc[:0]
    assert len(first_cases(c)) == 0
    assert len(affected_episodes(c)) == 0


# --- fronts, introductions, corridor, velocity, knox on small invented layouts ------------------
import geopandas as gpd  # noqa: E402
from libpysal.graph import Graph  # noqa: E402
from shapely.geometry import box  # noqa: E402

from marchland.errors import DataWarning, InputError  # noqa: E402
from marchland.graph import BorderGraph  # noqa: E402
from marchland.spread import (  # noqa: E402
    corridor,
    cross_border_introductions,
    front_outlines,
    introductions_by_border,
    knox,
    spread_fronts,
    spread_velocity,
)
from marchland.spread._velocity import Velocity  # noqa: E402


def _strip(n=6, countries=("AAA", "AAA", "AAA", "BBB", "BBB", "CCC"), cell=10_000.0):
    """A row of n square units, each touching the next; ids like 'AAA-01'."""
    ids = [f"{countries[i]}-{i + 1:02d}" for i in range(n)]
    units = gpd.GeoDataFrame(
        {"country": list(countries[:n])},
        geometry=[box(i * cell, 0, (i + 1) * cell, cell) for i in range(n)],
        index=pd.Index(ids, name="unit_id"),
        crs="EPSG:3035",
    )
    focal = ids[:-1] + ids[1:]
    neighbor = ids[1:] + ids[:-1]
    g = Graph.from_adjacency(pd.DataFrame({"focal": focal, "neighbor": neighbor, "weight": 1.0}))
    return units, g


def _graph_kinds(g, units):
    return {
        "libpysal": g,
        "border": BorderGraph.from_graph(g, countries=units["country"]),
    }


def _first(units, weeks):
    wk = [W0 + pd.Timedelta(days=7 * w) if w is not None else pd.NaT for w in weeks]
    return pd.Series(pd.to_datetime(wk), index=units.index, name="first_week")


@pytest.mark.parametrize("kind", ["libpysal", "border"])
def test_fronts_hops_months_and_earlier_neighbours(kind):
    units, g = _strip()
    graph = _graph_kinds(g, units)[kind]
    first = _first(units, [0, 1, 1, 5, None, 2])
    f = spread_fronts(first, graph)
    assert f.index.tolist() == units.index.tolist()
    assert f["hops"].tolist() == [0, 1, 2, 3, 4, 5]
    assert f["weeks_since_start"].tolist()[:4] == [0, 1, 1, 5]
    assert pd.isna(f["weeks_since_start"].iloc[4])
    assert f["origin"].tolist() == [True] + [False] * 5
    assert f["earlier_neighbours"].tolist()[:4] == [0, 1, 0, 1]
    assert pd.isna(f["earlier_neighbours"].iloc[4])
    # W0 = 2026-03-02 (Mon): week 5 starts 2026-04-06 -> April; the week of 2026-03-30 has its
    # fourth day (2 April) in April too.
    assert f["month"].tolist()[:4] == ["2026-03"] * 3 + ["2026-04"]
    assert f["epi_week"].tolist()[:4] == ["2026-W10", "2026-W11", "2026-W11", "2026-W15"]


def test_epi_week_label_follows_a_sunday_calendar():
    units, g = _strip(2, countries=("AAA", "AAA"))
    # Sundays: epiweeks.Week.fromdate gives 202601 for 2026-01-04 and 202553 for 2025-12-28.
    first = pd.Series(pd.to_datetime(["2026-01-04", "2025-12-28"]), index=units.index)
    assert spread_fronts(first, g)["epi_week"].tolist() == ["2026-W01", "2025-W53"]


def test_month_of_week_uses_the_fourth_day():
    units, g = _strip(2, countries=("AAA", "AAA"))
    first = pd.Series(pd.to_datetime(["2026-03-30", "2026-03-23"]), index=units.index)
    assert spread_fronts(first, g)["month"].tolist() == ["2026-04", "2026-03"]


def test_fronts_warn_about_affected_units_outside_the_graph():
    units, g = _strip(3, countries=("AAA",) * 3)
    first = pd.concat([_first(units, [0, 1, 2]), pd.Series({"ZZZ-99": W0})])
    with pytest.warns(DataWarning, match="not in the graph"):
        f = spread_fronts(first, g)
    assert "ZZZ-99" not in f.index


def test_front_outlines_dissolve_by_month_and_week():
    units, g = _strip()
    first = _first(units, [0, 1, 1, 5, None, 6])
    fronts = spread_fronts(first, g)
    by_month = front_outlines(fronts, units)
    assert by_month.index.tolist() == ["2026-03", "2026-04"]
    assert by_month["n_new"].tolist() == [3, 2]
    assert by_month["n_affected"].tolist() == [3, 5]
    assert by_month.crs == units.crs
    # Three adjacent squares dissolve into one rectangle of three cells.
    assert by_month.geometry.iloc[0].area == pytest.approx(3 * 1e8)
    assert by_month.geometry.iloc[0].geom_type == "Polygon"
    by_week = front_outlines(fronts, units, period="week")
    assert by_week["n_new"].tolist() == [1, 2, 1, 1]
    assert by_week.index[0] == "2026-03-02"
    with pytest.raises(ValueError, match="period"):
        front_outlines(fronts, units, period="year")


@pytest.mark.parametrize("kind", ["libpysal", "border"])
def test_cross_border_introductions(kind):
    units, g = _strip()
    graph = _graph_kinds(g, units)[kind]
    # AAA-03 (wk 2) -> BBB-04 (wk 4): probable. BBB-05 (wk 4) has a same-week domestic
    # neighbour only and an earlier? no: BBB-04 same week -> not domestic-earlier; AAA not
    # adjacent -> no foreign source -> not listed. CCC-06 (wk 6) has BBB-05 (wk 4) -> listed.
    first = _first(units, [0, 1, 2, 4, 4, 6])
    cbi = cross_border_introductions(first, graph, countries=units["country"])
    assert cbi.index.tolist() == ["BBB-04", "CCC-06"]
    assert cbi.loc["BBB-04", "sources"] == "AAA-03"
    assert cbi.loc["BBB-04", "lag_weeks"] == 2
    assert cbi.loc["CCC-06", "source_countries"] == "BBB"
    assert (cbi["evidence"] == "probable").all()
    by = introductions_by_border(cbi)
    assert by[["from_country", "to_country", "n_units"]].values.tolist() == [
        ["AAA", "BBB", 1],
        ["BBB", "CCC", 1],
    ]


def test_cross_border_needs_domestic_neighbour_not_earlier():
    units, g = _strip()
    # BBB-04 has AAA-03 (wk 1) and domestic BBB-05 (wk 0) both earlier -> not listed.
    first = _first(units, [0, 0, 1, 3, 0, 9])
    cbi = cross_border_introductions(first, g, countries=units["country"])
    assert "BBB-04" not in cbi.index
    # same-week foreign neighbour does not count.
    first = _first(units, [0, 1, 2, 2, None, None])
    assert cross_border_introductions(first, g, countries=units["country"]).empty


def test_cross_border_plain_graph_needs_countries():
    units, g = _strip()
    with pytest.raises(ValueError, match="countries"):
        cross_border_introductions(_first(units, [0, 1, 2, 3, 4, 5]), g)


def test_cross_border_border_graph_labels_from_its_countries_or_id_prefix():
    units, g = _strip()
    bg = BorderGraph.from_graph(g, countries=units["country"])
    first = _first(units, [0, 1, 2, 3, 4, 5])
    cbi = cross_border_introductions(first, bg)
    assert cbi["country"].tolist() == ["BBB", "CCC"]
    bare = BorderGraph(edges=bg.edges, ids=bg.ids)  # flags kept, no country table
    assert cross_border_introductions(first, bare)["source_countries"].tolist() == ["AAA", "BBB"]


@pytest.mark.parametrize("kind", ["libpysal", "border"])
def test_corridor_follows_time_and_reports_distance(kind):
    units, g = _strip()
    graph = _graph_kinds(g, units)[kind]
    first = _first(units, [0, 1, 1, 3, 3, 7])
    path = corridor(first, graph, "AAA-01", "CCC-06", units=units)
    assert path.index.tolist() == units.index.tolist()
    assert path["hop"].tolist() == list(range(6))
    assert path["km_step"].tolist() == pytest.approx([0, 10, 10, 10, 10, 10])
    assert path["km"].iloc[-1] == pytest.approx(50.0)
    assert path["weeks_since_source"].tolist() == [0, 1, 1, 3, 3, 7]
    if kind == "border":
        assert path["cross_border"].tolist() == [False, False, False, True, False, True]
    assert pd.isna(path["kind"].iloc[0])
    assert (path["kind"].iloc[1:] == "shared-boundary").all()


def test_corridor_prefers_fewest_hops_then_shortest():
    # A 2 x 3 grid: from a0 to b2 several 3-hop paths; the time rule removes some.
    ids = ["a0", "a1", "a2", "b0", "b1", "b2"]
    geoms = [box(x, y, x + 1, y + 1) for y in (0, 1) for x in (0, 1, 2)]
    units = gpd.GeoDataFrame(geometry=geoms, index=pd.Index(ids, name="unit_id"), crs="EPSG:3035")
    g = Graph.build_contiguity(units, rook=True)
    first = _first(units, [0, 5, 6, 1, 2, 3])  # the lower row is early, the upper row late
    path = corridor(first, g, "a0", "b2", units=units)
    assert path.index.tolist() == ["a0", "b0", "b1", "b2"]


def test_corridor_errors_are_clear():
    units, g = _strip()
    first = _first(units, [0, 1, 0, 3, None, 7])
    with pytest.raises(InputError, match="no first case"):
        corridor(first, g, "AAA-01", "BBB-05")
    with pytest.raises(InputError, match="not in the graph"):
        corridor(first, g, "AAA-01", "XXX-01")
    with pytest.raises(InputError, match="before source"):
        corridor(first, g, "BBB-04", "AAA-01")
    with pytest.raises(InputError, match="no time-respecting path"):
        corridor(first, g, "AAA-02", "CCC-06")


def test_velocity_result_shape_and_groups():
    units, _ = _strip(12, countries=("AAA",) * 6 + ("BBB",) * 6)
    first = _first(units, [i // 2 for i in range(12)])  # 20 km per week eastwards
    v = spread_velocity(first, units, groups="country", seed=1)
    assert isinstance(v, Velocity)
    assert v.by_method.columns.tolist() == ["km_per_week", "lower", "upper", "n_units", "note"]
    assert v.by_method.index.name == "method"
    assert set(v.by_method.index) == {"trend_surface", "distance_regression"}
    assert v.by_group.index.names == ["group", "method"]
    assert v.by_group.columns.tolist() == v.by_method.columns.tolist()
    assert set(v.by_group.index.get_level_values("group")) == {"AAA", "BBB"}
    assert v.by_group.loc[("AAA", "distance_regression"), "n_units"] == 6
    corridors = spread_velocity(first, units, groups={"east": units.index[6:]}, seed=1)
    assert corridors.by_group.index.get_level_values("group").unique().tolist() == ["east"]
    with pytest.raises(AttributeError):
        v.km_per_week = 3.0  # frozen


def _square(n=8, cell=10_000.0):
    xs, ys = np.meshgrid(np.arange(n), np.arange(n))
    geoms = [
        box(x * cell, y * cell, (x + 1) * cell, (y + 1) * cell)
        for x, y in zip(xs.ravel(), ys.ravel(), strict=True)
    ]
    idx = pd.Index([f"AAA-{i:02d}" for i in range(n * n)], name="unit_id")
    return gpd.GeoDataFrame(geometry=geoms, index=idx, crs="EPSG:3035"), xs.ravel(), ys.ravel()


def test_velocity_same_seed_same_interval_and_inputs_unchanged():
    units, xs, ys = _square()
    rng = np.random.default_rng(0)
    first = _first(units, list(xs + ys + rng.integers(0, 2, len(xs))))
    before = first.copy()
    a = spread_velocity(first, units, seed=5)
    b = spread_velocity(first, units, seed=5)
    assert np.isfinite(a.lower) and (a.lower, a.upper) == (b.lower, b.upper)
    c = spread_velocity(first, units, seed=6)
    assert c.lower != a.lower  # the seed matters
    pd.testing.assert_series_equal(first, before)


def test_velocity_units_on_a_line_give_no_surface_but_a_distance_speed():
    units, _ = _strip(12, countries=("AAA",) * 12)
    first = _first(units, [i // 2 for i in range(12)])  # 20 km per week eastwards
    v = spread_velocity(first, units)
    assert np.isnan(v.km_per_week)
    assert "line" in v.by_method.loc["trend_surface", "note"]
    assert v.by_method.loc["distance_regression", "km_per_week"] == pytest.approx(20, rel=0.1)


def test_velocity_with_too_few_units_is_nan_with_reason():
    units, _ = _strip(3, countries=("AAA",) * 3)
    v = spread_velocity(_first(units, [0, 1, None]), units)
    assert np.isnan(v.km_per_week)
    assert "at least" in v.by_method.loc["trend_surface", "note"]


def test_velocity_flat_or_backwards_slope_gives_no_speed():
    units, _ = _strip(8, countries=("AAA",) * 8)
    first = _first(units, [0, 3, 3, 3, 2, 2, 1, 1])
    v = spread_velocity(first, units, method="distance_regression", origin="AAA-01")
    assert np.isnan(v.km_per_week)
    assert "does not get later" in v.by_method.loc["distance_regression", "note"]


def test_velocity_needs_projected_crs():
    units, _ = _strip(6)
    first = _first(units, range(6))
    with pytest.raises(ValueError, match="projected CRS"):
        spread_velocity(first, units.to_crs("EPSG:4326"))
    with pytest.raises(ValueError, match="method"):
        spread_velocity(first, units, method="fastest")


def test_knox_detects_clustered_space_time_and_not_random():
    rng = np.random.default_rng(1)
    n = 120
    xy = rng.uniform(0, 100, (n, 2))
    t_random = rng.uniform(0, 100, n)
    t_local = xy[:, 0] + rng.normal(0, 2, n)  # time follows space: a travelling front
    r0 = knox(xy, t_random, distance=10, interval=5, permutations=199, seed=2)
    r1 = knox(xy, t_local, distance=10, interval=5, permutations=199, seed=2)
    assert r1.p_sim <= 0.01 and r1.p_poisson < 0.001
    assert r0.p_sim > 0.01
    assert r1.statistic > r1.expected


def test_knox_bad_input():
    with pytest.raises(ValueError, match="at least 3"):
        knox(np.zeros((2, 2)), [0, 1], distance=1, interval=1)
    with pytest.raises(ValueError, match="n x 2"):
        knox(np.zeros((4, 3)), [0, 1, 2, 3], distance=1, interval=1)
    with pytest.raises(ValueError, match="missing"):
        knox(np.zeros((3, 2)), [0, np.nan, 1], distance=1, interval=1)
    with pytest.raises(ValueError, match="Timedelta"):
        knox(np.zeros((3, 2)), [0, 1, 2], distance=1, interval=pd.Timedelta(days=7))
    dates = pd.to_datetime(["2026-03-02", None, "2026-03-09"])
    with pytest.raises(ValueError, match="missing"):
        knox(np.zeros((3, 2)), dates, distance=1, interval=pd.Timedelta(days=7))


# --- property: the vectorised rules equal a plain reading of their definitions ----------------
from hypothesis import given, settings  # noqa: E402
from hypothesis import strategies as st  # noqa: E402


def _naive_first(view, min_cases, confirm):
    """Per unit, walk the weeks in order and apply the documented rule literally."""
    out = {}
    for unit, g in view.groupby("unit_id"):
        cases = dict(zip(g["week"], g["cases"], strict=True))
        found = pd.NaT
        for w in sorted(cases):
            if pd.isna(cases[w]) or cases[w] < min_cases:
                continue
            if confirm is None:
                found = w
                break
            k, n = confirm
            window = [w + pd.Timedelta(days=7 * d) for d in range(n)]
            hits = sum(
                1 for x in window if x in cases and pd.notna(cases[x]) and cases[x] >= min_cases
            )
            if hits >= k:
                found = w
                break
        out[unit] = found
    return pd.Series(out, dtype="datetime64[ns]")


_rows = st.lists(
    st.tuples(
        st.sampled_from(["a", "b", "c"]), st.integers(0, 9), st.integers(0, 3), st.integers(1, 40)
    ),
    min_size=1,
    max_size=40,
)


@settings(max_examples=60, deadline=None)
@given(
    rows=_rows,
    k=st.integers(1, 3),
    extra=st.integers(0, 2),
    min_cases=st.integers(1, 2),
    as_of_day=st.integers(0, 120),
)
def test_first_cases_equal_a_literal_reading_of_the_rule(rows, k, extra, min_cases, as_of_day):
    from marchland.inputs.reports import as_of

    c = _counts(rows)
    date = W0 + pd.Timedelta(days=as_of_day)
    confirm = None if extra == 0 and k == 1 else (k, k + extra)
    got = first_cases(c, min_cases=min_cases, confirm=confirm, as_of=date)
    want = _naive_first(as_of(c, date), min_cases, confirm).reindex(got.index)
    assert got.isna().tolist() == want.isna().tolist()
    assert (got.dropna() == want.dropna()).all()


def _naive_episode_starts(view, quiet_weeks):
    """Per unit, walk the weeks in order: a positive week after >= quiet_weeks reported zero
    weeks since the previous positive week opens a new episode."""
    out = {}
    for unit, g in view.sort_values("week").groupby("unit_id"):
        starts, quiet, seen = [], 0, False
        for w, cases in zip(g["week"], g["cases"], strict=True):
            if cases >= 1:
                if not seen or quiet >= quiet_weeks:
                    starts.append(w)
                seen, quiet = True, 0
            else:
                quiet += 1
        if starts:
            out[unit] = starts
    return out


@settings(max_examples=60, deadline=None)
@given(rows=_rows, quiet_weeks=st.integers(1, 4))
def test_episodes_equal_a_literal_reading_of_the_rule(rows, quiet_weeks):
    from marchland.inputs.reports import as_of

    c = _counts(rows)
    ep = affected_episodes(c, reintroduction_weeks=quiet_weeks)
    got = {u: g["start"].tolist() for u, g in ep.groupby("unit_id")}
    assert got == _naive_episode_starts(as_of(c), quiet_weeks)


def test_nothing_affected_yet_gives_empty_results_not_errors():
    units, g = _strip()
    first = _first(units, [None] * 6)
    f = spread_fronts(first, g)
    assert f["hops"].isna().all() and not f["origin"].any()
    assert len(front_outlines(f, units)) == 0
    assert cross_border_introductions(first, g, countries=units["country"]).empty
    assert introductions_by_border(
        cross_border_introductions(first, g, countries=units["country"])
    ).empty
    v = spread_velocity(first, units)
    assert v.n_units == 0 and np.isnan(v.km_per_week)
