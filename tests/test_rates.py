"""Unit and property tests for marchland.stats.rates on small invented data.

Covered: result columns and index, zero counts, zero / missing population, not-reported
(<NA>) counts kept apart from reported zeros, shuffled unit order (rates unchanged), inputs
left unchanged, windowed (DataFrame) input, CFR flags, the window sums of the counts table
(as-of view, complete weeks, month of a week, weeks reported), aggregation from summed counts
(never averaged rates), and clear errors for bad input. Outside checks (published tables,
scipy, statsmodels, esda) are in tests/reference/test_rates_reference.py.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from libpysal.graph import Graph

from marchland.errors import DataWarning, InputError
from marchland.graph import BorderGraph
from marchland.stats import (
    aggregate_rates,
    attack_rates,
    case_fatality,
    eb_standardised,
    smooth_rates,
    window_counts,
)
from marchland.stats._align import unit_positions

IDS = ["TVR-01-01", "TVR-01-02", "OSK-02-01", "OSK-02-02"]


def _series(values, name=None):
    return pd.Series(values, index=pd.Index(IDS, name="unit_id"), name=name)


def test_attack_rate_columns_and_values():
    cases = _series(pd.array([0, 5, 12, pd.NA], dtype="Int64"))
    pop = _series([10_000, 50_000, 0, 8_000])
    got = attack_rates(cases, pop)
    assert list(got.columns) == ["cases", "population", "rate", "lower", "upper"]
    assert got.index.name == "unit_id" and list(got.index) == IDS
    assert got.loc["TVR-01-01", "rate"] == 0.0 and got.loc["TVR-01-01", "lower"] == 0.0
    assert got.loc["TVR-01-01", "upper"] > 0
    assert got.loc["TVR-01-02", "rate"] == pytest.approx(10.0)
    # zero population: no rate; not reported: no rate and the count stays <NA>
    assert np.isnan(got.loc["OSK-02-01", "rate"])
    assert pd.isna(got.loc["OSK-02-02", "cases"]) and np.isnan(got.loc["OSK-02-02", "rate"])
    assert str(got["cases"].dtype) == "Int64"


def test_per_and_conf_options():
    cases, pop = _series([3, 4, 5, 6]), _series([1000.0] * 4)
    base = attack_rates(cases, pop)
    per_k = attack_rates(cases, pop, per=1000)
    np.testing.assert_allclose(per_k["rate"] * 100, base["rate"])
    wide = attack_rates(cases, pop, conf=0.99)
    assert (wide["lower"] < base["lower"]).all() and (wide["upper"] > base["upper"]).all()
    with pytest.raises(ValueError, match="'conf'"):
        attack_rates(cases, pop, conf=95)
    with pytest.raises(ValueError, match="'per'"):
        attack_rates(cases, pop, per=0)


@settings(max_examples=40, deadline=None)
@given(
    st.lists(st.integers(0, 500), min_size=4, max_size=4),
    st.lists(st.integers(1, 10**6), min_size=4, max_size=4),
    st.permutations(range(4)),
)
def test_rates_unchanged_by_reordering_units(cases, pop, order):
    c, p = _series(cases), _series(pop)
    got = attack_rates(c, p)
    shuffled = attack_rates(c.iloc[list(order)], p.iloc[list(reversed(order))])
    pd.testing.assert_frame_equal(shuffled.loc[got.index], got)
    assert (got["lower"] <= got["rate"]).all() and (got["rate"] <= got["upper"]).all()


def test_inputs_not_changed():
    cases, pop = _series([1, 2, 3, 4]), _series([10.0, 20, 30, 40])
    c0, p0 = cases.copy(), pop.copy()
    attack_rates(cases, pop)
    smooth_rates(cases, pop)
    case_fatality(_series([0, 1, 1, 2]), cases)
    pd.testing.assert_series_equal(cases, c0)
    pd.testing.assert_series_equal(pop, p0)


@pytest.mark.parametrize(
    ("cases", "match"),
    [([1, -2, 3, 4], "whole numbers >= 0"), ([1, 2.5, 3, 4], "whole numbers >= 0")],
)
def test_bad_counts_are_input_errors(cases, match):
    with pytest.raises(InputError, match=match) as err:
        attack_rates(_series(cases), _series([100] * 4))
    assert err.value.column == "cases"
    assert "TVR-01-02" in str(err.value)


def test_mismatched_units_are_named():
    cases = _series([1, 2, 3, 4])
    pop = pd.Series([100, 100, 100], index=IDS[:3])
    with pytest.raises(InputError, match="OSK-02-02"):
        attack_rates(cases, pop)
    with pytest.raises(InputError, match="population must be >= 0"):
        attack_rates(cases, _series([100, -1, 100, 100]))
    with pytest.raises(TypeError, match="pandas Series"):
        attack_rates(cases, [1, 2, 3, 4])


def test_windowed_input_gives_window_field_columns():
    pop = _series([1000.0, 2000, 3000, 4000])
    windows = pd.DataFrame(
        {"cumulative": [10, 20, 30, 40], "last_4w": [1, 2, 3, 4]}, index=pop.index
    )
    got = attack_rates(windows, pop)
    assert got.columns.names == ["window", "field"]
    one = got["last_4w"].rename_axis(columns=None)
    pd.testing.assert_frame_equal(one, attack_rates(windows["last_4w"], pop))
    pops = pd.DataFrame({"cumulative": pop, "last_4w": pop * 2})
    got2 = attack_rates(windows, pops)
    np.testing.assert_allclose(got2["last_4w"]["rate"], got["last_4w"]["rate"] / 2)


def test_case_fatality_flags_and_errors():
    deaths = _series(pd.array([0, 6, 1, pd.NA], dtype="Int64"))
    cases = _series([0, 100, 5, 20])
    got = case_fatality(deaths, cases)
    assert list(got.columns) == [
        "deaths", "cases", "cfr", "lower", "upper", "too_few", "above_threshold",
    ]  # fmt: skip
    assert np.isnan(got.loc["TVR-01-01", "cfr"]) and bool(got.loc["TVR-01-01", "too_few"])
    assert got.loc["TVR-01-02", "cfr"] == pytest.approx(0.06)
    assert bool(got.loc["TVR-01-02", "above_threshold"])  # exact lower limit 0.022 > 0.01
    # 3 of 100: point estimate above 1%, but the interval reaches below it -> not flagged
    three = case_fatality(_series([0, 3, 0, 0]), _series([1, 100, 1, 1]))
    assert not bool(three.loc["TVR-01-02", "above_threshold"])
    wil = case_fatality(deaths, cases, method="wilson")
    assert wil.loc["TVR-01-02", "lower"] > got.loc["TVR-01-02", "lower"]
    with pytest.raises(ValueError, match="'method' needs to be one of"):
        case_fatality(deaths, cases, method="jeffreys")
    assert not bool(got.loc["TVR-01-02", "too_few"])
    assert bool(got.loc["OSK-02-01", "too_few"])  # flagged, not hidden
    assert got.loc["OSK-02-01", "cfr"] == pytest.approx(0.2)
    assert pd.isna(got.loc["OSK-02-02", "above_threshold"])
    custom = case_fatality(deaths, cases, min_cases=3, threshold=0.05)
    assert not bool(custom.loc["OSK-02-01", "too_few"])
    assert not bool(custom.loc["TVR-01-02", "above_threshold"])
    with pytest.raises(InputError, match="deaths cannot exceed cases"):
        case_fatality(_series([0, 9, 0, 0]), _series([1, 2, 3, 4]))


W0 = pd.Timestamp("2026-03-02")  # a Monday


def _counts(rows, start=W0):
    """rows: (unit, week_number, cases, deaths, received_offset_days)."""
    df = pd.DataFrame(rows, columns=["unit_id", "w", "cases", "deaths", "lag"])
    week = start + pd.to_timedelta(df["w"] * 7, unit="D")
    return pd.DataFrame(
        {
            "unit_id": df["unit_id"],
            "week": week,
            "cases": pd.array(df["cases"], dtype="Int64"),
            "deaths": pd.array(df["deaths"], dtype="Int64"),
            "received": week + pd.to_timedelta(df["lag"], unit="D"),
            "source": "test.csv",
            "row": np.arange(1, len(df) + 1),
        }
    )


def test_window_counts_sums_what_was_reported():
    c = _counts(
        [
            ("a", 0, 5, 0, 7),
            ("a", 1, 3, pd.NA, 7),
            ("a", 2, 2, 1, 7),
            ("a", 2, 4, 1, 20),  # revision received after the as-of date: not used
            ("b", 2, 0, 0, 7),  # a reported zero
            ("c", 0, 9, 0, 40),  # received after as_of: not known yet
        ]
    )
    as_of = W0 + pd.Timedelta(days=7 * 3 + 2)  # Wednesday of week 3: week 3 incomplete
    w = window_counts(c, as_of, windows_weeks=(1, 2), month="2026-03",
                      units=pd.Index(["a", "b", "c", "d"]))  # fmt: skip
    assert list(w.columns.get_level_values("field").unique()) == [
        "cases", "deaths", "cases_with_deaths", "weeks_reported",
    ]  # fmt: skip
    assert w.loc["a", ("cases", "cumulative")] == 10
    assert w.loc["a", ("cases", "last_1w")] == 2  # week 2 is the last complete week
    assert w.loc["a", ("cases", "last_2w")] == 5
    assert w.loc["a", ("deaths", "cumulative")] == 1
    assert w.loc["a", ("cases_with_deaths", "cumulative")] == 7  # week 1 had no deaths figure
    assert w.loc["a", ("weeks_reported", "cumulative")] == 3
    assert w.loc["b", ("cases", "cumulative")] == 0  # reported zero stays zero
    for unit in ("c", "d"):  # nothing known: <NA>, not zero
        assert pd.isna(w.loc[unit, ("cases", "cumulative")])
        assert w.loc[unit, ("weeks_reported", "cumulative")] == 0
    # weeks of 2, 9, 16, 23 March; the week of 30 March has its Thursday in April
    assert w.attrs["weeks_in_window"]["month"] == 4
    assert w.attrs["last_complete_week"] == W0 + pd.Timedelta(days=14)
    rates = attack_rates(w["cases"], pd.Series(1000.0, index=w.index))
    assert rates.columns.names == ["window", "field"]


def test_window_counts_month_of_a_week_and_unknown_unit():
    # the week of Monday 27 April 2026 has its Thursday on 30 April: it belongs to April
    c = _counts([("a", 0, 1, 0, 1), ("a", 1, 2, 0, 1)], start=pd.Timestamp("2026-04-27"))
    w = window_counts(c, "2026-05-31", windows_weeks=(), month="2026-04")
    assert w.loc["a", ("cases", "month")] == 1
    with pytest.raises(InputError, match="not among the units") as err:
        window_counts(c, "2026-05-31", units=pd.Index(["b"]))
    assert err.value.file == "test.csv" and err.value.row == 1


def test_window_counts_sunday_calendar():
    c = _counts([("a", 0, 1, 0, 1), ("a", 1, 2, 0, 1)], start=pd.Timestamp("2026-03-01"))
    # Saturday 14 March completes the Sunday-start week of 8 March
    w = window_counts(c, "2026-03-14", windows_weeks=(1,))
    assert w.loc["a", ("cases", "last_1w")] == 2


def test_aggregate_from_summed_counts_not_averaged_rates():
    cases = _series(pd.array([1, 99, 0, pd.NA], dtype="Int64"))
    pop = _series([1_000, 99_000, 50_000, 10_000])
    groups = pd.DataFrame(
        {
            "province": ["TVR-01", "TVR-01", "OSK-02", "OSK-02"],
            "country": ["TVR"] * 2 + ["OSK"] * 2,
        },
        index=pop.index,
    )
    got = aggregate_rates(cases, pop, groups)
    tvr = got.loc[("province", "TVR-01")]
    assert tvr["rate"] == pytest.approx(100.0)  # averaging rates would give 100 too; see next
    unequal = aggregate_rates(_series([10, 0, 0, 0]), pop, groups).loc[("province", "TVR-01")]
    assert unequal["rate"] == pytest.approx(10.0)  # mean of rates would be 500
    osk = got.loc[("province", "OSK-02")]
    assert osk["units"] == 2 and osk["units_reported"] == 1
    assert osk["population"] == 50_000 and osk["population_all"] == 60_000
    whole = aggregate_rates(cases, pop)
    assert whole.loc[("region", "all"), "cases"] == 100
    with pytest.raises(InputError, match="no group"):
        aggregate_rates(cases, pop, groups["country"].iloc[:3])


def test_aggregate_leaves_out_units_without_population_from_both_sums():
    # 5 + 5 cases, populations 10,000 and missing: 50 per 100k from the unit with a
    # denominator, not 100 (cases of one unit over the population of the other).
    cases = _series([5, 5, 0, 0])
    pop = _series([10_000, np.nan, 50_000, 50_000])
    groups = pd.Series(["A", "A", "B", "B"], index=pop.index, name="province")
    with pytest.warns(DataWarning, match="1 reported unit.*TVR-01-02"):
        got = aggregate_rates(cases, pop, groups)
    a = got.loc[("province", "A")]
    assert a["rate"] == pytest.approx(50.0) and a["cases"] == 5
    assert a["units_no_population"] == 1 and a["units_reported"] == 2
    assert got.loc[("province", "B"), "units_no_population"] == 0


def _line_graph():
    edges = pd.DataFrame(
        {
            "focal": IDS[:2] + IDS[1:3],
            "neighbor": IDS[1:3] + IDS[:2],
            "shared_m": 1.0,
            "gap_m": 0.0,
            "cross_border": False,
            "kind": "shared-boundary",
        }
    )
    return BorderGraph(edges=edges, ids=pd.Index(IDS))


@pytest.mark.parametrize("kind", ["BorderGraph", "Graph"])
def test_spatial_smoothing_shrinks_small_units_and_skips_missing(kind):
    bg = _line_graph()
    graph = bg if kind == "BorderGraph" else bg.weights("binary")
    assert isinstance(graph, BorderGraph | Graph)
    cases = _series(pd.array([0, 40, 2, pd.NA], dtype="Int64"))
    pop = _series([200, 80_000, 1_000, 5_000])
    got = smooth_rates(cases, pop, graph=graph)
    assert got.name == "rate_smoothed" and list(got.index) == IDS
    assert np.isnan(got["OSK-02-02"])  # not reported: no smoothed rate
    assert np.isfinite(got.iloc[:3]).all()
    glob = smooth_rates(cases, pop)
    raw = attack_rates(cases, pop)["rate"]
    # the small unit with a high raw rate moves most towards the prior
    assert abs(glob["OSK-02-01"] - raw["OSK-02-01"]) > abs(glob["TVR-01-02"] - raw["TVR-01-02"])
    with pytest.raises(InputError, match="the graph"):
        smooth_rates(cases.iloc[:3], pop.iloc[:3], graph=graph)


def test_eb_standardised_leaves_out_missing():
    cases = _series(pd.array([3, 10, pd.NA, 0], dtype="Int64"))
    pop = _series([1000, 2000, 3000, 0])
    z = eb_standardised(cases, pop)
    assert z.iloc[:2].notna().all() and z.iloc[2:].isna().all()
    assert z.name == "rate_z"


def test_spatial_eb_shrinks_islands_by_the_global_estimator():
    # A small island with 3 cases in 800 people (375 per 100k) kept its raw rate before;
    # now it gets the global EB value (Marshall 1991), as the docstring says.
    ids = pd.Index(["a", "b", "c", "island"])
    edges = pd.DataFrame(
        {
            "focal": ["a", "b", "b", "c"],
            "neighbor": ["b", "a", "c", "b"],
            "shared_m": 1.0,
            "gap_m": 0.0,
            "cross_border": False,
            "kind": "shared-boundary",
        }
    )
    bg = BorderGraph(edges=edges, ids=ids)
    cases = pd.Series([10, 12, 8, 3], index=ids)
    pop = pd.Series([20_000, 25_000, 18_000, 800], index=ids)
    spatial = smooth_rates(cases, pop, graph=bg)
    global_ = smooth_rates(cases, pop)
    assert spatial["island"] == pytest.approx(global_["island"])
    assert spatial["island"] < 100 < 375
    assert spatial.attrs["islands_global"] == ["island"]
    assert spatial["a"] != pytest.approx(global_["a"])  # others keep their local prior


@settings(max_examples=60, deadline=None)
@given(
    ids=st.lists(st.sampled_from(["a", "b", "TVR-01", "é", "", "zz"]), max_size=20),
    units=st.lists(st.sampled_from(["a", "b", "TVR-01", "é", "q"]), unique=True, max_size=5),
)
def test_unit_positions_are_pandas_get_indexer(ids, units) -> None:
    # The Arrow lookup of text ids against pandas' own Index.get_indexer on the same values.
    index = pd.Index(units, dtype=object)
    got = unit_positions(pd.Series(ids, dtype="str"), index)
    np.testing.assert_array_equal(got, index.get_indexer(pd.Series(ids, dtype=object)))
