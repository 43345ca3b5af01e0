"""Each month step next to its bare-library core, same inputs, same process (issue 19).

Issue 19 asks each step to stay within 1.2x of the library doing its core work, measured in
the same run. This script reads a scenario once through ``marchland.open_region`` (the month's
own reading), then times, alternating ours and the library's call (who goes first alternates
too), ``--repeats`` times each, in this one process with every thread pool at one thread:

1. graph: ``marchland.border_graph`` as the month's ``graph`` step builds it (``Region.graph``:
   the config's tolerance, corner rule, links and parents) against libpysal
   ``Graph.build_contiguity(units, rook=False)`` (plain queen, which finds no pair across a
   digitising gap between two countries' files) and ``Graph.build_fuzzy_contiguity(units,
   buffer=tolerance / 2)`` (buffers of half the tolerance meet where the gap is at most the
   tolerance: libpysal's own way of joining across gaps).
2. hotspots: ``marchland.local_moran`` against esda ``Moran_Local`` on the same values (the
   month's Assuncao-Reis standardised attack rates), the same row-standardised weights (the
   config's weighting) and the same number of permutations (the config's; our adaptive
   refinement is switched off with ``max_permutations=permutations``, as esda has none), and
   ``marchland.hotspots`` against esda ``Moran_Local_Rate`` on the month's cases and
   population, with the weights ready for both (esda is handed its ``W``; our BorderGraph keeps
   the weights it built, as in the month, where local Moran, Gi* and global Moran share them;
   one call with them still to build is timed apart). esda is called with ``n_jobs=1`` and
   ``keep_simulations=False`` (ours keeps no draws either); its numba kernel is compiled by a
   first call with 9 permutations before any timing, and that compile time is reported apart.
   The local I values are checked equal to 1e-12 in the run. The month step's own call (with
   refinement) is timed once beside them.
3. zonal: ``marchland.zonal_population`` on every boundary unit (what ``open_region`` calls)
   against ``exactextract.exact_extract(raster_path, polygons, "sum", output="pandas")`` with
   the polygons already in the raster's CRS (ours reprojects them itself; that is inside its
   time). The sums are checked equal.
4. GeoPackage: the bundle's layer writer (``pack.bundle._write_layers``) for the units layer
   only, against ``pyogrio.write_dataframe`` of the very GeoDataFrame our writer hands to GDAL
   (caught on a first call) plus geopandas' ``to_parquet`` of it, since our writer puts the
   GeoParquet copy beside each layer: the same two files, into a new folder each time. Both
   files are read back and checked equal.

Ratios are ours / library of CPU time (``time.process_time``); the goal is met when the
median of the paired ratios is at most 1.2. Wall times are given beside them: the machine has
2 shared cores, so wall time is noisier than CPU time; the load average is recorded. Results
are merged into ``benchmarks/results.json`` under ``"cores"`` (keyed by ``--label``) and the
section "Steps against their bare-library cores" of ``benchmarks/RESULTS.md`` is rewritten
between its markers (the notes below the end marker are written by hand). Never run by the
test suite.

    $ PYTHONPATH=src NUMBA_CACHE_DIR=.venv/numba-cache MPLBACKEND=Agg \\
        python benchmarks/bench_cores.py --demo [--repeats 5] [--profile]
    $ ... python benchmarks/bench_cores.py --world /tmp/worlds/world10000 --repeats 5
    $ ... python benchmarks/bench_cores.py --world /tmp/worlds/world50000 --repeats 3

``--profile`` prints a cProfile of one call of each of our steps (cumulative time, top 25).
``--no-write`` prints the table without touching results.json and RESULTS.md. ``--merge`` with
``--steps`` replaces only those steps' rows of the label's stored run (the others and its
header stay, and the re-run's date, load and repeats are listed under its table); without it
a run replaces the label's whole entry.
"""

from __future__ import annotations

import os

# One thread everywhere (set before numpy, numba and GDAL load): a single-thread comparison.
for _var in (
    "OMP_NUM_THREADS",
    "OPENBLAS_NUM_THREADS",
    "MKL_NUM_THREADS",
    "NUMBA_NUM_THREADS",
    "GDAL_NUM_THREADS",
):
    os.environ[_var] = "1"

import argparse  # noqa: E402
import cProfile  # noqa: E402
import datetime as dt  # noqa: E402
import gc  # noqa: E402
import io  # noqa: E402
import json  # noqa: E402
import pstats  # noqa: E402
import sys  # noqa: E402
import tempfile  # noqa: E402
import time  # noqa: E402
import warnings  # noqa: E402
from collections.abc import Callable  # noqa: E402
from pathlib import Path  # noqa: E402
from types import SimpleNamespace  # noqa: E402
from typing import Any  # noqa: E402

import numpy as np  # noqa: E402
import pandas as pd  # noqa: E402

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))
from bench_month import _machine  # noqa: E402

MONTH = "2026-10"
GOAL = 1.2
START, END = "<!-- bench_cores: start -->", "<!-- bench_cores: end -->"
TITLE = "## Steps against their bare-library cores (issue 19)"


# --- timing ------------------------------------------------------------------------------------
def _clock(fn: Callable[[], Any]) -> tuple[Any, float, float]:
    gc.collect()
    c0, w0 = time.process_time(), time.perf_counter()
    out = fn()
    return out, time.process_time() - c0, time.perf_counter() - w0


def compare(
    name: str,
    ours: Callable[[], Any],
    library: Callable[[], Any],
    repeats: int,
    *,
    before_ours: Callable[[], None] | None = None,
) -> tuple[dict, Any, Any]:
    """Time ``ours`` and ``library`` alternately; return the record and each last result."""
    t: dict[str, list[float]] = {"ours_cpu": [], "ours_wall": [], "lib_cpu": [], "lib_wall": []}
    res: dict[str, Any] = {}

    def run(which: str) -> None:
        if which == "ours" and before_ours is not None:
            before_ours()
        fn = ours if which == "ours" else library
        res[which], cpu, wall = _clock(fn)
        key = "ours" if which == "ours" else "lib"
        t[f"{key}_cpu"].append(cpu)
        t[f"{key}_wall"].append(wall)

    for r in range(repeats):
        for which in ("ours", "library") if r % 2 == 0 else ("library", "ours"):
            run(which)
    oc, lc = np.array(t["ours_cpu"]), np.array(t["lib_cpu"])
    ow, lw = np.array(t["ours_wall"]), np.array(t["lib_wall"])
    ratio_cpu = float(np.median(oc / lc))
    rec = {
        "step": name,
        "repeats": repeats,
        "ours_cpu_median_s": float(np.median(oc)),
        "ours_cpu_min_s": float(oc.min()),
        "ours_wall_median_s": float(np.median(ow)),
        "lib_cpu_median_s": float(np.median(lc)),
        "lib_cpu_min_s": float(lc.min()),
        "lib_wall_median_s": float(np.median(lw)),
        "ratio_cpu": ratio_cpu,
        "ratio_cpu_of_mins": float(oc.min() / lc.min()),
        "ratio_wall": float(np.median(ow / lw)),
        "goal_met": bool(ratio_cpu <= GOAL),
        "times": {k: [round(x, 4) for x in v] for k, v in t.items()},
    }
    return rec, res.get("ours"), res.get("library")


def profile(name: str, fn: Callable[[], Any], top: int = 25) -> None:
    """Print a cProfile (cumulative time) of one call of ``fn``."""
    pr = cProfile.Profile(time.process_time)
    pr.enable()
    fn()
    pr.disable()
    s = io.StringIO()
    pstats.Stats(pr, stream=s).sort_stats("cumulative").print_stats(top)
    print(f"\n--- profile of ours: {name} (CPU seconds) ---")
    print(s.getvalue())


def _fresh_graph(bg: Any) -> None:
    """Forget a BorderGraph's cached weights and views, so ours builds them as the month does."""
    bg._weights_cache.clear()
    for attr in ("islands", "graph", "_positions"):
        bg.__dict__.pop(attr, None)


# --- the four steps ----------------------------------------------------------------------------
def bench_graph(region: Any, repeats: int, prof: bool) -> list[dict]:
    from libpysal.graph import Graph

    from marchland import border_graph

    g = region.config.graph
    units = region.units
    parents = region.all_units["parent_id"]

    def ours():
        return border_graph(
            units,
            tolerance=g.tolerance_m,
            links=g.links,
            min_shared_m=g.min_shared_m,
            parents=parents,
        )

    geoms = units.geometry
    queen, bg, q = compare(
        "graph vs libpysal queen",
        ours,
        lambda: Graph.build_contiguity(geoms, rook=False),
        repeats,
    )
    buffer = g.tolerance_m / 2
    fuzzy, _, fz = compare(
        f"graph vs libpysal fuzzy (buffer {buffer:g} m)",
        ours,
        lambda: Graph.build_fuzzy_contiguity(geoms, buffer=buffer),
        repeats,
    )
    e = bg.edges
    pairs = int(len(e) // 2)
    kinds = e["kind"].value_counts().div(2).astype(int).to_dict()
    check = {
        "ours_pairs": pairs,
        "ours_kinds": kinds,
        "ours_cross_border_pairs": int(e["cross_border"].sum() // 2),
        "queen_pairs": int(q.n_edges // 2),
        "fuzzy_pairs": int(fz.n_edges // 2),
    }
    queen["check"] = fuzzy["check"] = check
    if prof:
        profile("graph", ours)
    return [queen, fuzzy]


def bench_hotspots(region: Any, repeats: int, prof: bool) -> list[dict]:
    import libpysal
    from esda.moran import Moran_Local, Moran_Local_Rate

    from marchland import hotspots, local_moran
    from marchland.pack._steps import _Context
    from marchland.stats import window_counts
    from marchland.stats.autocorrelation import _prepare
    from marchland.stats.rates import eb_standardised

    cfg = region.config
    period = pd.Period(MONTH, freq="M")
    ctx = _Context(cfg, region, period, region.as_of(MONTH))
    wc = window_counts(
        ctx.counts_to_month, ctx.as_of, windows_weeks=(), month=period, units=region.units.index
    )
    cases = wc["cases"]["month"]  # as the month's hotspots step takes them
    pop = region.units["population"].astype(float)
    perms = cfg.analysis.permutations
    seed = cfg.region.seed
    fdr = cfg.analysis.fdr
    weighting = cfg.graph.weighting
    bg = region.graph
    rate_z = eb_standardised(cases, pop)
    prep = _prepare(rate_z, bg, weighting)  # the very y and weights ours uses
    w = libpysal.weights.WSP(prep.weights).to_W(silence_warnings=True)
    w.transform = "r"
    # esda's numba kernel compiles on its first call: once here, outside every timing.
    _, compile_cpu, compile_wall = _clock(
        lambda: Moran_Local(prep.y, w, permutations=9, seed=1, n_jobs=1, keep_simulations=False)
    )
    common = {"permutations": perms, "seed": seed, "fdr": fdr, "weighting": weighting}

    def ours_local():
        return local_moran(rate_z, bg, max_permutations=perms, **common)

    def esda_local():
        return Moran_Local(
            prep.y, w, permutations=perms, seed=seed, n_jobs=1, keep_simulations=False
        )

    # Weights ready for both: esda is handed its W, and the month's BorderGraph keeps the
    # weights it built for the first statistic (local Moran, Gi*, global Moran share them).
    # The cost of building them from the graph is timed apart ("ours_cold").
    bg.weights(weighting, row_standardise=True)
    rec1, lm, el = compare(
        "hotspots: local_moran vs esda Moran_Local", ours_local, esda_local, repeats
    )
    tested = np.isfinite(lm["I"].to_numpy()[prep.used])
    diff1 = float(np.max(np.abs(lm["I"].to_numpy()[prep.used][tested] - el.Is[tested])))

    used_ids = bg.ids[prep.used]
    e_used = cases.reindex(used_ids).astype(float).to_numpy()
    b_used = pop.reindex(used_ids).to_numpy()

    def ours_rate():
        return hotspots(cases, pop, bg, max_permutations=perms, **common)

    def esda_rate():
        return Moran_Local_Rate(
            e_used, b_used, w, permutations=perms, seed=seed, n_jobs=1, keep_simulations=False
        )

    rec2, hs, er = compare(
        "hotspots: hotspots vs esda Moran_Local_Rate", ours_rate, esda_rate, repeats
    )
    diff2 = float(np.max(np.abs(hs["I"].to_numpy()[prep.used][tested] - er.Is[tested])))
    cold = {}
    for key, fn in (("local", ours_local), ("rate", ours_rate)):
        _fresh_graph(bg)
        cold[key] = _clock(fn)[1]
    for rec, diff, key in ((rec1, diff1, "local"), (rec2, diff2, "rate")):
        rec["check"] = {
            "ours_cold_cpu_s": cold[key],
            "units_tested": int(tested.sum()),
            "max_abs_diff_I": diff,
            "I_equal_1e-12": bool(diff <= 1e-12),
            "permutations": perms,
            "weighting": weighting,
            "esda_compile_cpu_s": compile_cpu,
            "esda_compile_wall_s": compile_wall,
        }
        if diff > 1e-12:
            print(f"WARNING: {rec['step']}: local I differ by up to {diff:.3g}")

    # The month step's own call: adaptive refinement on (no library does it), timed once.
    _fresh_graph(bg)
    month_hs, cpu, wall = _clock(lambda: hotspots(cases, pop, bg, **common))
    rec2["check"]["month_call"] = {
        "cpu_s": cpu,
        "wall_s": wall,
        "max_permutations": int(month_hs.attrs["max_permutations"]),
        "draws_used": int(month_hs.attrs["draws_used"]),
        "units_refined": int((month_hs["draws"] > perms).sum()),
    }
    if prof:
        profile("local_moran", lambda: (_fresh_graph(bg), ours_local()))
    return [rec1, rec2]


def bench_zonal(region: Any, repeats: int, prof: bool) -> list[dict]:
    import geopandas as gpd
    import rasterio
    from exactextract import exact_extract

    from marchland.inputs.population import zonal_population

    raster = region.config.population.raster
    if raster is None:
        return []
    units = region.all_units.drop(columns="population")  # open_region sums over every unit
    with rasterio.open(raster) as src:
        crs = src.crs
    polys = gpd.GeoDataFrame(geometry=units.geometry.to_crs(crs).to_numpy(), crs=crs)

    def ours():
        return zonal_population(units, raster)

    rec, pop, ee = compare(
        "zonal vs exactextract",
        ours,
        lambda: exact_extract(str(raster), polys, "sum", output="pandas"),
        repeats,
    )
    a, b = pop.to_numpy(), ee["sum"].fillna(0).to_numpy(float)
    rec["check"] = {
        "units": len(units),
        "max_abs_diff": float(np.max(np.abs(a - b))),
        "sums_equal": bool(np.array_equal(a, b)),
        "total_population": float(a.sum()),
    }
    if prof:
        profile("zonal", ours)
    return [rec]


def bench_gpkg(region: Any, repeats: int, prof: bool) -> list[dict]:
    import geopandas as gpd
    import pyogrio

    from marchland.pack import bundle

    cfg = region.config
    # The month result as the layer writer reads it: the units layer and no other.
    result = SimpleNamespace(
        units=region.units,
        config=cfg,
        as_of=region.as_of(MONTH),
        **dict.fromkeys(
            ["rates", "hotspots", "fronts", "front_outlines", "risk", "priorities", "depots",
             "edges", "clusters"]
        ),
    )  # fmt: skip
    tmp = Path(tempfile.mkdtemp(prefix="bench-cores-"))
    n = iter(range(10**6))

    def ours():
        path = tmp / f"ours{next(n)}" / "layers.gpkg"
        path.parent.mkdir()
        bundle._write_layers(result, path)
        return path

    # The GeoDataFrame our writer hands to GDAL, caught on one call.
    caught: list[Any] = []
    to_file = gpd.GeoDataFrame.to_file

    def catch(self, *args, **kwargs):
        caught.append(self)
        return to_file(self, *args, **kwargs)

    gpd.GeoDataFrame.to_file = catch
    try:
        ours()
    finally:
        gpd.GeoDataFrame.to_file = to_file
    gdf = caught[0]

    def library():
        # The same two files: the GeoPackage layer and its GeoParquet copy (issue 19 asks for
        # both), each with the bare library call.
        path = tmp / f"lib{next(n)}.gpkg"
        pyogrio.write_dataframe(gdf, path, layer="units", driver="GPKG")
        gdf.to_parquet(path.with_suffix(".parquet"), index=False)
        return path

    rec, p_ours, p_lib = compare("GeoPackage vs pyogrio", ours, library, repeats)
    back = pyogrio.read_dataframe(p_ours, layer="units")
    lib_back = pyogrio.read_dataframe(p_lib, layer="units")
    rec["check"] = {
        "rows": len(gdf),
        "columns": list(gdf.columns),
        "same_layer": bool(back.equals(lib_back)),
        "same_parquet": bool(
            gpd.read_parquet(p_ours.parent / "layers" / "units.parquet").equals(
                gpd.read_parquet(p_lib.with_suffix(".parquet"))
            )
        ),
        "both_write": "the GeoPackage layer and its GeoParquet copy",
    }
    if prof:
        profile("GeoPackage", ours)
    return [rec]


STEPS = {"graph": bench_graph, "hotspots": bench_hotspots, "zonal": bench_zonal,
         "gpkg": bench_gpkg}  # fmt: skip


# --- reporting ---------------------------------------------------------------------------------
def _load() -> list[float]:
    return [round(x, 2) for x in os.getloadavg()]


def table(recs: list[dict]) -> list[str]:
    """Markdown rows: step, ours, library, ratio, goal."""
    out = [
        "| step | ours CPU s (median / min) | library CPU s (median / min) | ratio CPU "
        "(wall) | goal <= 1.2x |",
        "|---|---:|---:|---:|---|",
    ]
    for r in recs:
        miss = r["ratio_cpu"] / GOAL - 1
        goal = "met" if r["goal_met"] else f"missed by {miss:.0%}"
        out.append(
            f"| {r['step']} | {r['ours_cpu_median_s']:.3f} / {r['ours_cpu_min_s']:.3f} | "
            f"{r['lib_cpu_median_s']:.3f} / {r['lib_cpu_min_s']:.3f} | "
            f"{r['ratio_cpu']:.2f}x ({r['ratio_wall']:.2f}x) | {goal} |"
        )
    return out


def _section(cores: dict) -> str:
    lines = [
        START,
        "",
        "Written by `benchmarks/bench_cores.py` (how each pair is called is in its docstring).",
        "One process, one thread (OMP/OpenBLAS/MKL/numba/GDAL threads 1); inputs read once by",
        "`open_region`; ours and the library alternate, each repeat in a fresh call. Ratio =",
        "median over repeats of ours / library CPU seconds (`time.process_time`); wall-time",
        "ratio in brackets. Goal: ratio <= 1.2.",
    ]
    for label, run in cores.items():
        m = run["machine"]
        lines += [
            "",
            f"### {label}: {run['units']:,} analysis units, {run['all_units']:,} boundary units",
            "",
            f"{run['date']}, {m['cpu']}, {m['nproc']} cores; load average "
            f"{run['load_start']} at start, {run['load_end']} at end (1/5/15 min); "
            f"{run['repeats']} repeats; reading the inputs took {run['read_s']:.1f} s.",
            "",
            *table(run["steps"]),
            "",
        ]
        for r in run["steps"]:
            c = r.get("check", {})
            if "max_abs_diff_I" in c:
                extra = (
                    f"{c['units_tested']:,} units tested, {c['permutations']} permutations, "
                    f"{c['weighting']} weights; local I max |ours - esda| = "
                    f"{c['max_abs_diff_I']:.1e} (equal to 1e-12: {c['I_equal_1e-12']}); esda's "
                    f"numba compile {c['esda_compile_cpu_s']:.1f} s CPU, excluded; ours with "
                    f"the graph's weights still to build: {c['ours_cold_cpu_s']:.3f} s CPU"
                )
                if "month_call" in c:
                    mc = c["month_call"]
                    extra += (
                        f". The month's call with refinement (up to {mc['max_permutations']:,} "
                        f"draws; {mc['units_refined']:,} units refined, most draws "
                        f"{mc['draws_used']:,}): {mc['cpu_s']:.2f} s CPU"
                    )
            elif "ours_pairs" in c:
                kinds = ", ".join(f"{k} {v:,}" for k, v in c["ours_kinds"].items())
                extra = (
                    f"pairs: ours {c['ours_pairs']:,} ({kinds}; "
                    f"{c['ours_cross_border_pairs']:,} cross-border), queen "
                    f"{c['queen_pairs']:,}, fuzzy {c['fuzzy_pairs']:,}"
                )
            elif "sums_equal" in c:
                extra = (
                    f"{c['units']:,} units; sums equal: {c['sums_equal']} (max |diff| "
                    f"{c['max_abs_diff']:.1e})"
                )
            else:
                extra = (
                    f"{c.get('rows', 0):,} rows, {len(c.get('columns', []))} columns; "
                    f"GeoPackage layers read back equal: {c.get('same_layer')}; "
                )
                if "both_write" in c:
                    extra += (
                        f"GeoParquet copies equal: {c.get('same_parquet')} (both sides write "
                        f"{c['both_write']})"
                    )
                else:  # a record from before the core wrote the GeoParquet copy too
                    extra += f"ours also writes {c.get('ours_also_writes')}"
            lines.append(f"- {r['step']}: {extra}.")
        for m in run.get("merged", []):
            lines.append(
                f"- Re-run alone on {m['date']} ({m['repeats']} repeats, load average "
                f"{m['load_start']} at start, {m['load_end']} at end): {', '.join(m['steps'])}."
            )
    lines += ["", END]
    return "\n".join(lines)


def write_markdown(cores: dict, path: Path) -> None:
    """Rewrite the section between the markers (appended with its title when missing)."""
    text = path.read_text(encoding="utf-8") if path.exists() else ""
    section = _section(cores)
    if START in text and END in text:
        text = text[: text.index(START)] + section + text[text.index(END) + len(END) :]
    else:
        text = text.rstrip("\n") + f"\n\n{TITLE}\n\n{section}\n"
    path.write_text(text, encoding="utf-8")


def main() -> None:
    """Command line: ``python benchmarks/bench_cores.py --world /tmp/worlds/world10000``."""
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    where = ap.add_mutually_exclusive_group(required=True)
    where.add_argument("--world", type=Path, help="a world folder or its scenario.toml")
    where.add_argument("--demo", action="store_true", help="the bundled fictional scenario")
    ap.add_argument("--repeats", type=int, default=5)
    ap.add_argument("--steps", nargs="+", choices=list(STEPS), default=list(STEPS))
    ap.add_argument("--label", help="key in results.json (default: demo or the world's name)")
    ap.add_argument("--profile", action="store_true", help="cProfile one call of each of ours")
    ap.add_argument("--no-write", action="store_true", help="print only")
    ap.add_argument("--merge", action="store_true", help="replace only the rows of the steps run")
    a = ap.parse_args()

    from marchland import open_region
    from marchland.demo import scenario_path

    if a.demo:
        config, label = scenario_path(), "demo"
    else:
        config = a.world / "scenario.toml" if a.world.is_dir() else a.world
        label = config.parent.name
    label = a.label or label
    load_start = _load()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        region, read_cpu, read_wall = _clock(lambda: open_region(config))
        print(f"{label}: read in {read_wall:.1f} s wall ({read_cpu:.1f} s CPU), "
              f"{len(region.units):,} analysis units")  # fmt: skip
        region.graph  # noqa: B018  (built once, as the month does before hotspots)
        recs: list[dict] = []
        for step in a.steps:
            got = STEPS[step](region, a.repeats, a.profile)
            print("\n".join(table(got)[2:]), flush=True)
            for r in got:
                print(f"    check: {r.get('check')}", flush=True)
            recs += got
    run = {
        "units": len(region.units),
        "all_units": len(region.all_units),
        "config": str(config),
        "repeats": a.repeats,
        "read_s": read_wall,
        "read_cpu_s": read_cpu,
        "load_start": load_start,
        "load_end": _load(),
        "date": dt.datetime.now().isoformat(timespec="minutes"),
        "machine": _machine(),
        "steps": recs,
    }
    print("\n" + "\n".join(table(recs)))
    print(f"load average {run['load_start']} -> {run['load_end']}")
    if a.no_write:
        return
    store = HERE / "results.json"
    results = json.loads(store.read_text()) if store.exists() else {}
    cores = results.setdefault("cores", {})
    if a.merge and label in cores:
        done = {r["step"] for r in recs}
        old = cores[label]
        kept = [r for r in old["steps"] if r["step"] not in done]
        order = [r["step"] for r in old["steps"]]
        steps = sorted(kept + recs, key=lambda r: order.index(r["step"]) if r["step"] in
                       order else len(order))  # fmt: skip
        rerun = {k: run[k] for k in ("date", "repeats", "load_start", "load_end")}
        merged = [m for m in old.get("merged", []) if not set(m["steps"]) <= done]
        run = {**old, "steps": steps, "merged": [*merged, {**rerun, "steps": sorted(done)}]}
    cores[label] = run
    store.write_text(json.dumps(results, indent=1) + "\n", encoding="utf-8")
    write_markdown(cores, HERE / "RESULTS.md")


if __name__ == "__main__":
    main()
