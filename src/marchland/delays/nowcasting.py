"""Reporting triangles and the nowcast of recent weeks, per region, country, province or unit.

Delay convention: a week's last day is its first day plus 6 days; on the as-of date ``A`` a week
is ``k = (A - last_day) // 7`` whole weeks old, and its value at delay ``d`` (0 <= d <= k) is
the latest revision received on or before ``A - 7 (k - d)``. The triangle's diagonals are thus
weekly snapshots taken on ``A``, ``A - 7``, ...; the newest diagonal is exactly what is known on
``A``, and a correction that lowers a count lowers the later cells. Only weeks that have ended
by ``A`` are shown.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from ._engine import bounds, estimate
from ._groups import KEY, check_args
from ._pattern import nb_draws

STATUSES = ("reported", "nowcast", "not-yet-due", "as-reported", "incomplete")
N_DRAWS = 4000  # draws for sums over countries; Monte Carlo error of a 90% limit ~ 1%


def _defaults(max_delay_weeks: int, window_weeks: int | None) -> tuple[int, int]:
    window = 2 * max_delay_weeks if window_weeks is None else int(window_weeks)
    if window < 1:
        raise ValueError(f"'window_weeks' must be >= 1; got {window_weeks!r}.")
    return window, 2 * max_delay_weeks + 4


def reporting_triangle(
    counts: pd.DataFrame,
    *,
    as_of: object,
    by: str = "country",
    max_delay_weeks: int = 8,
    units: pd.DataFrame | None = None,
) -> pd.DataFrame:
    """Value of each week as known at each delay, summed over a grouping of units.

    Parameters
    ----------
    counts : pandas.DataFrame
        Counts with every revision: ``unit_id week cases received`` (other columns ignored).
        Rows with missing ``cases`` are ignored.
    as_of : date-like
        The date the triangle is seen from; later revisions are left out.
    by : {"region", "country", "province", "unit"}
        Grouping; "region" gives one triangle per country (countries are never pooled).
    max_delay_weeks : int
        Last delay kept; revisions arriving later than that are not in the triangle.
    units : pandas.DataFrame, optional
        Indexed by ``unit_id`` with ``country``, ``parent_id``, ``level``; without it the
        country is the id's prefix and the province its first two parts.

    Returns
    -------
    pandas.DataFrame
        Indexed by (group, ``week``); one column per delay 0..max_delay_weeks. NaN where the
        delay had not been reached by ``as_of``; 0 where nothing had been received by then.

    References
    ----------
    Mack, T. (1993). Distribution-free calculation of the standard error of chain ladder
    reserve estimates. ASTIN Bulletin 23(2), 213-225.

    Examples
    --------
    >>> c = pd.DataFrame({"unit_id": ["TVR-01-01"] * 3,
    ...     "week": pd.to_datetime(["2026-01-05"] * 2 + ["2026-01-12"]),
    ...     "cases": pd.array([3, 5, 1], dtype="Int64"),
    ...     "received": pd.to_datetime(["2026-01-12", "2026-01-20", "2026-01-19"])})
    >>> reporting_triangle(c, as_of="2026-01-21", max_delay_weeks=2).to_numpy().tolist()
    [[3.0, 5.0, nan], [1.0, nan, nan]]
    """
    stamp = check_args(counts, as_of, by, "chain-ladder", max_delay_weeks, 0.5)
    window, n_past = _defaults(max_delay_weeks, None)
    e = estimate(
        counts, stamp, by, "chain-ladder", max_delay_weeks, units, window, n_past, warn=False
    )
    C = e.C
    g, t = np.nonzero(np.arange(len(e.weeks))[None, :] >= e.first[:, None])
    key = "country" if by == "region" else KEY[by]
    idx = pd.MultiIndex.from_arrays([e.groups[g], e.weeks[t]], names=[key, "week"])
    out = pd.DataFrame(C[g, t], index=idx, columns=pd.RangeIndex(C.shape[2], name="delay"))
    return out


def nowcast(
    counts: pd.DataFrame,
    *,
    as_of: object,
    by: str = "country",
    method: str = "negbin",
    max_delay_weeks: int = 8,
    conf: float = 0.9,
    seed: int | np.random.Generator | None = None,
    units: pd.DataFrame | None = None,
    window_weeks: int | None = None,
) -> pd.DataFrame:
    """Estimate the eventual count of recent weeks from the reporting-delay pattern.

    Each group's delay pattern comes from its reporting triangle (see ``reporting_triangle``
    for the delay convention): volume-weighted development factors over the ``window_weeks``
    most recent weeks (chain-ladder, Mack 1993), multiplied out to delay ``max_delay_weeks``.
    Where reports come in monthly batches, the week holding a month's last day is often late
    as a whole: a group then gets one set of factors for those weeks (from the last
    ``2 window_weeks`` weeks) and one for the others, but only if that split cut the error of
    its own nowcasts on the previous ``2 max_delay_weeks + 4`` as-of dates by 15% or more
    (homogeneous triangles, Friedland 2010; choice on past performance, see ``_calendar``).
    With ``method="negbin"`` the part still to come is negative binomial around that estimate;
    its size per delay is fitted to the errors this same nowcast would have made at each of the
    previous ``2 max_delay_weeks + 4`` weekly as-of dates, judged against what became known
    later (the simple baseline of Wolffram et al. 2023). Countries never share a pattern.
    Provinces and units use their country's pattern unless they have at least 100 cases in the
    estimation weeks. A country with fewer than ``max_delay_weeks + 1`` weeks of reports (no
    week has reached the last delay) or whose reports were all received on one day has no
    delay history: its weeks are shown as reported (status "as-reported") with a
    ``DataWarning`` naming it, never a guess.

    Parameters
    ----------
    counts : pandas.DataFrame
        Counts with every revision: ``unit_id week cases received``.
    as_of : date-like
        The date of the nowcast; revisions received later are ignored.
    by : {"region", "country", "province", "unit"}
        Grouping. "region" sums the country nowcasts (by draws) without pooling patterns.
    method : {"negbin", "chain-ladder"}
        "chain-ladder" gives the plain point estimate (no interval: lower/upper NaN).
    max_delay_weeks : int
        Weeks at least this old are taken as complete (nowcast = reported).
    conf : float
        Interval level.
    seed : int or numpy.random.Generator, optional
        For the draws behind the "region" interval; the same seed gives the same result.
    units : pandas.DataFrame, optional
        Indexed by ``unit_id`` with ``country``, ``parent_id``, ``level`` (province grouping).
    window_weeks : int, optional
        Weeks behind each development factor; default ``2 * max_delay_weeks``.

    Returns
    -------
    pandas.DataFrame
        One row per (group, week) from the group's first reported week to the last week ended
        by ``as_of``; columns: the group (``region``, ``country``, ``province`` or
        ``unit_id``), ``week``, ``reported`` (known on ``as_of``), ``nowcast``, ``lower``,
        ``upper``, ``share_reported`` (reported / nowcast; 1 when both are 0), ``delay_weeks``
        (age of the week), ``status`` (one of ``STATUSES``: "reported" for weeks older than
        ``max_delay_weeks``; "nowcast"; "not-yet-due" when the pattern says nothing usually
        arrives this early, so no estimate; "as-reported" for a group without a usable delay
        history, with a ``DataWarning``; "incomplete" for a region week missing a country's
        estimate), ``method`` and ``pattern`` (whose delay pattern was used).

    Raises
    ------
    marchland.errors.InputError
        Empty counts, missing columns, or ``as_of`` before the first report was received.

    Notes
    -----
    Reports are delayed and incomplete: the interval covers delay only, not under-reporting.
    Small counts give wide intervals. Decision support, not diagnosis; national authorities'
    figures take precedence.

    References
    ----------
    Mack, T. (1993). Distribution-free calculation of the standard error of chain ladder
    reserve estimates. ASTIN Bulletin 23(2), 213-225.
    Friedland, J. (2010). Estimating Unpaid Claims Using Basic Techniques. Casualty Actuarial
    Society.
    Wolffram, D. et al. (2023). Collaborative nowcasting of COVID-19 hospitalization incidences
    in Germany. PLoS Computational Biology 19(8), e1011394.

    Examples
    --------
    >>> from marchland.pack import open_region
    >>> from marchland.demo import scenario_path
    >>> counts = open_region(scenario_path()).counts
    >>> nc = nowcast(counts, as_of="2026-09-02", by="country", seed=1)
    >>> sorted(nc["country"].unique())
    ['MRW', 'OSK', 'QLN', 'TVR']
    >>> bool((nc["nowcast"].dropna() >= nc["reported"][nc["nowcast"].notna()]).all())
    True
    """
    stamp = check_args(counts, as_of, by, method, max_delay_weeks, conf)
    window, n_past = _defaults(max_delay_weeks, window_weeks)
    e = estimate(counts, stamp, by, method, max_delay_weeks, units, window, n_past)
    lower, upper = bounds(e, conf, method)
    old = e.age[None, :] >= max_delay_weeks
    fb = e.fallback[:, None]
    nowc = np.where(old | fb, e.reported, e.N)
    lower = np.where(old, e.reported, np.where(fb, np.nan, lower))
    upper = np.where(old, e.reported, np.where(fb, np.nan, upper))
    status = np.where(
        old,
        "reported",
        np.where(fb, "as-reported", np.where(np.isnan(e.N), "not-yet-due", "nowcast")),
    )
    if by == "region":
        return _region(e, nowc, status, old, conf, seed, method, max_delay_weeks)
    g, t = np.nonzero(np.arange(len(e.weeks))[None, :] >= e.first[:, None])
    with np.errstate(invalid="ignore", divide="ignore"):
        share = np.where(nowc > 0, e.reported / nowc, np.where(np.isnan(nowc), np.nan, 1.0))
    return pd.DataFrame(
        {
            KEY[by]: e.groups[g],
            "week": e.weeks[t],
            "reported": e.reported[g, t],
            "nowcast": nowc[g, t],
            "lower": lower[g, t],
            "upper": upper[g, t],
            "share_reported": share[g, t],
            "delay_weeks": e.age[t],
            "units_reported": e.n_units[g, t],
            "status": status[g, t],
            "method": method,
            "pattern": e.pattern[g],
        }
    )


def _region(e, nowc, status, old, conf, seed, method, max_delay):
    """Sum country nowcasts; the interval from draws of each country's remainder."""
    first = int(e.first.min())
    t = np.arange(first, len(e.weeks))
    reported = e.reported[:, t].sum(axis=0)
    missing = (status[:, t] == "not-yet-due").any(axis=0)
    partial = (status[:, t] == "as-reported").any(axis=0)
    total = np.where(missing, np.nan, np.nansum(np.where(np.isnan(nowc), 0, nowc)[:, t], axis=0))
    lower = np.full(len(t), np.nan)
    upper = np.full(len(t), np.nan)
    live = ~old[0, t] & ~missing & ~partial
    if method == "negbin" and live.any():
        rng = np.random.default_rng(seed)
        cols = t[live]
        draws = nb_draws(e.R[:, cols], e.N[:, cols], e.phi[:, cols], N_DRAWS, rng).sum(axis=1)
        lower[live] = np.quantile(draws, (1 - conf) / 2, axis=0)
        upper[live] = np.quantile(draws, (1 + conf) / 2, axis=0)
    done = old[0, t]
    lower[done] = upper[done] = reported[done]
    st = np.where(done, "reported", np.where(missing | partial, "incomplete", "nowcast"))
    with np.errstate(invalid="ignore", divide="ignore"):
        share = np.where(total > 0, reported / total, np.where(np.isnan(total), np.nan, 1.0))
    return pd.DataFrame(
        {
            "region": "region",
            "week": e.weeks[t],
            "reported": reported,
            "nowcast": total,
            "lower": lower,
            "upper": upper,
            "share_reported": share,
            "delay_weeks": e.age[t],
            "units_reported": e.n_units[:, t].sum(axis=0),
            "status": st,
            "method": method,
            "pattern": "per country",
        }
    )
