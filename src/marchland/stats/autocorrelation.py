"""Hotspots: local Moran's I (plain and rate-adjusted), Getis-Ord Gi*, global Moran's I.

Every function takes a ``graph`` (a marchland ``BorderGraph`` or a plain libpysal ``Graph``)
and values indexed by ``unit_id``, and returns a DataFrame on the graph's unit ids (or a
frozen dataclass for the global statistic). Inference is by conditional permutation
(Anselin 1995), with pseudo p-values adjusted across units by the Benjamini-Hochberg false
discovery rate; a unit gets a cluster label only where its q-value is below ``fdr``.

Conventions, stated once:

- **Scaling of local I.** ``I_i = (n - 1) z_i sum_j w_ij z_j / sum_j z_j^2`` with row-
  standardised weights and ``z`` the values standardised by their mean and (population)
  standard deviation. This is esda's ``Moran_Local.Is``; Anselin (1995) writes ``n`` in place
  of ``n - 1``, so his values are larger by ``n / (n - 1)``. The sign, the quadrant and the
  permutation p-value do not depend on the choice.
- **Pseudo p-value: two-sided.** With ``E`` of ``P`` permuted statistics at least as far
  from the unit's exact conditional-permutation mean as the observed one (ties count),
  ``p = (E + 1) / (P + 1)``: a plain permutation test of ``|I - E[I]|``. esda's ``p_sim`` is
  the folded one-sided value ``(min(M, P - M) + 1) / (P + 1)``; under the null it falls
  below 0.05 about 10% of the time, and fed to FDR it labelled a random map about twice as
  often as promised.
- **Number of permutations.** ``permutations`` draws for every unit, then more only for units
  with few permuted values as extreme as theirs, up to ``max_permutations`` (default: enough
  that BH can label a lone extreme unit among the ``m`` tested, ``4 m / fdr``; with 999 draws
  for all, BH cannot label anything once ``m`` passes about 25). Column ``draws`` gives each
  unit's count; see :func:`marchland.stats._permute.adaptive_counts` for why the p-values
  stay valid.
- **Units without a value** (not reported, no population) are left out of the statistic
  and the permutations; **islands** (no neighbour, or no neighbour with a value) stay in
  the standardisation and the permutation pool but get no statistic. Both get NaN and a
  ``reason``.

Significance is not importance: a cluster label says the pattern is unlikely under spatial
randomness, given the reported numbers, which are incomplete and delayed.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd
from scipy import sparse, stats

from ..errors import InputError
from ..graph.border import BorderGraph, as_border_graph
from . import _permute
from ._align import align_units
from ._getisord import _gi_star_z
from ._globalmoran import GlobalMoran, global_moran_arrays
from .rates import eb_standardised

QUADRANTS = ("High-High", "Low-Low", "High-Low", "Low-High")
NOT_SIGNIFICANT = "Not significant"
NO_NEIGHBOURS = "No neighbours"
NO_VALUE = "No value"
HOT, COLD = "Hot spot", "Cold spot"
WEIGHTINGS = ("binary", "shared")

# The cluster map's palette (our own: deep purple / teal / ochre / pale green, greys for the
# rest). maps.py imports these; keep the keys equal to the labels above.
CLUSTER_COLOURS: dict[str, str] = {
    "High-High": "#4a1c6e",  # deep purple
    "Low-Low": "#1b7f7a",  # teal
    "High-Low": "#c8901e",  # ochre
    "Low-High": "#b8dca0",  # pale green
    NOT_SIGNIFICANT: "#d9d9d6",  # light grey
    NO_NEIGHBOURS: "#ffffff",  # white, drawn with an outline
    NO_VALUE: "#a3a3a0",  # mid grey
}
# Legend wording for the cluster map, in the order the legend lists it.
CLUSTER_LEGEND: dict[str, str] = {
    "High-High": "Raised rate, raised-rate neighbours (cluster)",
    "Low-Low": "Low rate, low-rate neighbours",
    "High-Low": "Raised rate, low-rate neighbours (stands out)",
    "Low-High": "Low rate, raised-rate neighbours (stands out)",
    NOT_SIGNIFICANT: "No pattern beyond chance (after FDR)",
    NO_NEIGHBOURS: "No neighbouring unit: not tested",
    NO_VALUE: "No report or no population: not tested",
}
# Gi* view: concentration of high (or low) values around a unit.
HOTSPOT_COLOURS: dict[str, str] = {
    HOT: "#4a1c6e",
    COLD: "#1b7f7a",
    NOT_SIGNIFICANT: "#d9d9d6",
    NO_NEIGHBOURS: "#ffffff",
    NO_VALUE: "#a3a3a0",
}

LOCAL_COLUMNS = ("I", "p", "q", "quadrant", "label", "z", "lag", "z_sim", "draws", "reason")
GI_COLUMNS = ("G", "z", "p_norm", "p", "q", "label", "draws", "reason")


# --- helpers -------------------------------------------------------------------------------
def bh_qvalues(p: pd.Series | np.ndarray) -> np.ndarray:
    """Benjamini-Hochberg adjusted p-values (q-values); NaN entries are left out and kept NaN.

    ``q_(i) = min_{j >= i} p_(j) m / j`` over the ``m`` non-missing p-values sorted
    ascending, capped at 1. Written here because statsmodels' ``multipletests`` does not
    skip missing p-values (units without a statistic); the test checks it against it.

    References
    ----------
    Benjamini, Y. & Hochberg, Y. (1995). Controlling the false discovery rate. J. R. Stat.
    Soc. B 57, 289-300.

    Examples
    --------
    >>> bh_qvalues(np.array([0.01, 0.04, np.nan, 0.03])).round(3).tolist()
    [0.03, 0.04, nan, 0.04]
    """
    p = np.asarray(p, dtype=float)
    q = np.full(p.shape, np.nan)
    ok = np.flatnonzero(np.isfinite(p))
    m = len(ok)
    if m == 0:
        return q
    order = ok[np.argsort(p[ok], kind="stable")]
    ranked = p[order] * m / np.arange(1, m + 1)
    q[order] = np.minimum(np.minimum.accumulate(ranked[::-1])[::-1], 1.0)
    return q


def _rng(seed: int | np.random.Generator | None) -> np.random.Generator:
    return seed if isinstance(seed, np.random.Generator) else np.random.default_rng(seed)


def _check_options(permutations: int, fdr: float, max_permutations: int | None = None) -> None:
    if not isinstance(permutations, int | np.integer) or permutations < 1:
        raise ValueError(
            f"'permutations' needs to be a whole number >= 1. {permutations!r} was given instead."
        )
    if not 0 < fdr < 1:
        raise ValueError(f"'fdr' needs to be between 0 and 1. {fdr!r} was given instead.")
    if max_permutations is not None and (
        not isinstance(max_permutations, int | np.integer) or max_permutations < permutations
    ):
        raise ValueError(
            "'max_permutations' needs to be None or a whole number >= 'permutations'. "
            f"{max_permutations!r} was given instead."
        )


def _max_draws(m: int, permutations: int, fdr: float, max_permutations: int | None) -> int:
    if max_permutations is not None:
        return int(max_permutations)
    return max(int(permutations), _permute.needed_permutations(m, fdr))


@dataclass(frozen=True)
class _Prepared:
    """Values aligned to the graph, the usable units and their weights."""

    ids: pd.Index
    y: np.ndarray  # values of the usable units
    used: np.ndarray  # positions (in ids) of the usable units
    weights: sparse.csr_matrix  # over the usable units, zero diagonal
    reason: np.ndarray  # per unit in ids: "" or why it has no statistic


def _rate_z(cases: pd.Series, population: pd.Series, graph: object):
    """Return the graph and the Assuncao-Reis standardised rates on its units."""
    bg = as_border_graph(graph)
    cases = align_units(cases, bg.ids, "cases", "the graph")
    population = align_units(population, bg.ids, "population", "the graph")
    return bg, eb_standardised(cases, population)


def _prepare(values: pd.Series, graph: object, weighting: str, *, name: str = "values",
             row_standardise: bool = True) -> _Prepared:  # fmt: skip
    if weighting not in WEIGHTINGS:
        raise ValueError(
            f"'weighting' needs to be one of {WEIGHTINGS}. {weighting!r} was given instead."
        )
    bg = as_border_graph(graph)
    aligned = align_units(values, bg.ids, name, "the graph")
    try:
        y_all = pd.to_numeric(aligned).astype("Float64").to_numpy(dtype=float, na_value=np.nan)
    except (TypeError, ValueError) as exc:
        raise InputError(f"{name} must be numbers per unit_id ({exc})", column=name) from None
    if np.isinf(y_all).any():
        unit = bg.ids[np.flatnonzero(np.isinf(y_all))[0]]
        raise InputError(f"{name} must be finite; unit {unit!r} is infinite", column=name)
    ok = np.isfinite(y_all)
    reason = np.where(ok, "", "no value (not reported or no population)").astype(object)
    sub = bg if ok.all() else bg.subgraph(bg.ids[ok])
    w = sparse.csr_matrix(sub.weights(weighting, row_standardise=row_standardise).sparse)
    w.setdiag(0)  # islands carry a zero self-weight in the libpysal view
    w.eliminate_zeros()
    used = np.flatnonzero(ok)
    card = np.diff(w.indptr)
    isolated = used[card == 0]
    lost = np.isin(bg.ids[isolated], bg.islands)
    reason[isolated] = np.where(lost, "no neighbours in the graph", "no neighbour with a value")
    return _Prepared(ids=bg.ids, y=y_all[used], used=used, weights=w, reason=reason)


# --- local Moran's I -----------------------------------------------------------------------
def _local_moran(prep: _Prepared, permutations: int, seed, fdr: float,
                 max_permutations: int | None = None,
                 method: str = "auto") -> pd.DataFrame:  # fmt: skip
    n_all = len(prep.ids)
    y = prep.y
    n = len(y)
    w = prep.weights
    card = np.diff(w.indptr)
    out = {c: np.full(n_all, np.nan) for c in ("I", "p", "z", "lag", "z_sim")}
    draws = np.zeros(n_all, dtype=np.int64)
    max_draws = permutations
    quadrant = np.full(n_all, None, dtype=object)
    reason = prep.reason.copy()
    sd = y.std() if n else 0.0
    if n < 3 or sd == 0:
        reason[prep.used] = "fewer than 3 units with a value" if n < 3 else "all values equal"
    else:
        z = (y - y.mean()) / sd
        den = (z * z).sum()
        lag = w @ z
        # esda's expression order, so equal inputs give bit-equal statistics
        local_i = (n - 1) * z * lag / den
        tested = np.flatnonzero(card > 0)
        max_draws = _max_draws(len(tested), permutations, fdr, max_permutations)
        scaling = (n - 1) / den

        def statistic(units: np.ndarray, lags: np.ndarray) -> np.ndarray:
            return z[units][None, :] * lags * scaling

        # exact mean of the permuted I: the lag's mean is the mean of the other n - 1 values
        row_sum = np.asarray(w.sum(axis=1)).ravel()
        centre = z * scaling * row_sum * (z.sum() - z) / (n - 1)
        _, _, extreme, n_draws, mean, std = _permute.adaptive_counts(
            z, w, local_i, statistic, centre=centre, rows=tested, permutations=permutations,
            max_permutations=max_draws, rng=_rng(seed), method=method,
        )  # fmt: skip
        pos = prep.used[tested]
        out["I"][pos] = local_i[tested]
        out["z"][prep.used] = z
        out["lag"][pos] = lag[tested]
        draws[pos] = n_draws[tested]
        out["p"][pos] = _permute.two_sided_pvalues(extreme[tested], n_draws[tested])
        with np.errstate(divide="ignore", invalid="ignore"):
            out["z_sim"][pos] = (local_i[tested] - mean[tested]) / std[tested]
        hi, hi_lag = z[tested] > 0, lag[tested] > 0
        quadrant[pos] = np.select(
            [hi & hi_lag, ~hi & ~hi_lag, hi & ~hi_lag], list(QUADRANTS[:3]), QUADRANTS[3]
        )
    q = bh_qvalues(out["p"])
    significant = np.isfinite(q) & (q < fdr)
    label = np.where(significant, quadrant, NOT_SIGNIFICANT).astype(object)
    label[reason == "no value (not reported or no population)"] = NO_VALUE
    label[np.isin(reason, ["no neighbours in the graph", "no neighbour with a value"])] = (
        NO_NEIGHBOURS
    )
    frame = pd.DataFrame(
        {
            "I": out["I"],
            "p": out["p"],
            "q": q,
            "quadrant": pd.array(quadrant, dtype="str"),
            "label": pd.array(label, dtype="str"),
            "z": out["z"],
            "lag": out["lag"],
            "z_sim": out["z_sim"],
            "draws": draws,
            "reason": pd.array(np.where(reason == "", None, reason), dtype="str"),
        },
        index=pd.Index(prep.ids, name="unit_id"),
    )
    frame.attrs.update(permutations=permutations, max_permutations=max_draws,
                       draws_used=int(draws.max(initial=0)), fdr=fdr,
                       pvalue="two-sided", scaling="n-1 (as esda)")  # fmt: skip
    return frame


def local_moran(
    values: pd.Series,
    graph: BorderGraph | object,
    *,
    permutations: int = 999,
    seed: int | np.random.Generator | None = None,
    fdr: float = 0.05,
    weighting: str = "binary",
    max_permutations: int | None = None,
) -> pd.DataFrame:
    """Local Moran's I with conditional permutation inference and FDR-controlled labels.

    Parameters
    ----------
    values : pandas.Series
        One value per unit_id of the graph (NaN / ``<NA>``: no value, left out).
    graph : BorderGraph or libpysal.graph.Graph
        Contiguity; weights are row-standardised.
    permutations : int
        Conditional permutations drawn for every unit (the first round).
    seed : int or numpy.random.Generator, optional
        Seed of ``numpy.random.default_rng`` for the permutations.
    fdr : float
        False discovery rate: a unit is labelled where its BH q-value is below it.
    weighting : {"binary", "shared"}
        Neighbour weights before row-standardising: equal, or by shared boundary length.
    max_permutations : int, optional
        Most draws any unit gets; more than ``permutations`` go only to units with few
        permuted values as extreme as theirs. Default ``4 m / fdr - 1`` for ``m`` tested
        units, so that BH can reach its level; equal to ``permutations`` turns refinement off.

    Returns
    -------
    pandas.DataFrame
        Indexed by unit_id: ``I`` (esda's (n-1) scaling, see the module notes), ``p`` (two-
        sided pseudo p-value), ``q`` (Benjamini-Hochberg), ``quadrant`` (High-High, Low-Low,
        High-Low, Low-High, from the sign of the standardised value and of its lag), ``label``
        (the quadrant where ``q < fdr``, else "Not significant"; "No neighbours" / "No
        value" for units not tested), ``z`` (standardised value), ``lag`` (its spatial lag),
        ``z_sim`` ((I - mean) / sd of the first round's permuted I), ``draws`` (permutations
        behind the unit's p) and ``reason`` (why a unit has no statistic, else missing).
        ``attrs`` hold ``permutations``, ``max_permutations`` and ``draws_used``.

    References
    ----------
    Anselin, L. (1995). Local indicators of spatial association - LISA. Geographical
    Analysis 27, 93-115. Benjamini, Y. & Hochberg, Y. (1995). J. R. Stat. Soc. B 57, 289-300.

    Examples
    --------
    >>> from libpysal.graph import Graph
    >>> from libpysal.weights import lat2W
    >>> g = Graph.from_W(lat2W(10, 10))  # a 10 x 10 grid, rook neighbours
    >>> row, col = np.divmod(np.arange(100), 10)
    >>> y = pd.Series(np.where((row < 4) & (col < 4), 9.0, 1.0) + np.arange(100) * 0.01,
    ...               index=g.unique_ids)
    >>> res = local_moran(y, g, seed=7)
    >>> res["label"].value_counts().to_dict()
    {'Not significant': 90, 'High-High': 10}
    """
    _check_options(permutations, fdr, max_permutations)
    prep = _prepare(values, graph, weighting)
    return _local_moran(prep, permutations, seed, fdr, max_permutations)


def hotspots(
    cases: pd.Series,
    population: pd.Series,
    graph: BorderGraph | object,
    *,
    permutations: int = 999,
    seed: int | np.random.Generator | None = None,
    fdr: float = 0.05,
    weighting: str = "binary",
    max_permutations: int | None = None,
) -> pd.DataFrame:
    """Rate-adjusted local Moran's I: clusters of high (or low) attack rates.

    Raw rates of small units are noisy; the Assuncao-Reis (1999) empirical Bayes
    standardisation divides each rate's deviation from the region's rate by its expected
    standard error, so a small district with 2 cases no longer looks like a cluster on its
    own. Local Moran's I of those standardised rates is then tested as in
    :func:`local_moran` (esda's ``Moran_Local_Rate``, with ties handled as in the module notes).

    Parameters
    ----------
    cases, population : pandas.Series
        Per unit_id of the graph. Units with cases not reported or no population are left
        out ("No value").
    graph : BorderGraph or libpysal.graph.Graph
        Contiguity.
    permutations, seed, fdr, weighting, max_permutations
        As for :func:`local_moran`.

    Returns
    -------
    pandas.DataFrame
        The columns of :func:`local_moran` (``I p q quadrant label z lag z_sim draws reason``);
        "High-High" marks a unit whose rate and neighbours' rates are raised.

    References
    ----------
    Assuncao, R. M. & Reis, E. A. (1999). A new proposal to adjust Moran's I for population
    density. Statistics in Medicine 18, 2147-2162.

    Examples
    --------
    >>> from libpysal.graph import Graph
    >>> from libpysal.weights import lat2W
    >>> g = Graph.from_W(lat2W(10, 10))
    >>> row, col = np.divmod(np.arange(100), 10)
    >>> cases = pd.Series(np.where((row < 4) & (col < 4), 60, 5), index=g.unique_ids)
    >>> pop = pd.Series(np.full(100, 10_000), index=g.unique_ids)
    >>> hotspots(cases, pop, g, seed=3)["label"].value_counts().to_dict()
    {'Not significant': 96, 'High-High': 4}
    """
    _check_options(permutations, fdr, max_permutations)
    bg, rate_z = _rate_z(cases, population, graph)
    prep = _prepare(rate_z, bg, weighting)
    return _local_moran(prep, permutations, seed, fdr, max_permutations)


# --- Getis-Ord Gi* -------------------------------------------------------------------------
def getis_ord(
    values: pd.Series,
    graph: BorderGraph | object,
    *,
    permutations: int = 999,
    seed: int | np.random.Generator | None = None,
    fdr: float = 0.05,
    max_permutations: int | None = None,
) -> pd.DataFrame:
    """Getis-Ord Gi* (the unit and its neighbours), a second view of where values concentrate.

    Binary contiguity with the unit itself included (weight 1). The z-score uses the
    general Ord-Getis variance; esda's ``G_Local`` variance holds for binary weights only.
    The permutation p-value uses the same conditional scheme, two-sided definition and
    adaptive number of draws as :func:`local_moran`.

    Parameters
    ----------
    values : pandas.Series
        Non-negative values (e.g. smoothed attack rates) per unit_id of the graph.
    graph : BorderGraph or libpysal.graph.Graph
        Contiguity.
    permutations, seed, fdr, max_permutations
        As for :func:`local_moran`.

    Returns
    -------
    pandas.DataFrame
        Indexed by unit_id: ``G`` (share of the total held by the unit and its neighbours),
        ``z`` (Ord-Getis z-score), ``p_norm`` (two-sided normal p of z), ``p`` (two-sided
        permutation p-value), ``q`` (Benjamini-Hochberg of ``p``), ``label`` ("Hot spot" /
        "Cold spot" where ``q < fdr``, by the sign of z; else "Not significant"; "No
        neighbours" / "No value" for units not tested), ``draws`` and ``reason``.

    References
    ----------
    Ord, J. K. & Getis, A. (1995). Local spatial autocorrelation statistics: distributional
    issues and an application. Geographical Analysis 27, 286-306.

    Examples
    --------
    >>> from libpysal.graph import Graph
    >>> from libpysal.weights import lat2W
    >>> g = Graph.from_W(lat2W(10, 10))
    >>> row, col = np.divmod(np.arange(100), 10)
    >>> y = pd.Series(np.where((row < 4) & (col < 4), 9.0, 1.0) + np.arange(100) * 0.01,
    ...               index=g.unique_ids)
    >>> getis_ord(y, g, seed=1)["label"].value_counts().to_dict()
    {'Not significant': 90, 'Hot spot': 10}
    """
    _check_options(permutations, fdr, max_permutations)
    prep = _prepare(values, graph, "binary", row_standardise=False)
    if (prep.y < 0).any():
        unit = prep.ids[prep.used[np.flatnonzero(prep.y < 0)[0]]]
        raise InputError(f"Gi* needs values >= 0; unit {unit!r} is negative", column="values")
    n_all, y, w = len(prep.ids), prep.y, prep.weights
    card = np.diff(w.indptr)
    tested = np.flatnonzero(card > 0)
    cols = {c: np.full(n_all, np.nan) for c in ("G", "z", "p_norm", "p")}
    draws = np.zeros(n_all, dtype=np.int64)
    max_draws = permutations
    reason = prep.reason.copy()
    if len(y) < 3 or y.sum() == 0 or y.std() == 0:
        reason[prep.used] = "fewer than 3 units with a value, or no variation"
    else:
        w_star = sparse.csr_matrix(w + sparse.identity(len(y), format="csr"))
        g, z = _gi_star_z(y, w_star)
        total = y.sum()
        max_draws = _max_draws(len(tested), permutations, fdr, max_permutations)

        def statistic(units: np.ndarray, lags: np.ndarray) -> np.ndarray:
            return (lags + y[units][None, :]) / total

        row_sum = np.asarray(w.sum(axis=1)).ravel()
        centre = (y + row_sum * (total - y) / (len(y) - 1)) / total  # exact permutation mean
        _, _, extreme, n_draws, _, _ = _permute.adaptive_counts(
            y, w, g, statistic, centre=centre, rows=tested, permutations=permutations,
            max_permutations=max_draws, rng=_rng(seed),
        )  # fmt: skip
        pos = prep.used[tested]
        draws[pos] = n_draws[tested]
        cols["G"][pos] = g[tested]
        cols["z"][pos] = z[tested]
        cols["p_norm"][pos] = 2 * stats.norm.sf(np.abs(z[tested]))
        cols["p"][pos] = _permute.two_sided_pvalues(extreme[tested], n_draws[tested])
    q = bh_qvalues(cols["p"])
    significant = np.isfinite(q) & (q < fdr)
    label = np.where(significant, np.where(cols["z"] > 0, HOT, COLD), NOT_SIGNIFICANT)
    label = label.astype(object)
    label[reason == "no value (not reported or no population)"] = NO_VALUE
    label[np.isin(reason, ["no neighbours in the graph", "no neighbour with a value"])] = (
        NO_NEIGHBOURS
    )
    frame = pd.DataFrame(
        {
            **{c: cols[c] for c in ("G", "z", "p_norm", "p")},
            "q": q,
            "label": pd.array(label, dtype="str"),
            "draws": draws,
            "reason": pd.array(np.where(reason == "", None, reason), dtype="str"),
        },
        index=pd.Index(prep.ids, name="unit_id"),
    )
    frame.attrs.update(permutations=permutations, max_permutations=max_draws,
                       draws_used=int(draws.max(initial=0)), fdr=fdr,
                       pvalue="two-sided")  # fmt: skip
    return frame


# --- global Moran's I ----------------------------------------------------------------------
def global_moran(
    values: pd.Series,
    graph: BorderGraph | object,
    *,
    permutations: int = 999,
    seed: int | np.random.Generator | None = None,
    weighting: str = "binary",
) -> GlobalMoran:
    """Global Moran's I with its normal (randomisation) and permutation p-values.

    Parameters
    ----------
    values : pandas.Series
        One value per unit_id of the graph (missing values are left out).
    graph : BorderGraph or libpysal.graph.Graph
        Contiguity; weights are row-standardised.
    permutations : int
        Random permutations of the values for ``p_sim``.
    seed : int or numpy.random.Generator, optional
        Seed of ``numpy.random.default_rng``.
    weighting : {"binary", "shared"}
        As for :func:`local_moran`.

    Returns
    -------
    GlobalMoran
        Frozen: ``I expected variance z p_norm p_sim permutations n``; ``p_sim`` as in the
        module notes (esda's folded definition without ties).

    References
    ----------
    Moran, P. A. P. (1950). Notes on continuous stochastic phenomena. Biometrika 37, 17-23.
    Cliff, A. D. & Ord, J. K. (1981). Spatial Processes. Pion, London.

    Examples
    --------
    >>> from libpysal.graph import Graph
    >>> from libpysal.weights import lat2W
    >>> g = Graph.from_W(lat2W(4, 4))
    >>> y = pd.Series(np.arange(16.0), index=g.unique_ids)
    >>> round(global_moran(y, g, permutations=99, seed=0).I, 4)
    0.75
    """
    _check_options(permutations, 0.5)
    prep = _prepare(values, graph, weighting)
    return global_moran_arrays(prep.y, prep.weights, permutations, _rng(seed))


def global_moran_rate(
    cases: pd.Series,
    population: pd.Series,
    graph: BorderGraph | object,
    *,
    permutations: int = 999,
    seed: int | np.random.Generator | None = None,
    weighting: str = "binary",
) -> GlobalMoran:
    """Global Moran's I of Assuncao-Reis standardised rates (esda's ``Moran_Rate``).

    Parameters
    ----------
    cases, population : pandas.Series
        Per unit_id of the graph.
    graph : BorderGraph or libpysal.graph.Graph
        Contiguity.
    permutations, seed, weighting
        As for :func:`global_moran`.

    Returns
    -------
    GlobalMoran

    References
    ----------
    Assuncao, R. M. & Reis, E. A. (1999). Statistics in Medicine 18, 2147-2162.

    Examples
    --------
    >>> from libpysal.graph import Graph
    >>> from libpysal.weights import lat2W
    >>> g = Graph.from_W(lat2W(4, 4))
    >>> cases = pd.Series(np.arange(16) * 3, index=g.unique_ids)
    >>> pop = pd.Series(np.full(16, 1_000), index=g.unique_ids)
    >>> global_moran_rate(cases, pop, g, permutations=99, seed=0).z > 3
    True
    """
    bg, rate_z = _rate_z(cases, population, graph)
    return global_moran(rate_z, bg, permutations=permutations, seed=seed, weighting=weighting)
