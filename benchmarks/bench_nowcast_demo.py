"""Nowcast accuracy on the demo scenario, per country (issue 13).

Run: ``python benchmarks/bench_nowcast_demo.py``. For 26 Wednesdays spread over the outbreak
(2026-04-01 .. 2026-09-23) the country nowcasts of the last 4 weeks are scored against the counts
as eventually known at the end of the demo's data: coverage of the 90% interval (target 85-95%)
and the mean absolute error of the last 2 weeks, nowcast vs counts as arrived (target: at least
40% lower). Prints numbers; asserts nothing (tests/test_nowcast.py holds the checks).

Measured 2026-12-02 (26 Wednesdays; "change" = MAE nowcast / MAE as arrived - 1; rows are the
weeks younger than 4 weeks with status "nowcast"):

``nowcast(by="country")``      before (one delay pattern)     after (month-end split)
  Marrowen  (line list)         cov 94.0%  MAE 2.9 vs 15.7 -81%    unchanged
  Oskeland  (workbook)          cov 100%   MAE 0 vs 0              unchanged
  Quillany  (weekly)            cov 88.5%  MAE 0 vs 0              unchanged
  Tavrenne  (monthly files)     cov 89.4%  32.5 vs 25.0  +30%      cov 88.5%  26.4 vs 25.0  +6%
  all four                      cov 92.5%  10.6 vs 12.0  -12%      cov 92.2%   8.7 vs 12.0  -27%

Tavrenne's remaining error is which districts are late: in the week of 2026-08-31 two large
districts (500 cases) came two weeks late, 57% of the week; in other months 0.1-15%. A country
triangle cannot know that; the month pack's gap-aware point (``fill_gaps``: each district not
yet in is imputed from its own recent share) can. The month pack's country rows
(``recent_weeks``: that point with the nowcast's delay band; rows it estimates, younger than 4
weeks, eventual count known; coverage over rows with a band), same before and after:

  Marrowen  cov 90.1% (81 rows)  MAE 3.4 vs 15.5   -78%
  Oskeland  cov  0%   (1 row)    MAE 90 vs 271     -67% (weeks not yet due: whole country imputed)
  Tavrenne  cov 84.6% (91 rows)  MAE 5.0 vs 28.3   -82%
  all       cov 86.7% (173 rows) MAE 22 vs 74      -70%
"""

from __future__ import annotations

import sys
import time
import warnings

import pandas as pd

from marchland.delays import nowcast
from marchland.demo import scenario_path
from marchland.errors import DataWarning
from marchland.inputs import as_of
from marchland.inputs.weeks import week_month
from marchland.pack import open_region
from marchland.pack._recent import recent_weeks

DATES = pd.date_range("2026-04-01", periods=26, freq="7D")


def score(counts: pd.DataFrame, dates=DATES) -> pd.DataFrame:
    """Nowcasts of the last 4 weeks at each date, with the eventual count beside them."""
    final = (
        as_of(counts)
        .assign(country=lambda d: d["unit_id"].str[:3])
        .groupby(["country", "week"])["cases"]
        .sum()
        .astype(float)
    )
    rows = []
    for a in dates:  # a loop over the evaluation's as-of dates
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", DataWarning)
            nc = nowcast(counts, as_of=a, by="country", seed=1)
        nc = nc[(nc["delay_weeks"] < 4) & (nc["status"] == "nowcast")].assign(as_of=a)
        nc["truth"] = final.reindex(pd.MultiIndex.from_frame(nc[["country", "week"]])).to_numpy()
        rows.append(nc)
    r = pd.concat(rows, ignore_index=True)
    r["covered"] = (r["truth"] >= r["lower"]) & (r["truth"] <= r["upper"])
    return r


def score_pack(region, dates=DATES) -> pd.DataFrame:
    """The month pack's country rows (gap-aware point, delay band) scored the same way.

    Each run sees what was received by its as-of date, for weeks up to the month of the last
    ended week; rows are the weeks younger than 4 weeks that the pack estimates, with a known
    eventual count.
    """
    counts = region.counts
    final = (
        as_of(counts)
        .assign(country=lambda d: d["unit_id"].str[:3])
        .groupby(["country", "week"])["cases"]
        .sum()
        .astype(float)
    )
    rows = []
    for a in dates:  # a loop over the evaluation's as-of dates
        period = week_month(pd.Series([a - pd.Timedelta(days=9)])).iloc[0]
        keep = (counts["received"] <= a).to_numpy() & (week_month(counts["week"]) <= period)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", DataWarning)
            t = recent_weeks(
                counts[keep.to_numpy()],
                region.units,
                as_of=a,
                period=period,
                seed=1,
                levels=("country",),
            )["nowcast"]
        rows.append(t[(t["delay_weeks"] < 4) & t["status"].ne("reported")])
    r = pd.concat(rows, ignore_index=True).rename(columns={"group": "country"})
    r["truth"] = final.reindex(pd.MultiIndex.from_frame(r[["country", "week"]])).to_numpy()
    r = r[r["truth"].notna()].rename(columns={"estimate": "nowcast"})
    inside = (r["truth"] >= r["lower"]) & (r["truth"] <= r["upper"])
    # No band drawn (nothing comes this early, or a silent area): not scored for coverage.
    r["covered"] = inside.astype(float).where(r["lower"].notna())
    return r


def table(r: pd.DataFrame) -> pd.DataFrame:
    """Per country and overall: coverage (nowcast rows), MAE of the last 2 weeks both ways."""
    out = {}
    for name, part in [*r.groupby("country"), ("all", r)]:
        live = part
        last2 = part[part["delay_weeks"] < 2]
        ours = (last2["nowcast"] - last2["truth"]).abs().mean()
        arrived = (last2["reported"] - last2["truth"]).abs().mean()
        out[name] = {
            "n": len(live),
            "n_band": int(live["covered"].notna().sum()),
            "coverage": live["covered"].astype(float).mean(),
            "mae_nowcast": ours,
            "mae_arrived": arrived,
            "change": ours / arrived - 1 if arrived > 0 else float("nan"),
        }
    return pd.DataFrame(out).T


def main() -> None:
    region = open_region(scenario_path())
    t0 = time.perf_counter()
    r = score(region.counts)
    print(f"nowcast(by='country'): {len(DATES)} as-of dates in {time.perf_counter() - t0:.1f} s")
    with pd.option_context("display.float_format", "{:.3f}".format):
        print(table(r).to_string())
    t0 = time.perf_counter()
    p = score_pack(region)
    print(f"month pack (recent_weeks, country rows): {time.perf_counter() - t0:.1f} s")
    with pd.option_context("display.float_format", "{:.3f}".format):
        print(table(p).to_string())


if __name__ == "__main__":
    sys.exit(main())
