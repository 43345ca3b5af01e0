"""Share of null maps with any hotspot label, on libpysal's shipped columbus and sids2 examples.

Run: ``python benchmarks/bench_hotspot_null.py [--maps 2000] [--permutations 99]``.
The values of each example (columbus CRIME, sids2 SIDR79) are permuted at random, so every
unit is null and the false discovery rate equals the chance that a map gets any label: it
should stay near or below the nominal 5%. The test suite runs 400 maps per example
(tests/reference/test_hotspots_reference.py); this is the longer run, with a binomial
standard error.

Measured (2000 maps each, 99 first-round draws, seed 16, 2 shared cores): columbus 3.70% any
local-Moran label, 3.85% any Gi* label (14 ms per call); sids2 3.60% and 3.70% (31 ms per
call); binomial standard error at 5%: 0.49%.
"""

from __future__ import annotations

import argparse
import time

import geopandas as gpd
import libpysal
import numpy as np
import pandas as pd
from libpysal.graph import Graph, read_gal
from pyogrio import read_dataframe

from marchland.graph import BorderGraph
from marchland.stats.autocorrelation import COLD, HOT, QUADRANTS, getis_ord, local_moran


def examples() -> dict[str, tuple[np.ndarray, Graph]]:
    """Columbus CRIME with queen contiguity; sids2 SIDR79 with its shipped rook .gal."""
    df = gpd.read_file(libpysal.examples.get_path("columbus.shp"))
    df.index = pd.Index(df["POLYID"].astype(str), name="unit_id")
    col = Graph.build_contiguity(df, rook=False)
    t = read_dataframe(libpysal.examples.get_path("sids2.dbf"), read_geometry=False)
    gal = read_gal(libpysal.examples.get_path("sids2.gal"))
    sids = Graph.from_adjacency(gal.adjacency.reset_index().astype({"focal": str, "neighbor": str}))
    order = [str(i) for i in t["FIPSNO"]]
    rate = pd.Series(t["SIDR79"].to_numpy(dtype=float), index=order).loc[list(sids.unique_ids)]
    return {"columbus": (df["CRIME"].to_numpy(), col), "sids2": (rate.to_numpy(), sids)}


def null_rates(y: np.ndarray, g: Graph, maps: int, permutations: int, seed: int):
    """Share of permuted maps with any local Moran label and with any Gi* label."""
    bg = BorderGraph.from_graph(g)
    rng = np.random.default_rng(seed)
    lm = gi = 0
    for _ in range(maps):
        v = pd.Series(rng.permutation(y), index=bg.ids)
        lm += local_moran(v, bg, permutations=permutations, seed=rng)["label"].isin(QUADRANTS).any()
        gi += getis_ord(v, bg, permutations=permutations, seed=rng)["label"].isin([HOT, COLD]).any()
    return lm / maps, gi / maps


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__)
    ap.add_argument("--maps", type=int, default=2000)
    ap.add_argument("--permutations", type=int, default=99)
    ap.add_argument("--seed", type=int, default=16)
    args = ap.parse_args()
    for name, (y, g) in examples().items():
        t = time.perf_counter()
        lm, gi = null_rates(y, g, args.maps, args.permutations, args.seed)
        dt = time.perf_counter() - t
        se = np.sqrt(0.05 * 0.95 / args.maps)
        print(f"{name}: n={len(y)} maps={args.maps} any local-Moran label {lm:.2%}, any Gi* "
              f"label {gi:.2%} (binomial se at 5%: {se:.2%}); {dt / args.maps / 2 * 1e3:.0f} ms"
              " per call")  # fmt: skip


if __name__ == "__main__":
    main()
