"""Nowcast accuracy on the demo scenario, per country (issue 13).

Run: ``python benchmarks/bench_nowcast_demo.py``. For 26 Wednesdays spread over the outbreak
(2026-04-01 .. 2026-09-23) the country nowcasts of the last 4 weeks are scored against the counts
as eventually known at the end of the demo's data: coverage of the 90% interval (target 85-95%)
and the mean absolute error of the last 2 weeks, nowcast vs counts as arrived (target: at least
40% lower). Prints numbers; asserts nothing (tests/test_nowcast.py holds the checks).
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
from marchland.pack import open_region

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
            "coverage": live["covered"].mean(),
            "mae_nowcast": ours,
            "mae_arrived": arrived,
            "change": ours / arrived - 1 if arrived > 0 else float("nan"),
        }
    return pd.DataFrame(out).T


def main() -> None:
    counts = open_region(scenario_path()).counts
    t0 = time.perf_counter()
    r = score(counts)
    print(f"{len(DATES)} as-of dates in {time.perf_counter() - t0:.1f} s")
    with pd.option_context("display.float_format", "{:.3f}".format):
        print(table(r).to_string())


if __name__ == "__main__":
    sys.exit(main())
