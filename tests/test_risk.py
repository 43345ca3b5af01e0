"""Tests of border risk and its backtest.

Must cover: both graph kinds (BorderGraph and plain libpysal Graph); shuffled input order of
counts and units; the as-of contract (reports received after ``as_of`` never change the
score); candidates (never affected, within two steps, links included; re-introduction window);
the silent flag; the prior fallback; parts that add up to the linear predictor; inputs left
unchanged; bad input as InputError; simulation recovery of known cloglog coefficients
(50 replicates, fixed seeds); the backtest's determinism across worker counts, its agreement
with ``border_risk`` at each origin, and that it beats the baselines on simulated diffusion.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from libpysal.graph import Graph

from marchland.errors import InputError
from marchland.graph import BorderGraph
from marchland.risk import _sim
from marchland.risk._backtest import _hazard
from marchland.risk.score import (
    PRIOR_COEFFICIENTS,
    backtest_risk,
    border_risk,
    fit_risk_model,
    run_backtest,
)
from marchland.risk.score import _example as example
from marchland.spread import affected_episodes

PARTS = [
    "part_near_pressure",
    "part_far_pressure",
    "part_cross_share",
    "part_growth",
    "part_distance_km",
    "part_log_population",
]


@pytest.fixture(scope="module")
def sim():
    return _sim.simulate(14, 14, weeks=34, seed=11, stripe=3)


@pytest.fixture(scope="module")
def sim_as_of(sim):
    return pd.Timestamp("2026-05-20")


def _plain(graph: BorderGraph) -> Graph:
    e = graph.edges
    return Graph.from_adjacency(
        pd.DataFrame({"focal": e["focal"], "neighbor": e["neighbor"], "weight": 1.0})
    )


# --- the result ----------------------------------------------------------------------------
def test_columns_ranks_and_attrs(sim, sim_as_of):
    r = border_risk(sim.counts, sim.units, sim.graph, as_of=sim_as_of)
    assert list(r.columns[:6]) == [
        "probability",
        "rank",
        "cross_border",
        "silent",
        "drivers",
        "country",
    ]
    assert [c for c in r.columns if c.startswith("part_")] == PARTS
    assert r.index.name == "unit_id"
    assert r["rank"].tolist() == list(range(1, len(r) + 1))
    assert r["probability"].is_monotonic_decreasing
    assert ((r["probability"] > 0) & (r["probability"] < 1)).all()
    assert r.attrs["model"] == "fitted"
    assert r.attrs["expected_new_units"] == pytest.approx(r["probability"].sum())
    assert set(r.attrs["coefficients"]) == {"intercept", *(p[5:] for p in PARTS)}


def test_parts_add_up_to_the_linear_predictor(sim, sim_as_of):
    r = border_risk(sim.counts, sim.units, sim.graph, as_of=sim_as_of)
    eta = r.attrs["baseline"] + r[PARTS].sum(axis=1)
    np.testing.assert_allclose(_hazard.inverse_cloglog(eta.to_numpy()), r["probability"])


def test_candidates_are_unaffected_units_within_two_steps(sim, sim_as_of):
    from marchland.inputs.reports import as_of
    from marchland.spread import first_cases

    r = border_risk(sim.counts, sim.units, sim.graph, as_of=sim_as_of)
    first = first_cases(as_of(sim.counts, sim_as_of))
    week = pd.Timestamp(r.attrs["week"])
    affected = first.index[first <= week]
    hops = sim.graph.hops_from(affected)
    expected = hops.index[(hops >= 1) & (hops <= 2)]
    assert sorted(r.index) == sorted(expected)


def test_cross_border_and_drivers(sim, sim_as_of):
    r = border_risk(sim.counts, sim.units, sim.graph, as_of=sim_as_of)
    from marchland.inputs.reports import as_of
    from marchland.spread import first_cases

    first = first_cases(as_of(sim.counts, sim_as_of))
    affected = set(first.index[first <= pd.Timestamp(r.attrs["week"])])
    country = sim.units["country"]
    for uid, row in r.head(15).iterrows():
        drivers = row["drivers"].split()
        assert 1 <= len(drivers) <= 3
        assert set(drivers) <= affected
        hops = sim.graph.hops_from([uid])
        within = [v for v in affected if hops[v] <= 2]
        assert row["cross_border"] == any(country[v] != country[uid] for v in within)


def test_both_graph_kinds_agree_when_lengths_are_equal():
    counts, units, graph = example()
    a = border_risk(counts, units, graph, as_of="2026-03-30", horizon_weeks=2)
    b = border_risk(counts, units, _plain(graph), as_of="2026-03-30", horizon_weeks=2)
    pd.testing.assert_frame_equal(a, b)
    assert a["cross_border"].tolist() == [True, True]


def test_shuffled_inputs_give_the_same_result(sim, sim_as_of):
    a = border_risk(sim.counts, sim.units, sim.graph, as_of=sim_as_of)
    counts = sim.counts.sample(frac=1.0, random_state=np.random.default_rng(3).integers(1e9))
    units = sim.units.iloc[np.random.default_rng(4).permutation(len(sim.units))]
    b = border_risk(counts, units, sim.graph, as_of=sim_as_of)
    pd.testing.assert_frame_equal(a, b)


def test_inputs_are_not_changed(sim, sim_as_of):
    counts, units = sim.counts.copy(), sim.units.copy()
    edges = sim.graph.edges.copy()
    border_risk(sim.counts, sim.units, sim.graph, as_of=sim_as_of)
    pd.testing.assert_frame_equal(counts, sim.counts)
    pd.testing.assert_frame_equal(units, sim.units)
    pd.testing.assert_frame_equal(edges, sim.graph.edges)


# --- the as-of contract ----------------------------------------------------------------
def test_reports_received_after_as_of_never_change_the_score(sim, sim_as_of):
    before = border_risk(sim.counts, sim.units, sim.graph, as_of=sim_as_of)
    rng = np.random.default_rng(5)
    late = sim.counts.sample(400, random_state=rng.integers(1e9)).copy()
    # Revisions with many cases, received a day after as_of, for past and current weeks ...
    late["cases"] = pd.array(rng.integers(50, 500, len(late)), dtype="Int64")
    late["received"] = sim_as_of + pd.Timedelta(days=1)
    # ... and first cases in every candidate, received long after.
    fresh = sim.counts[sim.counts["unit_id"].isin(before.index)].copy()
    fresh["cases"] = pd.array(np.full(len(fresh), 9), dtype="Int64")
    fresh["received"] = sim_as_of + pd.Timedelta(days=60)
    more = pd.concat([sim.counts, late, fresh], ignore_index=True)
    after = border_risk(more, sim.units, sim.graph, as_of=sim_as_of)
    pd.testing.assert_frame_equal(before, after)
    assert not after.empty


def test_a_late_report_known_by_as_of_does_change_the_score(sim, sim_as_of):
    before = border_risk(sim.counts, sim.units, sim.graph, as_of=sim_as_of)
    top = before.index[0]
    late = sim.counts[sim.counts["unit_id"] == before.loc[top, "drivers"].split()[0]].copy()
    late = late[late["week"] <= pd.Timestamp(before.attrs["week"])].tail(2)
    late["cases"] = pd.array([400, 400], dtype="Int64")
    late["received"] = sim_as_of
    after = border_risk(pd.concat([sim.counts, late]), sim.units, sim.graph, as_of=sim_as_of)
    pressure = ["near_pressure", "far_pressure"]
    assert after.loc[top, pressure].sum() > before.loc[top, pressure].sum()


# --- flags, prior, options ---------------------------------------------------------------
def test_silent_candidates_are_flagged_and_still_ranked():
    counts, units, graph = example()
    # Known on 2026-03-30: weeks up to 2026-03-16; d's last report is for 2026-02-16.
    quiet = ~((counts["unit_id"] == "d") & (counts["week"] >= "2026-02-23"))
    r = border_risk(counts[quiet], units, graph, as_of="2026-03-30", horizon_weeks=2)
    assert r.loc["d", "silent"]
    assert not r.loc["c", "silent"]
    assert r.loc["d", "rank"] == 2
    r2 = border_risk(counts[quiet], units, graph, as_of="2026-03-30", silent_weeks=5)
    assert not r2.loc["d", "silent"]


def test_prior_is_used_and_said_when_events_are_few():
    counts, units, graph = example()
    m = fit_risk_model(counts, units, graph, as_of="2026-03-30", horizon_weeks=2)
    assert m.kind == "prior"
    assert "fewer than min_events=10" in m.note
    for f, b in m.coefficients.iloc[1:].items():
        assert b == PRIOR_COEFFICIENTS[f]
    assert m.std_errors.isna().all()


def test_fitted_model_used_when_events_suffice(sim, sim_as_of):
    m = fit_risk_model(sim.counts, sim.units, sim.graph, as_of=sim_as_of)
    assert m.kind == "fitted" and m.n_events >= 10 and m.converged
    assert np.isfinite(m.std_errors).all()
    # A stronger penalty shrinks the standardised coefficients towards 0.
    strong = fit_risk_model(sim.counts, sim.units, sim.graph, as_of=sim_as_of, penalty=1e4)
    assert np.abs(strong.standardised.iloc[1:]).sum() < np.abs(m.standardised.iloc[1:]).sum()


def test_model_argument_scores_with_a_given_model(sim, sim_as_of):
    m = fit_risk_model(sim.counts, sim.units, sim.graph, as_of=sim_as_of)
    a = border_risk(sim.counts, sim.units, sim.graph, as_of=sim_as_of)
    b = border_risk(sim.counts, sim.units, sim.graph, as_of=sim_as_of, model=m)
    pd.testing.assert_frame_equal(a, b)


def test_reintroduction_window_makes_quiet_units_candidates():
    counts, units, graph = example()
    r = border_risk(counts, units, graph, as_of="2026-03-30", horizon_weeks=2)
    assert "a" not in r.index
    r2 = border_risk(
        counts, units, graph, as_of="2026-03-30", horizon_weeks=2, reintroduction_weeks=20
    )
    assert "a" not in r2.index  # a still reports cases
    quiet = counts.copy()
    quiet.loc[(quiet["unit_id"] == "a") & (quiet["week"] >= "2026-02-23"), "cases"] = 0
    r3 = border_risk(
        quiet, units, graph, as_of="2026-03-30", horizon_weeks=2, reintroduction_weeks=4
    )
    assert "a" in r3.index


def test_reintroduction_candidates_agree_with_spread_episodes_over_an_unreported_gap():
    # One definition of "quiet": a unit is a candidate again exactly when spread would open a
    # new episode on a case in the next week. Unit a reports cases in weeks 0-4, a zero in
    # week 5, nothing in weeks 6-7 (unknown, not quiet), then zeros. Counting calendar weeks
    # would make it a candidate at the end of week 8; only four *reported* zeros (weeks 5, 8,
    # 9, 10) do, at the end of week 10.
    counts, units, graph = example()
    a = counts["unit_id"] == "a"
    counts = counts.copy()
    counts.loc[a & (counts["week"] >= "2026-02-09"), "cases"] = 0
    counts = counts[~(a & counts["week"].isin(pd.to_datetime(["2026-02-16", "2026-02-23"])))]
    seen = {}
    for as_of in pd.date_range("2026-02-20", "2026-04-03", freq="7D"):
        r = border_risk(counts, units, graph, as_of=as_of, horizon_weeks=2, reintroduction_weeks=4)
        week = pd.Timestamp(r.attrs["week"])
        known = counts[(counts["received"] <= as_of) & (counts["week"] <= week)]
        probe = (
            known[known["unit_id"] == "a"]
            .iloc[[0]]
            .assign(week=week + pd.Timedelta(days=7), cases=1, received=as_of, row=0)
        )
        n_known = len(affected_episodes(known, reintroduction_weeks=4).query("unit_id == 'a'"))
        n_probe = len(
            affected_episodes(pd.concat([known, probe]), reintroduction_weeks=4).query(
                "unit_id == 'a'"
            )
        )
        seen[week] = ("a" in r.index, n_probe > n_known)
    assert all(risk == spread for risk, spread in seen.values()), seen
    assert [w for w, (risk, _) in seen.items() if risk][0] == pd.Timestamp("2026-03-16")
    assert not seen[pd.Timestamp("2026-03-02")][0]  # week 8: not yet, two weeks were unreported


def test_candidate_of_unknown_population_is_shown_but_not_scored():
    counts, units, graph = example()
    u = units.copy()
    u.loc["c", "population"] = np.nan
    r = border_risk(counts, u, graph, as_of="2026-03-30", horizon_weeks=2)
    assert r.index.tolist() == ["d", "c"]
    assert np.isnan(r.loc["c", "probability"]) and pd.isna(r.loc["c", "rank"])
    assert r.loc["c", "note"] == "population unknown: not scored"
    assert r.loc["d", "rank"] == 1 and r.loc["d", "note"] == ""
    assert r.attrs["expected_new_units"] == pytest.approx(r.loc["d", "probability"])


def test_covariates_become_features():
    counts, units, graph = example()
    cov = pd.DataFrame({"water_access": [0.2, 0.4, 0.9, 0.1, 0.5]}, index=units.index)
    r = border_risk(counts, units, graph, as_of="2026-03-30", covariates=cov)
    assert "part_water_access" in r.columns
    assert r.attrs["coefficients"]["water_access"] == 0.0  # prior: neutral


def test_nothing_affected_gives_an_empty_table():
    counts, units, graph = example()
    r = border_risk(counts, units, graph, as_of="2026-01-06")
    assert r.empty and r.attrs["expected_new_units"] == 0.0
    assert r.attrs["model"] == "prior"


@pytest.mark.parametrize(
    ("kwargs", "match"),
    [
        ({"horizon_weeks": 0}, "horizon_weeks"),
        ({"silent_weeks": -1}, "silent_weeks"),
        ({"penalty": -1.0}, "penalty"),
        ({"min_events": 1.5}, "min_events"),
    ],
)
def test_bad_options(kwargs, match):
    counts, units, graph = example()
    with pytest.raises(InputError, match=match):
        border_risk(counts, units, graph, as_of="2026-03-30", **kwargs)


def test_bad_inputs_are_input_errors():
    counts, units, graph = example()
    u = units.copy()
    u.loc["b", "population"] = np.nan  # b has cases: no incidence without a population
    with pytest.raises(InputError, match="population"):
        border_risk(counts, u, graph, as_of="2026-03-30")
    c = counts.copy()
    c.loc[0, "unit_id"] = "zz"
    with pytest.raises(InputError, match="analysis units"):
        border_risk(c, units, graph, as_of="2026-03-30")
    with pytest.raises(InputError, match="received"):
        border_risk(counts.drop(columns="received"), units, graph, as_of="2026-03-30")
    with pytest.raises(InputError, match="graph names units"):
        border_risk(counts, units.drop(index="e"), graph, as_of="2026-03-30")


# --- simulation recovery ----------------------------------------------------------------
def test_simulation_recovery_of_known_cloglog_coefficients():
    """95% intervals cover the true weekly coefficients in >= 90% of 50 replicates."""
    truth = pd.Series(_sim.TRUE_WEEKLY)
    covered = []
    for seed in range(1000, 1050):
        sim = _sim.simulate(18, 18, weeks=36, seed=seed, stripe=3)
        m = fit_risk_model(
            sim.counts,
            sim.units,
            sim.graph,
            as_of=sim.counts["received"].max(),
            horizon_weeks=1,
            penalty=0.0,
            min_events=0,
        )
        assert m.kind == "fitted" and m.converged
        iv = m.intervals(0.95)
        covered.append((iv["lower"] <= truth) & (truth <= iv["upper"]))
    coverage = pd.DataFrame(covered).mean()
    assert (coverage >= 0.90).all(), coverage.to_dict()


# --- the backtest -----------------------------------------------------------------------
def test_backtest_table_shape(sim):
    bt = backtest_risk(sim.counts, sim.units, sim.graph, top_k=5)
    assert bt.index.tolist() == ["score", "distance", "neighbours"]
    assert list(bt.columns[:4]) == ["auc", "brier", "hits_top_k", "n_origins"]
    assert (bt["n_origins"] > 10).all()
    assert (bt["hits_top_k"] <= 5).all()
    by = backtest_risk(sim.counts, sim.units, sim.graph, top_k=5, by="country")
    assert set(by.index.get_level_values("country")) == {"TVR", "OSK"}


def test_backtest_beats_baselines_on_simulated_diffusion(sim):
    bt = backtest_risk(sim.counts, sim.units, sim.graph)
    assert bt.loc["score", "auc"] > bt.loc["distance", "auc"]
    assert bt.loc["score", "auc"] > bt.loc["neighbours", "auc"]
    assert bt.loc["score", "brier"] < bt.loc["distance", "brier"]


def test_backtest_is_the_same_on_every_executor(sim, monkeypatch):
    # Serial, two local processes and a Dask LocalCluster (threads in this process: quick to
    # start; a real cluster ships the same pickled shares). Results must be byte-identical.
    distributed = pytest.importorskip("distributed")
    from marchland.compute import Executor

    weeks = np.sort(sim.counts["week"].unique())
    kw = {"origins": list(weeks[12:18]), "horizon_weeks": 3}
    runs = {}
    with Executor(workers=1) as ex:
        runs["serial"] = run_backtest(sim.counts, sim.units, sim.graph, executor=ex, **kw)
    from marchland.risk import _backtest

    monkeypatch.setattr(_backtest, "SERIAL_BELOW", 0)  # small work: start the workers anyway
    runs["n_jobs=2"] = run_backtest(sim.counts, sim.units, sim.graph, n_jobs=2, **kw)
    with (
        # The HTTP server on a free port: with none given it takes 8787 and warns (an error
        # here) when another cluster, e.g. a second test worker's, holds it.
        distributed.LocalCluster(
            n_workers=2, threads_per_worker=1, processes=False, dashboard_address=":0"
        ) as cluster,
        Executor(scheduler=cluster.scheduler_address) as ex,
    ):
        assert ex.backend == "dask" and ex.parallelism == 2
        runs["dask"] = run_backtest(sim.counts, sim.units, sim.graph, executor=ex, **kw)
    a = runs.pop("serial")
    assert a.predictions["origin"].nunique() == 6
    for name, b in runs.items():
        for field in ("predictions", "summary", "by_country", "by_origin"):
            x, y = getattr(a, field), getattr(b, field)
            pd.testing.assert_frame_equal(x, y, check_exact=True, obj=f"{name} {field}")
            hx = pd.util.hash_pandas_object(x).to_numpy()
            assert (hx == pd.util.hash_pandas_object(y).to_numpy()).all(), (name, field)


def _revised(sim, seed=5):
    """Sim counts with revisions: later versions up and down, same-day ties, a blank version."""
    rng = np.random.default_rng(seed)
    c = sim.counts
    pick = c.sample(frac=0.3, random_state=seed)
    later = pick.assign(
        received=pick["received"] + pd.to_timedelta(rng.integers(0, 4, len(pick)) * 7, unit="D"),
        cases=(pick["cases"].to_numpy(dtype=float) + rng.integers(-1, 3, len(pick))).clip(0),
    )
    blank = pick.iloc[:20].assign(
        cases=pd.array([pd.NA] * 20, dtype="Int64"), received=pick["received"].iloc[:20]
    )
    later = later.assign(cases=pd.array(later["cases"].round(), dtype="Int64"))
    out = pd.concat([c.assign(cases=pd.array(c["cases"], dtype="Int64")), later, blank])
    return out.sample(frac=1.0, random_state=seed + 1).reset_index(drop=True)


def test_backtest_replay_gives_the_panels_of_the_as_of_path(sim):
    # The backtest arranges the versions once (Replay) instead of sorting and filtering them
    # again at every origin; each origin's view and panel must equal the direct as-of path's.
    from marchland.inputs.reports import as_of
    from marchland.risk import _features as rf
    from marchland.risk._model import Replay, _panel_at

    counts = _revised(sim)[["unit_id", "week", "cases", "received"]]
    static = rf.build_static(sim.units, sim.graph)
    counts = counts.assign(unit_id=pd.Categorical(counts["unit_id"], categories=static.ids))
    replay = Replay.build(counts, static)
    week0 = counts["week"].min()
    assert (counts.groupby(["unit_id", "week"], observed=True).size() > 1).sum() > 50
    for date in pd.date_range(week0 + pd.Timedelta(days=9), periods=8, freq="27D"):
        pd.testing.assert_frame_equal(replay.view(date), as_of(counts, date), check_exact=True)
        kw = {"week0": week0, "recent_weeks": 3, "reintroduction_weeks": 4, "min_cases": 1}
        p, w = _panel_at(counts, static, date, **kw)
        q, v = _panel_at(counts, static, date, replay=replay, **kw)
        assert w == v and p.weeks.equals(q.weeks)
        for name in ("cases", "reported", "first", "incidence", "at_risk", "complete"):
            np.testing.assert_array_equal(getattr(p, name), getattr(q, name), err_msg=name)
        for name in p.features:
            np.testing.assert_array_equal(p.features[name], q.features[name], err_msg=name)


def test_backtest_scores_equal_border_risk_at_the_origin(sim):
    bt = run_backtest(sim.counts, sim.units, sim.graph, report_lag_days=3)
    origin = bt.predictions["origin"].unique()[8]
    pred = bt.predictions[bt.predictions["origin"] == origin].set_index("unit_id")
    as_of = pd.Timestamp(origin) + pd.Timedelta(days=9)
    r = border_risk(sim.counts, sim.units, sim.graph, as_of=as_of)
    assert sorted(pred.index) == sorted(r.index)
    np.testing.assert_allclose(pred.loc[r.index, "score"], r["probability"], rtol=1e-9)


def test_backtest_outcome_is_a_case_within_the_horizon(sim):
    bt = run_backtest(sim.counts, sim.units, sim.graph, horizon_weeks=3)
    p = bt.predictions
    first = sim.first.reindex(p["unit_id"]).to_numpy()
    end = p["origin"].to_numpy() + np.timedelta64(21, "D")
    np.testing.assert_array_equal(p["outcome"].to_numpy(), first <= end)


def test_backtest_every_kth_origin_keeps_the_latest_and_its_predictions(sim):
    # A continent's month takes every k-th default origin, counted back from the last: the
    # origins kept are the same weeks, with the same predictions, as in the weekly backtest.
    full = run_backtest(sim.counts, sim.units, sim.graph)
    third = run_backtest(sim.counts, sim.units, sim.graph, every_weeks=3)
    weeks = np.sort(full.predictions["origin"].unique())
    kept = np.sort(third.predictions["origin"].unique())
    np.testing.assert_array_equal(kept, weeks[::-1][::3][::-1])
    a = full.predictions[full.predictions["origin"].isin(kept)].reset_index(drop=True)
    b = third.predictions.reset_index(drop=True)
    pd.testing.assert_frame_equal(a[b.columns], b)
    with pytest.raises(InputError, match="every_weeks"):
        run_backtest(sim.counts, sim.units, sim.graph, every_weeks=0)


def test_backtest_origin_outside_the_data_is_an_input_error(sim):
    with pytest.raises(InputError, match="origins"):
        backtest_risk(sim.counts, sim.units, sim.graph, origins=["2030-01-01"])


def test_backtest_as_of_replays_only_what_was_known(sim):
    as_of = pd.Timestamp("2026-06-15")
    a = run_backtest(sim.counts, sim.units, sim.graph, as_of=as_of)
    known = sim.counts[sim.counts["received"] <= as_of]
    b = run_backtest(known, sim.units, sim.graph)
    pd.testing.assert_frame_equal(a.predictions, b.predictions)
    assert a.predictions["origin"].max() + pd.Timedelta(days=7 * 4 + 6) <= as_of


# --- the demo scenario ------------------------------------------------------------------
# The demo's simulation (marchland.demo) writes what really happened to demo_data/truth/:
# force.csv (district, week, force of infection), first_case.csv, districts.csv (province of
# each district; Oskeland is analysed at province level, so its districts map to provinces).
@pytest.fixture(scope="module")
def demo():
    import warnings

    from marchland.demo import scenario_path
    from marchland.pack.region import open_region

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        region = open_region(scenario_path())
    truth = scenario_path().parent / "truth"
    districts = pd.read_csv(truth / "districts.csv").set_index("unit_id")
    to_unit = pd.Series(districts.index, index=districts.index)
    to_unit = to_unit.where(to_unit.isin(region.units.index), districts["province_id"])
    force = pd.read_csv(truth / "force.csv", parse_dates=["week"])
    force = force.assign(unit=force["unit_id"].map(to_unit)).pivot_table(
        index="week", columns="unit", values="force", aggfunc="sum"
    )
    first = pd.read_csv(truth / "first_case.csv", parse_dates=["week"])
    first = first.assign(unit=first["unit_id"].map(to_unit)).groupby("unit")["week"].min()
    bt = run_backtest(region.counts, region.units, region.graph, horizon_weeks=4, top_k=10)
    return region, force, first, bt


def _force_score(bt, force, start_week: int, end_week: int) -> np.ndarray:
    """True force of infection summed over weeks origin + start .. origin + end per pair."""
    p = bt.predictions
    cum = force.cumsum()
    pos = force.index.get_indexer(p["origin"])
    hi = np.minimum(pos + end_week, len(force) - 1)
    lo = pos + start_week - 1
    cols = cum.columns.get_indexer(p["unit_id"])
    assert (pos >= 0).all() and (cols >= 0).all()
    c = cum.to_numpy()
    return c[hi, cols] - np.where(lo >= 0, c[np.maximum(lo, 0), cols], 0.0)


def test_demo_backtest_beats_both_baselines(demo):
    _, _, _, bt = demo
    s = bt.summary
    assert s.loc["score", "auc"] > s.loc["distance", "auc"]
    assert s.loc["score", "auc"] > s.loc["neighbours", "auc"]
    assert s.loc["score", "brier"] < min(s.loc["distance", "brier"], s.loc["neighbours", "brier"])
    assert s.loc["score", "n_origins"] >= 40


def test_demo_backtest_beside_perfect_knowledge(demo):
    """The score beside two perfect-knowledge scores from the simulation's true force.

    The force summed over the whole horizon (origin + 1 .. origin + h) is the upper bound no
    model can pass; it also contains the force a unit's own (future) cases put on it, so it
    partly knows the outcome. The force in the first week after the origin is perfect
    knowledge of the true state at the origin; the aim is to come within 0.05 of it.
    """
    _, force, _, bt = demo
    y = bt.predictions["outcome"].to_numpy()
    horizon = _hazard.auc(_force_score(bt, force, 1, bt.horizon_weeks), y)
    state = _hazard.auc(_force_score(bt, force, 1, 1), y)
    score = bt.summary.loc["score", "auc"]
    print(
        f"demo AUC: score {score:.3f}, true force next week {state:.3f}, "
        f"over the horizon {horizon:.3f}"
    )
    assert score < horizon
    assert score > state - 0.05


def test_demo_next_infected_rank_in_the_top_decile_more_often_than_chance(demo):
    region, _, first, _ = demo
    hits = total = 0
    expected = 0.0
    for as_of in ["2025-08-13", "2025-11-12", "2026-02-11", "2026-05-13", "2026-08-12"]:
        r = border_risk(region.counts, region.units, region.graph, as_of=as_of)
        week = pd.Timestamp(r.attrs["week"])
        nxt = first[(first > week) & (first <= week + pd.Timedelta(days=28))].index
        nxt = nxt[nxt.isin(r.index)]
        top = r.index[r["rank"] <= max(1, int(np.ceil(len(r) / 10)))]
        hits += int(nxt.isin(top).sum())
        total += len(nxt)
        expected += len(nxt) * len(top) / len(r)
    assert total >= 10
    # Chance puts len(top) / len(r) (about a tenth) of them in the top decile; a one-sided
    # binomial test (scipy) says whether the score does better than that.
    from scipy.stats import binomtest

    test = binomtest(hits, total, expected / total, alternative="greater")
    print(
        f"next infected in the top decile: {hits} of {total}; chance {expected:.1f}; "
        f"p = {test.pvalue:.2g}"
    )
    assert hits > expected and test.pvalue < 0.01, (hits, total, expected)


def test_weeks_on_two_calendars_are_an_input_error():
    counts, units, graph = example()
    c = counts.copy()
    c.loc[c.index[-1], "week"] = c["week"].iloc[-1] - pd.Timedelta(days=1)  # a Sunday
    c.loc[c.index[-1], "received"] = c["received"].iloc[0]
    with pytest.raises(InputError, match="week calendars"):
        border_risk(c, units, graph, as_of="2026-03-30")


# --- invariants on random outbreaks -------------------------------------------------------
from hypothesis import given, settings  # noqa: E402
from hypothesis import strategies as st  # noqa: E402


@settings(max_examples=25, deadline=None)
@given(
    seed=st.integers(0, 2**32 - 1),
    horizon=st.integers(1, 4),
    cut=st.integers(3, 12),
)
def test_invariants_on_random_outbreaks(seed, horizon, cut):
    rng = np.random.default_rng(seed)
    units, graph = _sim.grid_region(5, 4, seed=seed % 1000, stripe=2)
    weeks = pd.date_range("2026-01-05", periods=14, freq="7D")
    ids = units.index.to_numpy()
    cases = rng.poisson(rng.gamma(0.3, 2.0, (len(ids), 1)) * np.ones(14)) * (
        rng.random((len(ids), 14)) < 0.6
    )
    keep = rng.random((len(ids), 14)) < 0.9  # some unit-weeks never reported
    uu, ww = np.nonzero(keep)
    counts = pd.DataFrame(
        {
            "unit_id": ids[uu],
            "week": weeks[ww],
            "cases": pd.array(cases[uu, ww], dtype="Int64"),
            "received": weeks[ww] + pd.to_timedelta(rng.integers(5, 30, len(uu)), unit="D"),
        }
    )
    as_of = weeks[cut] + pd.Timedelta(days=9)
    r = border_risk(counts, units, graph, as_of=as_of, horizon_weeks=horizon, min_events=3)
    if r.empty:
        return
    assert r["probability"].between(0, 1).all()
    assert sorted(r["rank"]) == list(range(1, len(r) + 1))
    eta = r.attrs["baseline"] + r[PARTS].sum(axis=1)
    np.testing.assert_allclose(_hazard.inverse_cloglog(eta.to_numpy()), r["probability"])
    assert (r["cross_share"].between(0, 1)).all()
    assert (r["distance_km"] >= 0).all() and np.isfinite(r["distance_km"]).all()
    # Reports received after as_of never matter.
    late = counts.assign(cases=pd.array(rng.integers(0, 99, len(counts)), dtype="Int64"))
    late["received"] = as_of + pd.Timedelta(days=1)
    r2 = border_risk(
        pd.concat([counts, late]), units, graph, as_of=as_of, horizon_weeks=horizon, min_events=3
    )
    pd.testing.assert_frame_equal(r, r2)


def test_forecast_model_is_a_backtest_row_from_its_paths(sim):
    from marchland.projections.projection import forecast

    weeks = pd.DatetimeIndex(sorted(sim.counts["week"].unique()))
    origins = weeks[20:23]
    bt = run_backtest(sim.counts, sim.units, sim.graph, origins=origins, forecast_paths=50, seed=4)
    assert bt.summary.index.tolist() == ["score", "distance", "neighbours", "forecast"]
    p = bt.predictions
    assert p["forecast"].between(0, 1).all()
    # The first origin's column is P(any case in the horizon) over the forecast's own paths.
    o = p["origin"].min()
    date = o + pd.Timedelta(days=6 + 3)
    f = forecast(
        sim.counts[sim.counts["received"] <= date],
        sim.units,
        sim.graph,
        as_of=date,
        horizon_weeks=4,
        seed=4,
        n_paths=50,
    )
    ref = pd.Series((f.paths > 0).any(axis=0).mean(axis=1), index=f.units.index)
    first = p[p["origin"] == o]
    np.testing.assert_allclose(first["forecast"], ref.reindex(first["unit_id"]).to_numpy())


# --- reporting delays (issue 13) ---------------------------------------------------------
def test_backtest_is_calibrated_under_per_country_delays():
    """Mean predicted probability within 0.05 of the observed share, pooled over 4 seeds.

    Three invented countries with different reporting delays, one sending rows only for weeks
    with cases (simulation, rule 3: a property test, not evidence against the world).
    """
    predicted, observed = [], []
    for seed in range(4):
        sim = _sim.simulate(15, 15, weeks=30, seed=seed, stripe=3, countries=("TVR", "OSK", "MRW"))
        sim = _sim.with_delays(
            sim, {"TVR": 0.5, "OSK": 2.0, "MRW": 3.0}, only_cases=("MRW",), seed=seed
        )
        p = run_backtest(sim.counts, sim.units, sim.graph, min_history_weeks=6).predictions
        predicted.append(p["score"].mean())
        observed.append(p["outcome"].mean())
    assert abs(np.mean(predicted) - np.mean(observed)) < 0.05, (predicted, observed)


def test_backtest_leaves_out_late_reported_old_cases_and_censored_windows():
    sim = _sim.simulate(12, 12, weeks=26, seed=3, stripe=3, countries=("TVR", "OSK", "MRW"))
    sim = _sim.with_delays(sim, {"TVR": 0.5, "OSK": 2.0, "MRW": 3.0}, only_cases=("MRW",), seed=3)
    bt = run_backtest(sim.counts, sim.units, sim.graph, min_history_weeks=4, horizon_weeks=2)
    p = bt.predictions
    truth = sim.first.reindex(p["unit_id"]).to_numpy()
    origin = p["origin"].to_numpy()
    # No candidate's true first case lies in a week up to its origin (reported later).
    assert not (truth <= origin).any()
    # The outcome is exactly a true first case within the horizon.
    within = (truth > origin) & (truth <= origin + np.timedelta64(14, "D"))
    np.testing.assert_array_equal(p["outcome"].to_numpy(), within)


def test_counts_on_a_unit_outside_the_graph_are_refused_by_name(sim, sim_as_of):
    # The risk step and the backtest share one error for counts on unknown units.
    stray = sim.counts.iloc[:1].assign(unit_id="NOWHERE-99")
    counts = pd.concat([sim.counts, stray], ignore_index=True)
    with pytest.raises(InputError, match=r"not analysis units of the graph: \['NOWHERE-99'\]"):
        border_risk(counts, sim.units, sim.graph, as_of=sim_as_of)
