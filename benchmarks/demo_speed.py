"""Time ``marchland demo`` end to end in a fresh process (the issue's target: < 30 s on 2 cores).

Runs the console script in a new Python process (cold imports, warm on-disk numba cache as
``make demo`` leaves it), writing to a temporary folder, and prints the wall time, the CPU time
of the child and each step's time from the bundle's manifest.

    $ NUMBA_CACHE_DIR=.venv/numba-cache .venv/bin/python benchmarks/demo_speed.py [--repeat 3]

On a loaded machine wall time overstates the cost; the child's CPU time (user + system) is
the steadier figure. ``os.getloadavg`` is printed beside it.
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path


def _once(exe: Path) -> dict:
    out = Path(tempfile.mkdtemp(prefix="marchland-bench-"))
    try:
        before = resource.getrusage(resource.RUSAGE_CHILDREN)
        load = os.getloadavg()[0]
        t0 = time.perf_counter()
        subprocess.run([str(exe), "-q", "demo", "--out", str(out)], check=True)
        wall = time.perf_counter() - t0
        after = resource.getrusage(resource.RUSAGE_CHILDREN)
        cpu = (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)
        month = next(p for p in out.iterdir() if p.is_dir() and not p.name.startswith("."))
        steps = json.loads((month / "manifest.json").read_text())["timings_s"]
        return {"wall_s": wall, "cpu_s": cpu, "load": load, "steps": steps}
    finally:
        shutil.rmtree(out, ignore_errors=True)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=1, help="number of cold runs")
    args = ap.parse_args()
    exe = Path(sys.executable).with_name("marchland")
    for i in range(args.repeat):
        r = _once(exe)
        print(
            f"run {i + 1}: wall {r['wall_s']:.1f} s, child CPU {r['cpu_s']:.1f} s, "
            f"load average {r['load']:.1f} on {os.cpu_count()} cores"
        )
        for step, sec in sorted(r["steps"].items(), key=lambda kv: -kv[1]):
            print(f"    {step:<16} {sec:6.2f} s")


if __name__ == "__main__":
    main()
