"""The monthly run's latest weeks (pack._recent): gaps are never zeros, partial months say so.

Invented data only (the demo scenario): these are property tests of the composition; the
nowcast's statistics are checked in tests/test_nowcast.py.
Covered: a country silent for its last 3 weeks does not dip the regional or its country
curve; month rates reported vs adjusted; a mid-month run says how many weeks are in;
completeness and "last received" as known on a past as-of date.
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest

from marchland.demo import scenario_path
from marchland.errors import DataWarning
from marchland.inputs.weeks import week_month
from marchland.pack import open_region
from marchland.pack._recent import NOWCAST_COLUMNS, recent_weeks
from marchland.pack.monthly import _completeness_as_of

PERIOD = pd.Period("2026-10", "M")
AS_OF = pd.Timestamp("2026-11-03")


@pytest.fixture(scope="module")
def region():
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DataWarning)
        return open_region(scenario_path())


def _known(counts, as_of, period=PERIOD):
    keep = (counts["received"] <= as_of).to_numpy() & (week_month(counts["week"]) <= period)
    return counts[keep.to_numpy()].reset_index(drop=True)


def _run(counts, units, as_of=AS_OF):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DataWarning)
        return recent_weeks(counts, units, as_of=as_of, period=PERIOD, seed=1)


def test_silent_country_does_not_dip_the_regional_curve(region):
    counts = _known(region.counts, AS_OF)
    weeks = sorted(counts["week"].unique())
    silent = weeks[-4:-1]  # three whole weeks, all older than the last one
    cut = counts[~(counts["unit_id"].str.startswith("OSK") & counts["week"].isin(silent))]
    full = _run(counts, region.units)["nowcast"]
    gap = _run(cut, region.units)["nowcast"]
    assert list(gap.columns) == list(NOWCAST_COLUMNS)

    def curve(t, level, group):
        return t[(t["level"] == level) & (t["group"] == group)].set_index("week")

    for level, group in (("region", "region"), ("country", "OSK")):
        f, g = curve(full, level, group), curve(gap, level, group)
        # Adding the gap as zero dips the reported sum by OSK's whole share ...
        dip = 1 - g.loc[silent, "reported"].sum() / f.loc[silent, "estimate"].sum()
        if level == "region":
            assert dip > 0.15
        # ... the estimate carries the silent units instead: within 20% of the full data.
        rel = (g.loc[silent, "estimate"] - f.loc[silent, "estimate"]).abs() / f.loc[
            silent, "estimate"
        ]
        assert (rel < 0.2).all(), rel
        assert (g.loc[silent, "units_imputed"] > 0).all()
        assert g.loc[silent, "status"].eq("estimated").all()


def test_month_rates_reported_and_adjusted(region):
    out = _run(_known(region.counts, AS_OF), region.units)
    unit, area = out["month_adjusted"], out["month_adjusted_by_area"]
    assert unit.index.equals(region.units.index)
    ok = unit["adjusted_cases"].notna() & unit["reported_cases"].notna()
    # Late reports only add: the adjusted count is never below what has arrived.
    assert (unit.loc[ok, "adjusted_cases"] >= unit.loc[ok, "reported_cases"] - 1e-9).all()
    reg = area[area["level"] == "region"].iloc[0]
    np.testing.assert_allclose(reg["reported_cases"], unit["reported_cases"].sum())
    np.testing.assert_allclose(
        reg["adjusted_rate"], reg["adjusted_cases"] / region.units["population"].sum() * 1e5
    )


def test_mid_month_run_says_how_much_is_in(region):
    mid = pd.Timestamp("2026-10-15")
    out = _run(_known(region.counts, mid), region.units, as_of=mid)
    cov = out["month_coverage"]
    # October 2026 holds the ISO weeks starting 09-28 .. 10-26; two had ended by 10-15.
    assert (cov["weeks"], cov["weeks_in"], cov["partial"]) == (5, 2, True)
    assert cov["note"].startswith("weeks 1-2 of 5 in")
    full = _run(_known(region.counts, AS_OF), region.units)["month_coverage"]
    assert not full["partial"] and full["weeks_in"] == 5


def test_completeness_as_of_a_past_date(region):
    as_of = pd.Timestamp("2026-05-05")
    period = pd.Period("2026-04", "M")
    got = _completeness_as_of(region, period, as_of)
    by_country = got["completeness_by_country"]
    assert (by_country["last_received"].dropna() <= as_of).all()
    # The region's own (latest) view knows later reports; the past run must not show them.
    assert (region.completeness_by_country["last_received"] > as_of).any()
    assert (got["completeness"]["last_week"].dropna() < pd.Timestamp("2026-05-01")).all()


def test_month_note_counts_only_weeks_that_can_still_move(region):
    out = _run(_known(region.counts, AS_OF), region.units)
    cov, t = out["month_coverage"], out["nowcast"]
    reg = t[(t["level"] == "region") & t["in_month"]].sort_values("week")
    to_come = (reg["estimate"] - reg["reported"]) / reg["estimate"]
    young = reg["status"].ne("reported")
    # Every young October week is still an estimate, but only those with 2% or more of the
    # count still to come are said to be arriving (the rule in pack._recent.STILL_TO_COME).
    assert young.sum() >= 4
    assert cov["weeks_estimated"] == int((young & (to_come >= 0.02)).sum())
    assert 1 <= cov["weeks_estimated"] < young.sum()
    # On the demo only the last week (the late rows of the month's file) is still arriving.
    assert bool((young & (to_come >= 0.02)).iloc[-1])
    assert cov["note"] == (
        "all 5 weeks in; the last week still arriving (2% or more of the count still to come)"
    )
