"""Calibration of the forecast intervals (issue 14; not a test, prints numbers).

$ python benchmarks/bench_calibration.py [--sim] [KEY=VALUE ...]
- the demo month's own backtest for 2026-10 (pack._outlooksteps.backtest_summary: 13 origins,
  200 paths, the config's seed), scored unit-week by unit-week;
- --sim: the simulated outbreak of tests/test_forecast.py (10 x 10 lattice, 40 weeks, seed 11,
  window 12, every 3rd week, 300 paths, seed 2); --sim-country: the same with a true size
  of 1.5 in country C0 and 6 in C1.
KEY=VALUE pairs go to backtest_forecast (e.g. dispersion=shared window_weeks=12).
Printed per horizon: CRPS of the model and both baselines; coverage of the model's 90 %
interval, raw (share of outcomes inside) and PIT-based (expected share of the randomised PIT
in [0.05, 0.95], Czado, Gneiting and Held 2009), each overall and split by zero / non-zero
outcome; log score; the coverage the same intervals would have if the forecasts were right
(cov_expect: share of the forecast's own samples inside). Then by forecast mean and country.
"""

import sys
import time
import types
import warnings

import pandas as pd

import marchland.demo as demo
import marchland.pack as region
import marchland.projections as pj
from marchland.errors import DataWarning
from marchland.pack._outlooksteps import backtest_summary
from marchland.pack.monthly import default_as_of
from marchland.projections._synthetic import simulate_outbreak

pd.set_option("display.width", 160)


def _value(v: str):
    for cast in (int, float):
        try:
            return cast(v)
        except ValueError:
            pass
    return v


OPTIONS = {k: _value(v) for k, v in (a.split("=", 1) for a in sys.argv[1:] if "=" in a)}


def table(det: pd.DataFrame) -> pd.DataFrame:
    """Scores per horizon from the details of a backtest."""
    crps = det.pivot_table(index="horizon", columns="model", values="crps", aggfunc="mean")
    m = det[det["model"] == "endemic-epidemic"].assign(zero=lambda d: d["y"] == 0)
    g = m.groupby("horizon")
    out = pd.DataFrame(
        {
            "crps_model": crps["endemic-epidemic"],
            "crps_last": crps["last-week"],
            "crps_mean4": crps["mean-4-weeks"],
            "cov_raw": g["covered"].mean(),
            "cov_expect": g["covered_expected"].mean(),
            "cov_pit": g["covered_pit"].mean(),
            "raw_zero": m[m.zero].groupby("horizon")["covered"].mean(),
            "raw_pos": m[~m.zero].groupby("horizon")["covered"].mean(),
            "pit_zero": m[m.zero].groupby("horizon")["covered_pit"].mean(),
            "pit_pos": m[~m.zero].groupby("horizon")["covered_pit"].mean(),
            "share_zero": g["y"].apply(lambda y: (y == 0).mean()),
            "log_score": g["log_score"].mean(),
            "n": g.size(),
        }
    )
    return out


def demo_details(**options) -> pd.DataFrame:
    """Details of the demo month's backtest, as the monthly run calls it."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DataWarning)  # the demo graph has one island
        r = region.open_region(demo.scenario_path())
        as_of = default_as_of(r.config, "2026-10")
        counts = r.counts[r.counts["received"] <= as_of].reset_index(drop=True)
        ctx = types.SimpleNamespace(
            counts=counts, units=r.units, graph=r.graph, cfg=r.config, seed=r.config.region.seed
        )
        shim = types.SimpleNamespace(
            backtest_forecast=lambda *a, **k: pj.backtest_forecast(
                *a, **{**k, **options, "details": True}
            )
        )
        return backtest_summary(ctx, shim)


def sim_details(psi=3.0, **options) -> pd.DataFrame:
    """Details of the simulated backtest of tests/test_forecast.py (``psi`` may differ)."""
    s = simulate_outbreak(10, 40, seed=11, lam=0.6, phi=0.3, psi=psi)
    kw = dict(window_weeks=12, step_weeks=3, n_paths=300, seed=2, details=True)
    return pj.backtest_forecast(s.counts, s.units, s.graph, **{**kw, **options})


t = time.perf_counter()
det = demo_details(**OPTIONS)
print(f"demo month backtest 2026-10 {OPTIONS or ''}: {time.perf_counter() - t:.1f} s")
print(table(det).round(3).to_string())
by_country = det[det["model"] == "endemic-epidemic"].groupby("country")
m = det[det["model"] == "endemic-epidemic"]
level = pd.cut(m["mean"], [0, 0.2, 1, 5, 20, float("inf")], include_lowest=True)
cols = ["covered", "covered_expected", "covered_pit", "y", "mean"]
print("by forecast mean:")
print(m.groupby(level, observed=True)[cols].mean().round(3).to_string())
cols = ["covered", "covered_expected", "covered_pit", "crps"]
print(by_country[cols].mean().round(3).to_string())
if "--sim" in sys.argv:
    t = time.perf_counter()
    det = sim_details(**OPTIONS)
    print(f"simulated outbreak backtest {OPTIONS or ''}: {time.perf_counter() - t:.1f} s")
    print(table(det).round(3).to_string())
if "--sim-country" in sys.argv:
    psi = {"C0": 1.5, "C1": 6.0}
    det = sim_details(psi=psi, **OPTIONS)
    print(f"simulated outbreak, sizes {psi} {OPTIONS or ''}")
    print(table(det).round(3).to_string())
