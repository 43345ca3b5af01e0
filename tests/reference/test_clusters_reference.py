"""The space-time scan kernel against the formulas of its paper, computed by brute force.

Source: Kulldorff M, Heffernan R, Hartman J, Assunção R, Mostashari F (2005). A space-time
permutation scan statistic for disease outbreak detection. PLoS Med 2(3): e59, Methods:
expected cases mu_zd = n_z * n_d / N, mu_A = sum over the cylinder's cells, and the generalised
likelihood ratio GLR = (c_A/mu_A)^c_A * ((C - c_A)/(C - mu_A))^(C - c_A), used when c_A > mu_A.
Also scipy.stats.contingency.expected_freq (an outside library) for the null expectations.
Covered: every candidate cylinder of a 15-unit, 8-week example (bases by centroid distance up
to half of all cases, prospective heights 1..4), the most likely cluster, and the permutation
null keeping both margins.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.stats.contingency import expected_freq

from marchland.clusters import _scan

MAX_WEEKS = 4
MAX_SHARE = 0.5


@pytest.fixture(params=[0, 1, 2])
def example(request):
    rng = np.random.default_rng(100 + request.param)
    xy = rng.uniform(0, 50_000, size=(15, 2))  # continuous: no distance ties
    table = rng.poisson(rng.gamma(3.0, 1.0, size=(15, 1)) * np.ones((1, 8))).astype(float)
    table[:3, -2:] += rng.poisson(4.0, size=(3, 2))  # some recent excess to find
    return xy, table


def brute_force(xy, table):
    """Every cylinder's LLR, written plainly from the paper (loops on purpose)."""
    n_units, n_weeks = table.shape
    total = table.sum()
    n_z = table.sum(axis=1)
    n_d = table.sum(axis=0)
    out = {}
    for i in range(n_units):
        d = [math.dist(xy[i], xy[j]) for j in range(n_units)]
        ranked = sorted(range(n_units), key=lambda j: d[j])
        zone = []
        for k in range(n_units):
            zone.append(ranked[k])
            if sum(n_z[z] for z in zone) > MAX_SHARE * total:
                break  # the base may hold at most half of all cases
            for h in range(1, MAX_WEEKS + 1):
                days = range(n_weeks - h, n_weeks)  # prospective: ends at the last week
                c = sum(table[z, t] for z in zone for t in days)
                mu = sum(n_z[z] * n_d[t] / total for z in zone for t in days)
                if c > mu:
                    glr = (c / mu) ** c * ((total - c) / (total - mu)) ** (total - c)
                    llr = math.log(glr)
                else:
                    llr = 0.0
                out[(h - 1, i, k)] = (frozenset(zone), c, mu, llr)
    return out


def test_every_cylinder_matches_the_paper(example):
    xy, table = example
    cell = np.outer(table.sum(1), table.sum(0)) / table.sum()
    order, valid, obs, mu, llr = _scan.candidates(
        table, cell, xy, table.sum(1), MAX_SHARE * table.sum(), MAX_WEEKS
    )
    ref = brute_force(xy, table)
    assert len(ref) > 2 * 15 * MAX_WEEKS  # bases of several sizes, not only single units
    assert sum(v[3] > 0 for v in ref.values()) > 10
    got = set(map(tuple, np.argwhere(np.broadcast_to(valid, llr.shape)).tolist()))
    assert got == set(ref)
    for (h, i, k), (zone, c, m, r) in ref.items():
        assert frozenset(order[i, : k + 1]) == zone
        assert obs[h, i, k] == pytest.approx(c)
        assert mu[h, i, k] == pytest.approx(m, rel=1e-12)
        assert llr[h, i, k] == pytest.approx(r, rel=1e-9, abs=1e-9)
    # The most likely cluster: same cylinder (base and height), same LLR.
    best_ref = max(ref.values(), key=lambda v: v[3])
    h, i, k = _scan.select_clusters(llr.max(axis=0), llr.argmax(axis=0), order, 1)[0]
    assert frozenset(order[i, : k + 1]) == best_ref[0]
    assert llr[h, i, k] == pytest.approx(best_ref[3], rel=1e-9)


def test_null_expectation_is_scipys_expected_freq(example):
    _, table = example
    # scipy.stats.contingency.expected_freq: row total * column total / grand total.
    np.testing.assert_allclose(
        np.outer(table.sum(1), table.sum(0)) / table.sum(), expected_freq(table)
    )


def test_permutation_null_keeps_both_margins(example):
    _, table = example
    table = table.copy()
    table[5] = 0  # a unit with no cases stays at zero
    draw = _scan.permutation_draw(table, np.random.default_rng(7))
    sims = draw(50)
    np.testing.assert_array_equal(sims.sum(axis=2), np.broadcast_to(table.sum(1), (50, 15)))
    np.testing.assert_array_equal(sims.sum(axis=1), np.broadcast_to(table.sum(0), (50, 8)))
    assert not (sims == table).all(axis=(1, 2)).all()
