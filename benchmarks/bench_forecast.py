"""Speed and skill of the forecast stage (not a test; prints numbers).

$ python benchmarks/bench_forecast.py [--big] [--backtest]
- demo: fit + 1,000 paths of 4 weeks (target < 10 s)
- --big: 10,000 lattice units x 156 weeks (target < 2 min)
- --backtest: demo and simulated rolling-origin scores per horizon against the baselines
- --month-backtest: the month's lean backtest (13 origins, 200 paths) for 2026-10, in this
  process and on 2 local worker processes (same table both ways; prints both times)
"""

import sys
import time

import pandas as pd

import marchland.demo as demo
import marchland.pack as region
from marchland.projections import backtest_forecast, forecast
from marchland.projections._synthetic import simulate_outbreak

pd.set_option("display.width", 160)


def timed(label, fn):
    t = time.perf_counter()
    out = fn()
    print(f"{label}: {time.perf_counter() - t:.2f} s", flush=True)
    return out


r = region.open_region(demo.scenario_path())
timed(
    "demo fit + 1000 paths x 4 weeks",
    lambda: forecast(r.counts, r.units, r.graph, as_of="2026-09-01", seed=1, n_paths=1000),
)

if "--big" in sys.argv:
    s = timed(
        "simulate 10,000 units x 156 weeks",
        lambda: simulate_outbreak(100, 156, seed=1, lam=0.5, phi=0.3),
    )
    as_of = s.panel.columns[-1] + pd.Timedelta(days=9)
    f = timed(
        "10,000 units: fit (156 weeks) + 1000 paths x 4 weeks",
        lambda: forecast(
            s.counts, s.units, s.graph, as_of=as_of, window_weeks=156, seed=1, n_paths=1000
        ),
    )
    print(f.parameters)

if "--backtest" in sys.argv:
    for w in (8, 16, 26):
        bt = timed(
            f"demo backtest window {w}",
            lambda w=w: backtest_forecast(r.counts, r.units, r.graph, window_weeks=w, n_paths=300),
        )
        print(bt[bt["country"] == "all"].round(3).to_string())
    s = simulate_outbreak(10, 60, seed=3, lam=0.6, phi=0.3)
    bt = timed(
        "simulated backtest",
        lambda: backtest_forecast(s.counts, s.units, s.graph, window_weeks=12, n_paths=300),
    )
    print(bt[bt["country"] == "all"].round(3).to_string())

if "--month-backtest" in sys.argv:
    from marchland.compute import Executor
    from marchland.pack._outlooksteps import BACKTEST_PATHS
    from marchland.pack.monthly import default_as_of

    as_of = default_as_of(r.config, "2026-10")
    c = r.counts[r.counts["received"] <= as_of].reset_index(drop=True)
    weeks = pd.DatetimeIndex(sorted(c["week"].unique()))
    cand = pd.date_range(end=weeks.max() - pd.Timedelta(weeks=4), periods=13, freq="14D")
    origins = cand + pd.Timedelta(days=7 + r.config.region.as_of_lag_days)
    kw = dict(origins=origins, n_paths=BACKTEST_PATHS, seed=r.config.region.seed)
    one = timed("month backtest, 1 process", lambda: backtest_forecast(c, r.units, r.graph, **kw))
    with Executor(workers=2) as ex:
        ex.map(abs, [-1, -2])  # start the workers first
        two = timed(
            "month backtest, 2 workers",
            lambda: backtest_forecast(c, r.units, r.graph, executor=ex, **kw),
        )
    pd.testing.assert_frame_equal(one, two)
    print(one[one["country"] == "all"].round(3).to_string())
