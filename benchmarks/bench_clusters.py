"""Speed of the emerging-cluster scan: the demo region and a large synthetic lattice.

Run: ``python benchmarks/bench_clusters.py [--large-side 100] [--max-units 50]``.
Targets: 999 permutations on the demo (196 units, 8-week window) under 5 s; 10,000 synthetic
units under 60 s on 2 cores. Also a larger power/size simulation than the test suite runs.
"""

from __future__ import annotations

import argparse
import time
import warnings

import numpy as np

from marchland.clusters import emerging_clusters
from marchland.clusters._clustersim import lattice_units, planted_panel


def demo(permutations: int) -> None:
    from marchland.demo import scenario_path
    from marchland.pack import open_region

    region = open_region(scenario_path())
    for as_of in ("2026-04-30", "2026-08-31"):
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            t = time.perf_counter()
            out = emerging_clusters(
                region.counts,
                region.units,
                as_of=as_of,
                window_weeks=8,
                permutations=permutations,
                seed=1,
            )
            dt = time.perf_counter() - t
        n = 196 - len(out.attrs["dropped_units"])
        print(
            f"demo as_of={as_of}: {n} units scanned, {permutations} permutations, "
            f"{len(out)} clusters, {dt:.2f} s"
        )


def large(side: int, permutations: int, max_units: int | None, max_share: float) -> None:
    units = lattice_units(side)
    panel, planted = planted_panel(side, weeks=8, rate=2.0, rr=3.0, seed=1)
    t = time.perf_counter()
    out = emerging_clusters(
        None,
        units,
        as_of="2026-12-31",
        panel=panel,
        permutations=permutations,
        seed=1,
        max_units=max_units,
        max_share=max_share,
    )
    dt = time.perf_counter() - t
    top = out.iloc[0]
    print(
        f"lattice {side * side} units x 8 weeks, {permutations} permutations, "
        f"max_units={max_units}: {dt:.1f} s; top cluster {top['n_units']} units, "
        f"p={top['p']:.3f}, overlaps planted: {bool(set(top['units']) & set(planted))}"
    )


def power_size(runs: int, permutations: int) -> None:
    units = lattice_units(10)
    for rr in (3.0, 2.0, 1.0):
        hits = 0
        for s in range(runs):
            panel, planted = planted_panel(10, rate=2.0, rr=rr, seed=10_000 + s)
            out = emerging_clusters(
                None, units, as_of="2026-12-31", panel=panel, permutations=permutations, seed=s
            )
            ok = len(out) and out["p"].iloc[0] < 0.05
            hits += bool(ok and (rr == 1.0 or set(out["units"].iloc[0]) & set(planted)))
        what = "size" if rr == 1.0 else f"power RR={rr}"
        print(f"{what}: {hits}/{runs} = {hits / runs:.3f} (100 units, {permutations} perms)")


if __name__ == "__main__":
    ap = argparse.ArgumentParser()
    ap.add_argument("--permutations", type=int, default=999)
    ap.add_argument("--large-side", type=int, default=100)
    ap.add_argument("--max-units", type=int, default=50)
    ap.add_argument("--max-share", type=float, default=0.5)
    ap.add_argument("--runs", type=int, default=0, help="power/size runs (0 skips)")
    a = ap.parse_args()
    np.seterr(all="ignore")
    demo(a.permutations)
    large(a.large_side, a.permutations, a.max_units, a.max_share)
    if a.runs:
        power_size(a.runs, 199)
