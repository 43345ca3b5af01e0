"""Time the border-risk backtest of a monthly run alone (issue 19); never asserted in tests.

Opens a config's region once, then runs ``risk.run_backtest`` as the monthly run's backtest
step does (as of the month's default as-of date) on the executor asked for, and prints wall
time, this process's CPU time and a digest of the predictions (equal digests: equal results).

    $ PYTHONPATH=src NUMBA_CACHE_DIR=.venv/numba-cache MPLBACKEND=Agg \\
        python benchmarks/bench_backtest.py demo_data/scenario.toml --workers 1 2 [--profile]

``--cache FILE`` keeps the opened region in a pickle for later runs (opening the 10k world takes
one to two minutes). ``--every K`` keeps every K-th origin week, as the month does at 10,000
units and more (K = units // 2000). ``--n-jobs`` passes ``n_jobs=`` instead of an executor (the
call older versions take, for before/after timings). With ``--profile`` the serial run is
profiled with cProfile on CPU time (the wall clock counts other work on a shared machine) and
the top functions printed. The CPU time of local worker processes is read with psutil (workers
started for the run are counted whole, start-up included).
"""

from __future__ import annotations

import argparse
import hashlib
import pickle
import time
from pathlib import Path

import pandas as pd


def _digest(pred: pd.DataFrame) -> str:
    return hashlib.sha256(pd.util.hash_pandas_object(pred, index=True).to_numpy()).hexdigest()[:16]


def _workers_cpu() -> float:
    """CPU seconds (user + system) of this process's children still alive (loky workers)."""
    try:
        import psutil
    except ImportError:  # pragma: no cover
        return float("nan")
    total = 0.0
    for c in psutil.Process().children(recursive=True):
        try:
            t = c.cpu_times()
        except psutil.Error:
            continue
        total += t.user + t.system
    return total


def main() -> None:
    """Parse the command line and time the backtest."""
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("config")
    ap.add_argument("--month", default="2026-10")
    ap.add_argument("--workers", type=int, nargs="+", default=[1])
    ap.add_argument("--scheduler", default=None, help="Dask scheduler address (instead)")
    ap.add_argument("--profile", action="store_true")
    ap.add_argument("--cache", help="pickle of the opened region: written once, then read")
    ap.add_argument("--n-jobs", action="store_true", help="pass n_jobs, not an executor")
    ap.add_argument(
        "--every", type=int, default=1, help="every k-th origin week (the month: units // 2000)"
    )
    a = ap.parse_args()

    from marchland.compute import Executor
    from marchland.config import load_config
    from marchland.pack._steps import risk_covariates, risk_options
    from marchland.pack.monthly import _open_region, default_as_of
    from marchland.risk import run_backtest

    t = time.perf_counter()
    cfg = load_config(a.config)
    as_of = default_as_of(cfg, a.month)
    if a.cache and Path(a.cache).exists():
        with open(a.cache, "rb") as f:
            counts, units, graph, cov = pickle.load(f)
    else:
        region = _open_region(cfg)
        counts = region.counts[region.counts["received"] <= as_of].reset_index(drop=True)
        units, graph, cov = region.units, region.graph, risk_covariates(cfg, region)
        if a.cache:
            with open(a.cache, "wb") as f:
                pickle.dump((counts, units, graph, cov), f)
    print(f"region: {len(units)} units, {len(counts)} count rows, {time.perf_counter() - t:.1f} s")
    runs = [(f"workers={w}", Executor(workers=w)) for w in a.workers]
    if a.scheduler:
        runs = [(f"scheduler={a.scheduler}", Executor(scheduler=a.scheduler))]
    for name, ex in runs:

        def go(ex=ex):
            run = {"n_jobs": ex.workers} if a.n_jobs else {"executor": ex}
            return run_backtest(
                counts,
                units,
                graph,
                as_of=as_of,
                top_k=cfg.risk.top_k,
                **run,
                covariates=cov,
                **({"every_weeks": a.every} if a.every > 1 else {}),
                **risk_options(cfg.risk),
            )

        if a.profile and ex.backend == "serial":
            import cProfile
            import pstats

            pr = cProfile.Profile(time.process_time)
            pr.enable()
        w0, c0, k0 = time.perf_counter(), time.process_time(), _workers_cpu()
        with ex:
            bt = go()
        w1, c1, k1 = time.perf_counter(), time.process_time(), _workers_cpu()
        if a.profile and ex.backend == "serial":
            pr.disable()
            pstats.Stats(pr).sort_stats("cumulative").print_stats(35)
            pstats.Stats(pr).sort_stats("tottime").print_stats(25)
        n_or = int(bt.summary.loc["score", "n_origins"])
        print(
            f"{name}: wall {w1 - w0:.2f} s, CPU (this process) {c1 - c0:.2f} s, "
            f"CPU (worker processes alive at the end) {k1 - k0:.2f} s, "
            f"{n_or} origins, {len(bt.predictions)} predictions, "
            f"digest {_digest(bt.predictions)}"
        )


if __name__ == "__main__":
    main()
