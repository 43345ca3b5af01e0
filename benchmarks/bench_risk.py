"""Speed of border risk on a synthetic 10,000-unit region (never asserted in tests).

Targets (issue 7): scoring one month on 10,000 units in under 5 s; a 52-origin backtest on
10,000 units in under 2 minutes on 2 cores.

    $ .venv/bin/python benchmarks/bench_risk.py [--side 100] [--weeks 70] [--jobs 2]
"""

from __future__ import annotations

import argparse
import time

import pandas as pd

from marchland.risk import _sim
from marchland.risk.score import border_risk, run_backtest


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--side", type=int, default=100, help="grid side: side**2 units")
    ap.add_argument("--weeks", type=int, default=70)
    ap.add_argument("--origins", type=int, default=52)
    ap.add_argument("--jobs", type=int, default=2)
    a = ap.parse_args()

    t = time.perf_counter()
    # A slower weekly hazard than the tests' default, so the outbreak is still spreading at the
    # end of the run instead of covering the grid early.
    coef = dict(_sim.TRUE_WEEKLY, intercept=_sim.TRUE_WEEKLY["intercept"] - 0.5)
    sim = _sim.simulate(
        a.side, a.side, weeks=a.weeks, seed=1, n_seeds=12, stripe=10, coefficients=coef
    )
    n = len(sim.units)
    print(
        f"simulated {n} units x {a.weeks} weeks ({len(sim.counts)} count rows) "
        f"in {time.perf_counter() - t:.1f} s; {int(sim.first.notna().sum())} units affected"
    )

    as_of = sim.counts["week"].max() - pd.Timedelta(days=7 * 4) + pd.Timedelta(days=10)
    t = time.perf_counter()
    r = border_risk(sim.counts, sim.units, sim.graph, as_of=as_of)
    print(
        f"border_risk (fit + score, {len(r)} candidates, model {r.attrs['model']}): "
        f"{time.perf_counter() - t:.2f} s  [target < 5 s]"
    )

    weeks = pd.DatetimeIndex(sorted(sim.counts["week"].unique()))
    origins = weeks[-(a.origins + 4) : -4]
    t = time.perf_counter()
    bt = run_backtest(sim.counts, sim.units, sim.graph, origins=origins, n_jobs=a.jobs)
    print(
        f"backtest, {int(bt.summary['n_origins'].iloc[0])} origins, n_jobs={a.jobs}: "
        f"{time.perf_counter() - t:.1f} s  [target < 120 s]"
    )
    print(bt.summary.round(3).to_string())


if __name__ == "__main__":
    main()
