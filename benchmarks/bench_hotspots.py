"""Time and memory of our local Moran next to esda on the same data, in the same run.

    $ .venv/bin/python benchmarks/bench_hotspots.py            # 10,000 and 50,000 units
    $ .venv/bin/python benchmarks/bench_hotspots.py --sizes 10000 --weighting shared

Each measurement runs in a fresh Python process so that "cold" (first call in a new process,
imports excluded but any just-in-time compilation included) and peak memory (max RSS of
that process) are honest; "warm" is a second call in the same process. The data are a
synthetic queen-contiguity lattice with invented counts: rates over a smooth surface plus a
raised block, populations from a log-normal. 999 permutations everywhere; esda is called with
``keep_simulations=False`` and ``n_jobs=1``.

Compared:
  marchland (stats)    cases + population + BorderGraph -> EB standardisation, permutations,
                       BH q-values, labels (everything the monthly run asks for)
  esda Moran_Local     bare, on the same EB-standardised rates, row-standardised Graph given
  esda Moran_Local_Rate  the esda equivalent of hotspots (EB standardisation included)
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import subprocess
import sys
import time

PERMUTATIONS = 999
SEED = 20260301


def _lattice(n_units: int):
    """Queen-contiguity lattice of about ``n_units`` cells as a BorderGraph, plus data."""
    import numpy as np
    import pandas as pd

    from marchland.graph import BorderGraph

    cols = int(np.ceil(np.sqrt(n_units)))
    rows = int(np.ceil(n_units / cols))
    n = rows * cols
    r, c = np.divmod(np.arange(n), cols)
    focal, neigh = [], []
    for dr, dc in [(0, 1), (1, -1), (1, 0), (1, 1)]:
        ok = (r + dr < rows) & (c + dc >= 0) & (c + dc < cols)
        a = np.flatnonzero(ok)
        b = (r[ok] + dr) * cols + (c[ok] + dc)
        focal += [a, b]
        neigh += [b, a]
    focal, neigh = np.concatenate(focal), np.concatenate(neigh)
    # invented, symmetric boundary lengths, so "shared" weighting has unequal weights
    shared = 200.0 + (np.minimum(focal, neigh) * 7 + np.maximum(focal, neigh)) % 4800
    ids = pd.Index([f"U{i:06d}" for i in range(n)], name="unit_id")
    edges = pd.DataFrame(
        {
            "focal": ids[focal],
            "neighbor": ids[neigh],
            "shared_m": shared,
            "gap_m": 0.0,
            "cross_border": False,
            "kind": "shared-boundary",
        }
    )
    graph = BorderGraph(edges=edges, ids=ids)
    rng = np.random.default_rng(SEED)
    pop = np.round(rng.lognormal(9.5, 0.8, size=n)).astype(int) + 100
    surface = 20 + 15 * np.sin(r / rows * 3) * np.cos(c / cols * 2)
    surface = np.where((r < rows // 5) & (c < cols // 5), surface * 4, surface)
    cases = rng.poisson(pop * surface / 100_000)
    return graph, pd.Series(cases, index=ids), pd.Series(pop, index=ids)


def _child(target: str, n_units: int, weighting: str) -> dict:
    import warnings

    import numpy as np

    graph, cases, pop = _lattice(n_units)
    if target == "marchland":
        from marchland.stats.autocorrelation import hotspots

        def run():
            return hotspots(cases, pop, graph, permutations=PERMUTATIONS, seed=SEED,
                            weighting=weighting)  # fmt: skip

    else:
        import esda

        from marchland.stats import eb_standardised

        g_row = graph.weights(weighting, row_standardise=True)
        y = eb_standardised(cases, pop).to_numpy()
        e, b = cases.to_numpy(), pop.to_numpy()

        def run():
            state = np.random.get_state()  # esda without numba seeds numpy's global generator
            with warnings.catch_warnings():
                warnings.simplefilter("ignore", DeprecationWarning)
                if target == "esda_local":
                    esda.Moran_Local(y, g_row, permutations=PERMUTATIONS, seed=SEED,
                                     keep_simulations=False, n_jobs=1)  # fmt: skip
                else:
                    esda.Moran_Local_Rate(e, b, g_row, permutations=PERMUTATIONS, seed=SEED,
                                          keep_simulations=False, n_jobs=1)  # fmt: skip
            np.random.set_state(state)

    t0 = time.perf_counter()
    run()
    cold = time.perf_counter() - t0
    t0 = time.perf_counter()
    run()
    warm = time.perf_counter() - t0
    peak_mb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    return {"target": target, "n": len(cases), "cold_s": cold, "warm_s": warm,
            "peak_mb": peak_mb}  # fmt: skip


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", type=int, nargs="+", default=[10_000, 50_000])
    parser.add_argument(
        "--weighting",
        choices=["binary", "shared"],
        default="binary",
        help="neighbour weights: equal (the fast path) or by boundary length",
    )
    parser.add_argument("--child", nargs=2, metavar=("TARGET", "N"), help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.child:
        print(json.dumps(_child(args.child[0], int(args.child[1]), args.weighting)))
        return
    try:
        import numba  # noqa: F401

        jit = "numba installed: esda's kernels compile in each new process (in 'cold')"
    except ImportError:
        jit = "numba not installed: esda runs its permutation loop in plain Python"
    print(f"{jit}; {os.cpu_count()} cores; {PERMUTATIONS} permutations; {args.weighting} weights")
    print(f"{'target':<18}{'units':>8}{'cold s':>9}{'warm s':>9}{'peak MB':>9}{'vs esda':>9}")
    for n in args.sizes:
        results = {}
        for target in ("esda_local", "esda_local_rate", "marchland"):
            out = subprocess.run(
                [sys.executable, __file__, "--child", target, str(n), "--weighting",
                 args.weighting],
                capture_output=True, text=True, check=True,
            )  # fmt: skip
            results[target] = json.loads(out.stdout.strip().splitlines()[-1])
        base = results["esda_local"]["warm_s"]
        for target, res in results.items():
            ratio = res["warm_s"] / base
            print(f"{target:<18}{res['n']:>8}{res['cold_s']:>9.2f}{res['warm_s']:>9.2f}"
                  f"{res['peak_mb']:>9.0f}{ratio:>8.2f}x")  # fmt: skip


if __name__ == "__main__":
    main()
