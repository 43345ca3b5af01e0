"""Time a monthly run at scale on synthetic worlds (issue 19); never asserted in tests.

For each size: generate the world with ``benchmarks/world.py`` if its folder is missing, then
run ``marchland run CONFIG --month 2026-10 --overwrite`` in a fresh process and record wall
time, CPU time (user + system) and peak RSS (``/usr/bin/time -v`` when present, else
``resource.getrusage(RUSAGE_CHILDREN)``), with each step's time from the bundle's
``manifest.json``. A bare-library comparison follows in another fresh process: libpysal queen
contiguity on the same analysis units, esda ``Moran_Local`` on the same month's attack rates,
and a pyogrio write of the units layer. Results are merged into ``benchmarks/results.json``
(keyed by size) and ``benchmarks/RESULTS.md`` is rewritten from it with the machine described.

    $ PYTHONPATH=src NUMBA_CACHE_DIR=.venv/numba-cache MPLBACKEND=Agg \\
        python benchmarks/bench_month.py --sizes 1000 10000 [--root /tmp/marchland-worlds]

Run one size at a time on a shared machine; wall time then overstates the cost and CPU time
is the steadier figure (the load average at the start is recorded beside it).
"""

from __future__ import annotations

import argparse
import datetime as dt
import json
import os
import platform
import re
import resource
import subprocess
import sys
import time
from importlib import metadata
from pathlib import Path

HERE = Path(__file__).resolve().parent
MONTH = "2026-10"
LIBRARIES = (
    "marchland",
    "numpy",
    "pandas",
    "geopandas",
    "shapely",
    "pyogrio",
    "libpysal",
    "esda",
    "numba",
    "scipy",
    "matplotlib",
    "rasterio",
    "exactextract",
)
_TIME = Path("/usr/bin/time")
_TIME_FIELDS = {
    "User time (seconds)": "user_s",
    "System time (seconds)": "sys_s",
    "Maximum resident set size (kbytes)": "rss_kb",
}

# Run in a fresh interpreter on the month's bundle: the same units and the same month's rates.
_LIBRARY_RUN = r"""
import json, sys, tempfile, time, warnings
import numpy as np, pyogrio
from pathlib import Path
warnings.simplefilter("ignore")
gpkg = Path(sys.argv[1])
out = {}
t = time.perf_counter()
units = pyogrio.read_dataframe(gpkg, layer="units")
rates = pyogrio.read_dataframe(gpkg, layer="rates", read_geometry=False)
out["pyogrio_read_units_s"] = time.perf_counter() - t
from libpysal.graph import Graph
t = time.perf_counter()
g = Graph.build_contiguity(units.set_index("unit_id"), rook=False)
out["libpysal_queen_s"] = time.perf_counter() - t
out["queen_edges"] = int(g.n_edges)
col = "month_rate"
y = rates.set_index("unit_id")[col].reindex(g.unique_ids).fillna(0).to_numpy(float)
from esda.moran import Moran_Local
w = g.transform("r").to_W()
t = time.perf_counter()
Moran_Local(y, w, permutations=9, seed=1, n_jobs=1)  # numba compiles on the first call
out["esda_compile_s"] = time.perf_counter() - t
t = time.perf_counter()
Moran_Local(y, w, permutations=999, seed=1, n_jobs=1)
out["esda_moran_local_s"] = time.perf_counter() - t
out["moran_values"] = col
with tempfile.TemporaryDirectory() as tmp:
    t = time.perf_counter()
    pyogrio.write_dataframe(units, Path(tmp) / "units.gpkg", layer="units")
    out["pyogrio_write_units_s"] = time.perf_counter() - t
print(json.dumps(out))
"""


def _tree_pss_mb(root: int) -> float:
    """Summed proportional set size (MB) of ``root`` and every process below it.

    A forked copy's resident set counts the pages it still shares with its parent, so the
    largest RSS overstates what a run holds; PSS splits each shared page between its sharers
    and sums to the memory the run takes from the machine (Linux ``smaps_rollup``).
    """
    kids: dict[int, list[int]] = {}
    for d in os.listdir("/proc"):
        if d.isdigit():
            try:
                stat = Path(f"/proc/{d}/stat").read_text()
                kids.setdefault(int(stat.rsplit(")", 1)[1].split()[1]), []).append(int(d))
            except OSError:
                pass
    todo, total = [root], 0.0
    while todo:
        pid = todo.pop()
        todo += kids.get(pid, [])
        try:
            for line in Path(f"/proc/{pid}/smaps_rollup").read_text().splitlines():
                if line.startswith("Pss:"):
                    total += int(line.split()[1]) / 1024
        except OSError:
            pass
    return total


def _timed_run(cmd: list[str], log: Path) -> dict:
    """Run ``cmd`` in a fresh process; return wall, CPU, peak RSS, peak tree PSS, exit code."""
    use_time = _TIME.exists()
    full = [str(_TIME), "-v", *cmd] if use_time else cmd
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    t0 = time.perf_counter()
    pss = 0.0
    with open(log, "w", encoding="utf-8") as err:
        proc = subprocess.Popen(full, stdout=err, stderr=subprocess.STDOUT)
        can_sample = Path(f"/proc/{proc.pid}/smaps_rollup").exists()
        while proc.poll() is None:
            if can_sample:
                pss = max(pss, _tree_pss_mb(proc.pid))
            time.sleep(0.5)
    wall = time.perf_counter() - t0
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    text = log.read_text(encoding="utf-8", errors="replace")
    rec = {"wall_s": wall, "returncode": proc.returncode}
    if pss:
        rec["tree_pss_mb"] = pss  # sampled every 0.5 s
    if use_time:
        for label, key in _TIME_FIELDS.items():
            m = re.search(rf"{re.escape(label)}: ([\d.]+)", text)
            rec[key] = float(m.group(1)) if m else float("nan")
        rec["rss_source"] = "/usr/bin/time -v"
    else:
        rec["user_s"] = after.ru_utime - before.ru_utime
        rec["sys_s"] = after.ru_stime - before.ru_stime
        rec["rss_kb"] = after.ru_maxrss  # largest child so far (Linux: kB)
        rec["rss_source"] = "getrusage(RUSAGE_CHILDREN)"
    rec["cpu_s"] = rec["user_s"] + rec["sys_s"]
    return rec


def _problems(log: Path) -> list[str]:
    """Warning and error lines of a run's output, each kind once, with how often it came."""
    seen: dict[str, int] = {}
    for line in log.read_text(encoding="utf-8", errors="replace").splitlines():
        if re.search(r"Warning|Error|error:|Traceback", line) and "Exit status" not in line:
            key = re.sub(r"\d+", "N", line.strip())[:200]
            seen[key] = seen.get(key, 0) + 1
    return [f"{k} (x{v})" if v > 1 else k for k, v in seen.items()]


def bench_size(n: int, root: Path, seed: int, libs: bool) -> dict:
    """Generate (if needed) and run one world; return its record."""
    world = root / f"world{n}"
    env = dict(os.environ)
    env["PYTHONPATH"] = os.pathsep.join([str(HERE.parent / "src"), env.get("PYTHONPATH", "")])
    if not (world / "scenario.toml").exists():
        gen = _timed_run(
            [
                sys.executable,
                str(HERE / "world.py"),
                "--units",
                str(n),
                "--out",
                str(world),
                "--seed",
                str(seed),
            ],
            root / f"gen{n}.log",
        )
        if gen["returncode"]:
            raise SystemExit(f"generating {n} failed, see {root / f'gen{n}.log'}")
    summary = json.loads((world / "truth" / "summary.json").read_text())
    rec: dict = {"size": n, "world": summary, "load_at_start": os.getloadavg()[0]}
    log = root / f"run{n}.log"
    cmd = [
        sys.executable,
        "-c",
        "from marchland.cli import main; main()",
        "run",
        str(world / "scenario.toml"),
        "--month",
        MONTH,
        "--overwrite",
    ]
    os.environ.update(env)
    rec["month"] = _timed_run(cmd, log)
    rec["problems"] = _problems(log)
    manifest = world / "out" / MONTH / "manifest.json"
    if rec["month"]["returncode"] == 0 and manifest.exists():
        rec["steps_s"] = json.loads(manifest.read_text())["timings_s"]
        if libs:
            proc = subprocess.run(
                [sys.executable, "-c", _LIBRARY_RUN, str(world / "out" / MONTH / "layers.gpkg")],
                capture_output=True,
                text=True,
                check=False,
            )
            rec["libraries"] = (
                json.loads(proc.stdout.splitlines()[-1])
                if proc.returncode == 0
                else {"error": proc.stderr.strip().splitlines()[-1:]}
            )
    return rec


def _machine() -> dict:
    cpu = next(
        (
            ln.split(":", 1)[1].strip()
            for ln in Path("/proc/cpuinfo").read_text().splitlines()
            if ln.startswith("model name")
        ),
        platform.processor(),
    )
    mem = next(
        (
            ln.split(":", 1)[1].strip()
            for ln in Path("/proc/meminfo").read_text().splitlines()
            if ln.startswith("MemTotal")
        ),
        "?",
    )
    versions = {}
    for lib in LIBRARIES:
        try:
            versions[lib] = metadata.version(lib)
        except metadata.PackageNotFoundError:
            versions[lib] = "-"
    return {
        "cpu": cpu,
        "nproc": os.cpu_count(),
        "memory": mem,
        "python": platform.python_version(),
        "platform": platform.platform(),
        "versions": versions,
        "date": dt.datetime.now().isoformat(timespec="minutes"),
    }


def _fmt(v: float | None, digits: int = 1) -> str:
    return "-" if v is None else f"{v:.{digits}f}"


def write_markdown(results: dict, path: Path) -> None:
    """Rewrite RESULTS.md from the merged results (one column per size)."""
    sizes = sorted(results["runs"], key=int)
    runs = [results["runs"][s] for s in sizes]
    m = results["machine"]
    out = [
        "# Monthly run at scale (issue 19)",
        "",
        "Written by `benchmarks/bench_month.py`; synthetic worlds from `benchmarks/world.py`",
        f"(seeded, invented). Month {MONTH}. Each run is a fresh process (cold imports, warm",
        "numba cache). The machine was shared with other work, so wall time overstates the cost;",
        "CPU time (user + system) is the steadier figure.",
        "",
        "## Machine",
        "",
        f"- CPU: {m['cpu']}; {m['nproc']} cores (nproc); memory {m['memory']}",
        f"- {m['platform']}; Python {m['python']}",
        "- " + ", ".join(f"{k} {v}" for k, v in m["versions"].items()),
        f"- last updated {m['date']}",
        "",
        "## Whole run",
        "",
        "| | " + " | ".join(f"{int(s):,} districts" for s in sizes) + " |",
        "|---|" + "---:|" * len(sizes),
    ]

    def row(label, values):
        out.append(f"| {label} | " + " | ".join(values) + " |")

    row("analysis units (generated)", [f"{r['world']['districts']:,}" for r in runs])
    row("affected by month end (truth)", [f"{r['world']['affected']:,}" for r in runs])
    row("generation, s", [_fmt(r["world"]["times_s"]["total"]) for r in runs])
    row("month: wall, s", [_fmt(r["month"]["wall_s"]) for r in runs])
    row("month: CPU (user+sys), s", [_fmt(r["month"]["cpu_s"]) for r in runs])
    row("month: peak RSS, MB", [_fmt(r["month"]["rss_kb"] / 1024, 0) for r in runs])
    row(
        "month: peak summed PSS of the process tree, MB",
        [_fmt(r["month"].get("tree_pss_mb"), 0) for r in runs],
    )
    row("month: exit code", [str(r["month"]["returncode"]) for r in runs])
    row("load average at start", [_fmt(r["load_at_start"]) for r in runs])
    steps: list[str] = []
    for r in runs:
        steps += [k for k in r.get("steps_s", {}) if k not in steps]
    out += ["", "## Steps (manifest `timings_s`, seconds)", ""]
    out += [
        "| step | " + " | ".join(f"{int(s):,}" for s in sizes) + " |",
        "|---|" + "---:|" * len(sizes),
    ]
    for k in steps:
        row(f"`{k}`", [_fmt(r.get("steps_s", {}).get(k), 2) for r in runs])
    out += ["", "## Generation stages (seconds)", ""]
    stages = list(runs[0]["world"]["times_s"])
    out += [
        "| stage | " + " | ".join(f"{int(s):,}" for s in sizes) + " |",
        "|---|" + "---:|" * len(sizes),
    ]
    for k in stages:
        row(k, [_fmt(r["world"]["times_s"].get(k), 2) for r in runs])
    out += ["", "## Bare libraries on the same units (seconds)", ""]
    keys = [
        "esda_compile_s",
        "pyogrio_read_units_s",
        "libpysal_queen_s",
        "esda_moran_local_s",
        "pyogrio_write_units_s",
    ]
    out += [
        "| | " + " | ".join(f"{int(s):,}" for s in sizes) + " |",
        "|---|" + "---:|" * len(sizes),
    ]
    for k in keys:
        row(k.removesuffix("_s"), [_fmt(r.get("libraries", {}).get(k), 2) for r in runs])
    row("queen edges", [str(r.get("libraries", {}).get("queen_edges", "-")) for r in runs])
    out += ["", "## Warnings and errors seen in the run's output", ""]
    for s, r in zip(sizes, runs, strict=True):
        out.append(f"- {int(s):,}: " + ("none" if not r["problems"] else ""))
        out += [f"  - `{p}`" for p in r["problems"]]
    for note in results.get("notes", []):
        out += ["", note]
    # Hand-written sections from "## After wave" on (other benchmarks' figures) are kept.
    old = path.read_text(encoding="utf-8") if path.exists() else ""
    kept = old[old.find("\n## After wave") :] if "\n## After wave" in old else ""
    path.write_text("\n".join(out) + "\n" + kept, encoding="utf-8")


def main() -> None:
    """Command line: ``python benchmarks/bench_month.py --sizes 1000 10000``."""
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", type=int, nargs="+", default=[1000], help="districts per world")
    ap.add_argument(
        "--root",
        type=Path,
        default=Path("/tmp/marchland-worlds"),
        help="folder holding world<N>/ (generated when missing)",
    )
    ap.add_argument("--seed", type=int, default=1, help="seed of the generated worlds")
    ap.add_argument("--no-libraries", action="store_true", help="skip the library comparison")
    a = ap.parse_args()
    a.root.mkdir(parents=True, exist_ok=True)
    store = HERE / "results.json"
    results = json.loads(store.read_text()) if store.exists() else {"runs": {}}
    for n in a.sizes:  # one at a time: the machine is shared
        rec = bench_size(n, a.root, a.seed, not a.no_libraries)
        results["runs"][str(n)] = rec
        m = rec["month"]
        print(
            f"{n:>6} districts: wall {m['wall_s']:.1f} s, CPU {m['cpu_s']:.1f} s, "
            f"peak RSS {m['rss_kb'] / 1024:.0f} MB, exit {m['returncode']}"
        )
        for step, sec in sorted(rec.get("steps_s", {}).items(), key=lambda kv: -kv[1])[:5]:
            print(f"        {step:<20} {sec:7.2f} s")
        results["machine"] = _machine()
        store.write_text(json.dumps(results, indent=1) + "\n", encoding="utf-8")
        write_markdown(results, HERE / "RESULTS.md")


if __name__ == "__main__":
    main()
