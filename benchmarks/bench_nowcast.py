"""Speed of the nowcast stage (targets: demo countries + provinces < 1 s; 10,000 units x 156
weeks < 10 s). Run: ``python benchmarks/bench_nowcast.py``. Prints numbers; asserts nothing."""

from __future__ import annotations

import time
import warnings

import numpy as np
import pandas as pd

from marchland.delays import fill_gaps, nowcast
from marchland.demo import scenario_path
from marchland.errors import DataWarning
from marchland.pack import open_region


def synthetic(n_units: int = 10_000, n_weeks: int = 156, seed: int = 0) -> pd.DataFrame:
    """Units in 4 countries; each unit-week reported at a random delay, revised once or not."""
    rng = np.random.default_rng(seed)
    weeks = pd.date_range("2023-01-02", periods=n_weeks, freq="7D").to_numpy()
    countries = np.array(["TVR", "OSK", "MRW", "QLN"])
    ids = np.array([f"{countries[k % 4]}-{k // 400 % 25 + 1:02d}-{k:05d}" for k in range(n_units)])
    u = np.repeat(np.arange(n_units), n_weeks)
    t = np.tile(np.arange(n_weeks), n_units)
    final = rng.poisson(5.0, len(u))
    first_delay = rng.geometric(0.5, len(u)) - 1
    first = rng.binomial(final, 0.8)
    revised = rng.random(len(u)) < 0.4
    week = weeks[t]
    rows = pd.DataFrame(
        {
            "unit_id": ids[u],
            "week": week,
            "cases": np.where(revised, first, final),
            "received": week + np.timedelta64(8, "D") + first_delay * np.timedelta64(7, "D"),
        }
    )
    later = pd.DataFrame(
        {
            "unit_id": ids[u[revised]],
            "week": week[revised],
            "cases": final[revised],
            "received": rows["received"].to_numpy()[revised]
            + rng.integers(1, 4, revised.sum()) * np.timedelta64(7, "D"),
        }
    )
    out = pd.concat([rows, later], ignore_index=True)
    out["cases"] = out["cases"].astype("Int64")
    return out


def timed(label, fn, repeat=3):
    best = np.inf
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t0)
    print(f"{label:<55s} {best:7.3f} s")


def main() -> None:
    reg = open_region(scenario_path())
    c, units = reg.counts, reg.units
    a = "2026-09-02"
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DataWarning)
        timed(
            "demo: every country + every province",
            lambda: (
                nowcast(c, as_of=a, by="country", seed=1),
                nowcast(c, as_of=a, by="province", units=units, seed=1),
            ),
        )
        timed("demo: region (draws)", lambda: nowcast(c, as_of=a, by="region", seed=1))
        timed("demo: fill_gaps panel", lambda: fill_gaps(c, units, as_of=a))
        big = synthetic()
        print(f"synthetic counts: {len(big):,} rows")
        ab = big["week"].max() + pd.Timedelta(days=9)
        timed("10,000 units x 156 weeks: by country", lambda: nowcast(big, as_of=ab), 1)
        timed("10,000 units x 156 weeks: by unit", lambda: nowcast(big, as_of=ab, by="unit"), 1)


if __name__ == "__main__":
    main()
