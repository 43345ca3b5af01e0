"""Outside checks of marchland.stats.rates.

Sources: a classic published table of exact 95% Poisson limits (values from memory), scipy's
gamma and Poisson distributions, statsmodels' ``confint_poisson`` and ``proportion_confint``,
scipy's ``binomtest(...).proportion_ci``, Newcombe (1998)'s Wilson worked examples, and
esda's ``Empirical_Bayes``, ``Spatial_Empirical_Bayes`` and ``assuncao_rate`` on libpysal's
built-in ``stl`` (St Louis homicides) and ``sids2`` (North Carolina SIDS) data, whose ``.gal``
weights are rook contiguity. Graph input is checked as both a BorderGraph and a plain
libpysal Graph.
"""

from __future__ import annotations

import libpysal
import numpy as np
import pandas as pd
import pytest
from esda.smoothing import Empirical_Bayes, Spatial_Empirical_Bayes, assuncao_rate
from libpysal.graph import Graph, read_gal
from pyogrio import read_dataframe
from scipy import stats
from statsmodels.stats.proportion import proportion_confint
from statsmodels.stats.rates import confint_poisson

from marchland.graph import BorderGraph
from marchland.stats import (
    attack_rates,
    case_fatality,
    eb_standardised,
    poisson_limits,
    smooth_rates,
)

# Exact 95% confidence limits for an observed Poisson count, as tabulated in standard
# epidemiology texts (e.g. the table of Poisson limits in Rothman & Boice 1979 / Haenszel et al.
# 1962). From memory, to three decimals.
POISSON_TABLE_95 = {
    0: (0.000, 3.689),
    1: (0.0253, 5.572),
    2: (0.242, 7.225),
    3: (0.619, 8.767),
    4: (1.090, 10.242),
    5: (1.623, 11.668),
    10: (4.795, 18.390),
    20: (12.217, 30.888),
    50: (37.111, 65.919),
    100: (81.364, 121.627),
}


def test_poisson_limits_match_published_table():
    x = np.array(list(POISSON_TABLE_95))
    lower, upper = poisson_limits(x)
    want = np.array(list(POISSON_TABLE_95.values()))
    np.testing.assert_allclose(lower, want[:, 0], atol=6e-4)
    np.testing.assert_allclose(upper, want[:, 1], atol=6e-4)


@pytest.mark.parametrize("conf", [0.9, 0.95, 0.99])
def test_poisson_limits_match_scipy_and_statsmodels(conf):
    x = np.arange(0, 200)
    lower, upper = poisson_limits(x, conf)
    alpha = 1 - conf
    # scipy: the gamma form of the Garwood limits
    np.testing.assert_allclose(lower[1:], stats.gamma.ppf(alpha / 2, x[1:]), rtol=1e-10)
    np.testing.assert_allclose(upper, stats.gamma.ppf(1 - alpha / 2, x + 1), rtol=1e-10)
    # statsmodels: the central exact interval
    lo_sm, hi_sm = confint_poisson(x, 1.0, method="exact-c", alpha=alpha)
    np.testing.assert_allclose(lower, np.nan_to_num(lo_sm), rtol=1e-8, atol=1e-12)
    np.testing.assert_allclose(upper, hi_sm, rtol=1e-8)
    # definition: at each limit the tail probability of the observed count is alpha / 2
    np.testing.assert_allclose(stats.poisson.sf(x[1:] - 1, lower[1:]), alpha / 2, rtol=1e-8)
    np.testing.assert_allclose(stats.poisson.cdf(x, upper), alpha / 2, rtol=1e-8)


def test_attack_rate_limits_are_count_limits_over_population():
    cases = pd.Series([0, 10, 50], index=["a", "b", "c"])
    pop = pd.Series([20_000, 50_000, 100_000], index=["a", "b", "c"])
    got = attack_rates(cases, pop)
    want = np.array([POISSON_TABLE_95[k] for k in (0, 10, 50)]) / pop.to_numpy()[:, None] * 1e5
    np.testing.assert_allclose(got[["lower", "upper"]].to_numpy(), want, rtol=2e-4)


# Newcombe (1998), Stat. Med. 17:857-872, Table I, method 3 (Wilson score): from memory.
NEWCOMBE_WILSON = {
    (81, 263): (0.2553, 0.3662),
    (15, 148): (0.0624, 0.1605),
    (0, 20): (0.0000, 0.1611),
    (1, 29): (0.0061, 0.1718),
}


def test_wilson_limits_match_newcombe_and_libraries():
    pairs = list(NEWCOMBE_WILSON)
    deaths = pd.Series([d for d, _ in pairs], index=list("abcd"))
    cases = pd.Series([n for _, n in pairs], index=list("abcd"))
    got = case_fatality(deaths, cases, method="wilson")
    want = np.array(list(NEWCOMBE_WILSON.values()))
    np.testing.assert_allclose(got[["lower", "upper"]].to_numpy(), want, atol=6e-5)
    for (d, n), (lo, hi) in zip(pairs, got[["lower", "upper"]].to_numpy(), strict=True):
        ci = stats.binomtest(d, n).proportion_ci(0.95, method="wilson")  # scipy
        assert (lo, hi) == pytest.approx((ci.low, ci.high), abs=1e-12)
    lo_sm, hi_sm = proportion_confint(deaths, cases, alpha=0.1, method="wilson")
    got90 = case_fatality(deaths, cases, conf=0.9, method="wilson")
    np.testing.assert_allclose(got90["lower"], lo_sm, atol=1e-12)
    np.testing.assert_allclose(got90["upper"], hi_sm, atol=1e-12)


# Newcombe (1998), Table I, method 5 (Clopper-Pearson "exact"): from memory.
NEWCOMBE_EXACT = {
    (81, 263): (0.2527, 0.3676),
    (15, 148): (0.0578, 0.1617),
    (0, 20): (0.0000, 0.1684),
    (1, 29): (0.0009, 0.1776),
}


def test_exact_limits_match_newcombe_scipy_and_statsmodels():
    pairs = list(NEWCOMBE_EXACT)
    deaths = pd.Series([d for d, _ in pairs], index=list("abcd"))
    cases = pd.Series([n for _, n in pairs], index=list("abcd"))
    got = case_fatality(deaths, cases)  # exact is the default
    want = np.array(list(NEWCOMBE_EXACT.values()))
    np.testing.assert_allclose(got[["lower", "upper"]].to_numpy(), want, atol=6e-5)
    for (d, n), (lo, hi) in zip(pairs, got[["lower", "upper"]].to_numpy(), strict=True):
        ci = stats.binomtest(d, n).proportion_ci(0.95, method="exact")  # scipy
        assert (lo, hi) == pytest.approx((ci.low, ci.high), abs=1e-10)
    lo_sm, hi_sm = proportion_confint(deaths, cases, alpha=0.1, method="beta")  # statsmodels
    got90 = case_fatality(deaths, cases, conf=0.9)
    np.testing.assert_allclose(got90["lower"], lo_sm, atol=1e-10)
    np.testing.assert_allclose(got90["upper"], hi_sm, atol=1e-10)


def _exact_cover(n, p_true, method, threshold=None):
    """Coverage (or flag rate) summed over scipy's binomial pmf: no simulation."""
    d = np.arange(n + 1)
    res = case_fatality(pd.Series(d), pd.Series(np.full(n + 1, n)), method=method,
                        threshold=p_true if threshold is None else threshold)  # fmt: skip
    pmf = stats.binom.pmf(d, n, p_true)  # scipy
    inside = (res["lower"].to_numpy() <= p_true) & (p_true <= res["upper"].to_numpy())
    return float(pmf @ inside), float(pmf @ res["above_threshold"].to_numpy(dtype=bool))


def test_exact_interval_coverage_and_flag_rate_at_low_cfr():
    # Clopper & Pearson (1934): coverage >= conf for every true proportion; checked exactly
    # by summing scipy's binomial pmf over every outcome, for n 5..200 and CFR 0.5%..5%.
    worst_cover, worst_flag = 1.0, 0.0
    for n in range(5, 201, 5):
        for p_true in (0.005, 0.008, 0.01, 0.02, 0.03, 0.05):
            cover, flag = _exact_cover(n, p_true, "exact")
            worst_cover, worst_flag = min(worst_cover, cover), max(worst_flag, flag)
    assert worst_cover >= 0.95 - 1e-12
    assert worst_flag <= 0.025 + 1e-12  # flag fires at most alpha/2 at CFR = threshold
    # Wilson's known shortfall near 1% (Brown, Cai & DasGupta 2001, Stat. Sci. 16, 101-133)
    assert min(_exact_cover(n, 0.008, "wilson")[0] for n in range(5, 101, 5)) < 0.9


# --- empirical Bayes against esda on libpysal's built-in data ----------------------------------
def _read_gal(name, ids):
    """A shipped .gal file as a libpysal Graph over string ids, in the table's row order."""
    g = read_gal(libpysal.examples.get_path(name))
    adj = g.adjacency.reset_index()
    adj["focal"] = adj["focal"].astype(str)
    adj["neighbor"] = adj["neighbor"].astype(str)
    order = pd.Categorical(adj["focal"], categories=ids)
    adj = adj.iloc[np.argsort(order.codes, kind="stable")]
    return Graph.from_adjacency(adj)


def _stl():
    table = pd.read_csv(libpysal.examples.get_path("stl_hom.csv"))
    ids = pd.Index([str(i) for i in range(1, len(table) + 1)], name="unit_id")
    cases = pd.Series(table["HC7984"].to_numpy(), index=ids)
    pop = pd.Series(table["PO7984"].to_numpy(), index=ids)
    return cases, pop, _read_gal("stl.gal", ids)  # rook contiguity


def _sids():
    table = read_dataframe(libpysal.examples.get_path("sids2.dbf"), read_geometry=False)
    ids = pd.Index(table["FIPSNO"].astype(str), name="unit_id")
    cases = pd.Series(table["SID74"].to_numpy(dtype=float), index=ids)
    pop = pd.Series(table["BIR74"].to_numpy(dtype=float), index=ids)
    return cases, pop, _read_gal("sids2.gal", ids)  # rook contiguity


DATA = {"stl": _stl, "sids2": _sids}


def _graph(g, kind):
    return BorderGraph.from_graph(g) if kind == "BorderGraph" else g


# esda's Empirical_Bayes docstring output on stl (HC7984 / PO7984), first five values.
ESDA_DOC_EB_STL = [2.36718950e-05, 4.54539167e-05, 4.78114019e-05, 2.76907146e-05, 6.58989323e-05]
# esda's Spatial_Empirical_Bayes docstring output on stl with stl.gal, first five values.
ESDA_DOC_SEB_STL = [4.01485749e-05, 3.62437513e-05, 4.93034844e-05, 5.09387329e-05, 3.72735210e-05]


@pytest.mark.parametrize("data", list(DATA))
def test_global_eb_matches_esda(data):
    cases, pop, _ = DATA[data]()
    got = smooth_rates(cases, pop, per=1)
    want = Empirical_Bayes(cases.to_numpy(), pop.to_numpy()).r.ravel()
    np.testing.assert_allclose(got.to_numpy(), want, rtol=1e-10)
    if data == "stl":
        np.testing.assert_allclose(got.iloc[:5], ESDA_DOC_EB_STL, rtol=1e-7)


@pytest.mark.parametrize("kind", ["BorderGraph", "Graph"])
@pytest.mark.parametrize("data", list(DATA))
def test_spatial_eb_matches_esda(data, kind):
    cases, pop, g = DATA[data]()
    got = smooth_rates(cases, pop, graph=_graph(g, kind), per=1)
    assert list(g.unique_ids) == list(cases.index)
    want = Spatial_Empirical_Bayes(cases.to_numpy(), pop.to_numpy(), g.to_W()).r.ravel()
    np.testing.assert_allclose(got.reindex(cases.index).to_numpy(), want, rtol=1e-9)
    if data == "stl":
        np.testing.assert_allclose(got.loc[cases.index[:5]], ESDA_DOC_SEB_STL, rtol=1e-7)


@pytest.mark.parametrize("data", list(DATA))
def test_assuncao_reis_standardisation_matches_esda(data):
    cases, pop, _ = DATA[data]()
    got = eb_standardised(cases, pop)
    want = assuncao_rate(cases.to_numpy(), pop.to_numpy())
    np.testing.assert_allclose(got.to_numpy(), want, rtol=1e-10)
