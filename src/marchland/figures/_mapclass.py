"""Classing and legend wording for marchland's maps: each unit's colour, each legend line.

Private to :mod:`marchland.figures.maps`. Nothing here draws: every helper takes values and returns
per-unit colours (a Series on the unit index) or legend entries ``(label, patch style)`` for
:func:`marchland.figures._mapkit._legend`, so each map family classes its values in one place.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence

import numpy as np
import pandas as pd

from ._mapkit import (
    AFFECTED_COLOUR,
    ARRIVAL_RAMP,
    DEPOT_COLOUR,
    EXISTING_DEPOT_COLOUR,
    FRONT_COLOUR,
    NO_REPORT_COLOUR,
    NO_REPORT_HATCH,
    NOT_CANDIDATE_COLOUR,
    NOT_TESTED_HATCH,
    OTHER_COLOUR,
    PRIORITY_COLOURS,
    RATE_COLOURS,
    RISK_BINS,
    RISK_COLOURS,
    ZERO_COLOUR,
    _fmt_num,
    _ramp,
)


def _swatch(colour: str) -> dict:
    """Return the legend patch of a plain fill."""
    return {"facecolor": colour, "edgecolor": "#7d7a72", "linewidth": 0.4}


# --- rates ------------------------------------------------------------------------------------
def _rate_bounds(values, k: int) -> np.ndarray:
    """Fisher-Jenks upper bounds on pooled positive values (see ``maps.rate_classes``)."""
    x = np.asarray(values, dtype=float).ravel()
    x = np.sort(x[np.isfinite(x) & (x > 0)])
    if x.size == 0:
        return np.array([])
    distinct = np.unique(x)
    if distinct.size <= k:
        return distinct
    if x.size > 300:
        # Evenly spaced order statistics: exact Fisher-Jenks is quadratic in n and
        # mapclassify's sampled variant draws at random.
        x = x[np.linspace(0, x.size - 1, 300).round().astype(int)]
    bins = natural_breaks(x, k)
    bins[-1] = distinct[-1]
    return np.unique(bins)


def natural_breaks(sorted_values: np.ndarray, k: int) -> np.ndarray:
    """Return the upper bounds of the ``k`` Fisher-Jenks classes of sorted values.

    The exact dynamic programme of Fisher (1958) as Jenks (1977) applied it to map classes:
    the partition into ``k`` runs of the sorted values with the least total within-class sum
    of squares. Each class count is one vectorised step over all (start, end) pairs, so the
    cost is ``k`` array operations on an ``n x n`` table (``n`` is at most 300 here).

    Written here rather than calling ``mapclassify.FisherJenks`` only because mapclassify
    compiles its numba kernel when it is imported (1.6-2.8 s in every fresh process, not
    cached), more than all the month's classing; the bins are the same (checked against
    ``mapclassify.FisherJenks`` on libpysal's datasets in tests/test_maps.py). Ties go to the
    longest last class, as in mapclassify.

    Parameters
    ----------
    sorted_values : numpy.ndarray
        Finite values in ascending order, more than ``k`` distinct.
    k : int
        Number of classes.

    Returns
    -------
    numpy.ndarray
        ``k`` class upper bounds, the last the largest value.

    References
    ----------
    Fisher, W. D. (1958). On grouping for maximum homogeneity. JASA 53, 789-798.
    Jenks, G. F. (1977). Optimal data classification for choropleth maps. University of
    Kansas, Occasional paper 2.

    Examples
    --------
    >>> natural_breaks(np.array([1.0, 2, 3, 10, 11, 12, 30, 31]), 3).tolist()
    [3.0, 12.0, 31.0]
    """
    x = np.asarray(sorted_values, dtype=float)
    n = x.size
    s1 = np.concatenate([[0.0], np.cumsum(x)])
    s2 = np.concatenate([[0.0], np.cumsum(x * x)])
    # ssd[a, b]: within sum of squares of x[a..b] (0-based, inclusive); inf where a > b.
    a = np.arange(n)[:, None]
    b = np.arange(n)[None, :]
    count = (b - a + 1).astype(float)
    with np.errstate(divide="ignore", invalid="ignore"):
        ssd = (s2[b + 1] - s2[a]) - (s1[b + 1] - s1[a]) ** 2 / count
    ssd = np.where(b >= a, np.maximum(ssd, 0.0), np.inf)
    cost = ssd[0].copy()  # cost[b]: best cost of x[0..b] in one class
    starts = np.zeros((k, n), dtype=int)  # starts[j, b]: first index of the last class
    for j in range(1, k):
        # The last class runs a..b; the first j classes cover x[0..a-1] (cost[a-1]).
        total = ssd[1:] + cost[:-1, None]  # rows a = 1..n-1
        starts[j] = np.argmin(total, axis=0) + 1  # first minimum: the longest last class
        cost = total[starts[j] - 1, np.arange(n)]
    bounds = np.empty(k)
    end = n - 1
    for j in range(k - 1, -1, -1):
        bounds[j] = x[end]
        end = starts[j, end] - 1
    return bounds


def _class_of(values: pd.Series, bins: np.ndarray) -> np.ndarray:
    """Class index (0..len(bins)-1) of positive values; -1 zero, -2 missing."""
    v = values.to_numpy(dtype=float)
    out = np.full(v.shape, -2, dtype=int)
    pos = np.isfinite(v) & (v > 0)
    out[np.isfinite(v) & (v <= 0)] = -1
    if bins.size:
        out[pos] = np.minimum(np.searchsorted(bins, v[pos], side="left"), bins.size - 1)
    return out


def _class_labels(bins: np.ndarray) -> list[str]:
    lows = np.concatenate([[0.0], bins[:-1]])
    labels = []
    for i, (lo, hi) in enumerate(zip(lows, bins, strict=True)):
        left = "above 0" if i == 0 else f"above {_fmt_num(lo)}"
        labels.append(f"{left} to {_fmt_num(hi)}")
    return labels


def _rate_ramp(bins: np.ndarray) -> list[str]:
    return _ramp(RATE_COLOURS, max(len(bins), 1))


def _rate_colours(rate: pd.Series, bins: np.ndarray) -> tuple[pd.Series, np.ndarray]:
    """Per-unit fill and class (-1 reported zero, -2 no report) of a rate."""
    classes = _class_of(rate, bins)
    out = np.where(
        classes >= 0,
        np.array(_rate_ramp(bins), dtype=object)[np.maximum(classes, 0)],
        np.where(classes == -1, ZERO_COLOUR, NO_REPORT_COLOUR),
    )
    return pd.Series(out, index=rate.index), classes


def _rate_entries(bins: np.ndarray, classes: np.ndarray) -> list:
    entries = [
        (lab, _swatch(c)) for lab, c in zip(_class_labels(bins), _rate_ramp(bins), strict=True)
    ]
    entries.append(("0 (reported zero)", _swatch(ZERO_COLOUR)))
    if (classes == -2).any():
        entries.append(
            (
                "no report in the period",
                {
                    "facecolor": NO_REPORT_COLOUR,
                    "edgecolor": "#9a968c",
                    "hatch": NO_REPORT_HATCH,
                    "linewidth": 0.4,
                },
            )
        )
    return entries


# --- clusters ---------------------------------------------------------------------------------
def _cluster_colours(lab: pd.Series, colours: Mapping[str, str]) -> pd.Series:
    return lab.map(lambda x: colours.get(x, OTHER_COLOUR) if isinstance(x, str) else OTHER_COLOUR)


def _cluster_entries(
    lab: pd.Series,
    colours: Mapping[str, str],
    *,
    legend: Mapping[str, str] | None,
    always: Sequence[str],
    untested: set,
) -> list:
    wording = dict(legend or {})
    entries = []
    for key, colour in colours.items():
        n = int((lab == key).sum())
        if n == 0 and key not in (always or ()):
            continue
        style = _swatch(colour)
        if key in untested:
            style["hatch"] = NOT_TESTED_HATCH
        entries.append((f"{wording.get(key, key)} ({n})", style))
    if lab.isna().any():
        entries.append((f"not in the analysis ({int(lab.isna().sum())})", _swatch(OTHER_COLOUR)))
    return entries


# --- arrival ----------------------------------------------------------------------------------
def _arrival_classes(arr: pd.Series) -> tuple[pd.Series, list]:
    """Fill and legend entries by calendar quarter of arrival (half-years past eight classes)."""
    known = arr.dropna()
    col = pd.Series(OTHER_COLOUR, index=arr.index, dtype=object)
    entries = []
    if len(known):
        freq = "Q"
        periods = (known + pd.Timedelta(days=3)).dt.to_period(freq)
        if periods.max().ordinal - periods.min().ordinal + 1 > 8:
            freq = "2Q"
            periods = (known + pd.Timedelta(days=3)).dt.to_period("Q")
            periods = periods.map(lambda p: (p.year, (p.quarter - 1) // 2))
        classes = sorted(periods.unique())
        ramp = _ramp(ARRIVAL_RAMP, len(classes))
        lookup = dict(zip(classes, ramp, strict=True))
        col.loc[known.index] = periods.map(lookup).to_numpy()
        for c, colour in zip(classes, ramp, strict=True):
            if freq == "Q":
                label = f"{c.start_time:%b}-{c.end_time:%b %Y}"
            else:
                year, half = c
                label = f"{'Jan-Jun' if half == 0 else 'Jul-Dec'} {year}"
            n = int((periods == c).sum())
            entries.append((f"{label} ({n})", _swatch(colour)))
    entries.append((f"no case reported yet ({int(arr.isna().sum())})", _swatch(OTHER_COLOUR)))
    return col, entries


def _front_lines(fronts, current: str | None) -> list[tuple[str, str, float]]:
    """Legend lines for the month fronts drawn by ``_maplayers._draw_fronts``."""
    lines = []
    if fronts is not None and len(fronts):
        lines.append(("outline of a month's newly affected area", "#2a2723", 0.9))
        if current is not None and current in fronts.index:
            month = pd.Period(current, freq="M")
            lines.append((f"newly affected in {month:%B %Y}", FRONT_COLOUR, 1.8))
    return lines


# --- border risk ------------------------------------------------------------------------------
def _risk_colours(probability: pd.Series, affected: Sequence) -> tuple[pd.Series, np.ndarray]:
    """Fill of candidates by risk class, and of affected units; the class of each candidate."""
    p = probability.astype(float)
    bins = np.asarray(RISK_BINS)
    cls = np.minimum(np.searchsorted(bins, p.to_numpy(), side="left"), len(bins) - 1)
    col = pd.Series(np.array(RISK_COLOURS, dtype=object)[cls], index=p.index)
    aff = pd.Index(list(affected))
    col = pd.concat([col, pd.Series(AFFECTED_COLOUR, index=aff.difference(col.index))])
    return col, cls


def _risk_entries(cls: np.ndarray, *, silent: bool) -> list:
    lows = (0.0, *RISK_BINS[:-1])
    entries = [
        (f"{lo:.0%} to {hi:.0%} ({int((cls == i).sum())})", _swatch(c))
        for i, (lo, hi, c) in enumerate(zip(lows, RISK_BINS, RISK_COLOURS, strict=True))
    ]
    entries.append(("affected (cases by the as-of date)", _swatch(AFFECTED_COLOUR)))
    entries.append(("not a candidate", _swatch(NOT_CANDIDATE_COLOUR)))
    if silent:
        entries.append(
            (
                "silent: no recent report",
                {"facecolor": "none", "edgecolor": "#1d1d1b", "linestyle": "--", "linewidth": 0.9},
            )
        )
    return entries


# --- supplies ---------------------------------------------------------------------------------
def _priority_colours(rank: pd.Series) -> pd.Series:
    r = rank.astype(float)
    bands = np.select([r <= 5, r <= 10, r <= 20], [0, 1, 2], 3)
    return pd.Series(np.array(PRIORITY_COLOURS, dtype=object)[bands], index=r.index)


def _existing(depots: pd.DataFrame) -> np.ndarray:
    if "existing" not in depots:
        return np.zeros(len(depots), dtype=bool)
    return depots["existing"].fillna(False).astype(bool).to_numpy()


def _priority_entries(depots, reach_km: float | None, sites) -> list:
    bands = ("rank 1 to 5", "rank 6 to 10", "rank 11 to 20", "rank above 20")
    entries = [(lab, _swatch(c)) for lab, c in zip(bands, PRIORITY_COLOURS, strict=True)]
    entries.append(("not a candidate", _swatch(OTHER_COLOUR)))
    if depots is not None and len(depots):
        existing = _existing(depots)
        if (~existing).any():
            entries.append(
                (
                    f"depot to open ({int((~existing).sum())})",
                    {"facecolor": DEPOT_COLOUR, "edgecolor": "white"},
                )
            )
        if existing.any():
            entries.append(
                (
                    f"existing depot ({int(existing.sum())})",
                    {"facecolor": EXISTING_DEPOT_COLOUR, "edgecolor": "white"},
                )
            )
        if reach_km:
            entries.append(
                (
                    f"reach: {reach_km:g} km straight line",
                    {"facecolor": "none", "edgecolor": DEPOT_COLOUR, "linestyle": "--"},
                )
            )
    if sites is not None and len(sites):
        entries.append(("candidate depot site", {"facecolor": "white", "edgecolor": DEPOT_COLOUR}))
    return entries
