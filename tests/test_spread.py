"""Unit tests for marchland.spread on small invented data.

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


def test_empty_counts():
    c = _counts([("a", 0, 1, 7)]).iloc[:0]
    assert len(first_cases(c)) == 0
    assert len(affected_episodes(c)) == 0
