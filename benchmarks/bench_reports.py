"""Speed of read_reports on large synthetic weekly tables and line lists, and of check on the demo.

Synthetic inputs: U districts with invented names, a weekly table of every district every week
for W weeks (explicit zeros, about 1% dirt: blanks, negatives, unknown names, bad dates) and a
line list of C cases with case-varied and accented names. Shows that the cost grows with rows
(vectorised pandas) and with distinct names (matching), not with rows x names.

Run:  .venv/bin/python benchmarks/bench_reports.py [U W C]

Measured 2026-12-01, 2 cores shared with other jobs (load average ~7), defaults U=500 W=260
C=200,000: weekly 130,000 rows in 1.5 s; line list 200,000 cases (1,500 distinct names) in
3.0 s; check on the demo scenario 5.4 s (about 2 s of CPU: the rest was waiting for the cores).
"""

from __future__ import annotations

import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import pandas as pd

from marchland.config.schema import ReportColumns, ReportSpec
from marchland.inputs.reports import read_reports
from marchland.pack.region import check


def synthetic(u: int, w: int, c: int, folder: Path, seed: int = 1):
    rng = np.random.default_rng(seed)
    ids = [f"TVR-{i // 20 + 1:02d}-{i % 20 + 1:02d}" for i in range(u)]
    names = [f"Vel{chr(97 + i % 26)}rra {i}" for i in range(u)]
    units = pd.DataFrame(
        {"name": names, "country": "TVR", "level": 2}, index=pd.Index(ids, name="unit_id")
    )
    weeks = pd.date_range("2020-01-06", periods=w, freq="7D")
    grid = pd.MultiIndex.from_product([names, weeks]).to_frame(index=False)
    grid.columns = ["district", "week_start"]
    grid["cases"] = rng.poisson(2, len(grid)).astype(str)
    grid["received"] = (grid["week_start"] + pd.Timedelta(days=8)).dt.strftime("%Y-%m-%d")
    grid["week_start"] = grid["week_start"].dt.strftime("%Y-%m-%d")
    dirt = rng.random(len(grid)) < 0.01
    grid.loc[dirt, "cases"] = rng.choice(["-1", "x", ""], dirt.sum())
    weekly = folder / "weekly.csv"
    grid.to_csv(weekly, index=False)
    variants = np.array([n.upper() for n in names] + names + [f"District of {n}" for n in names])
    onset = weeks[0] + pd.to_timedelta(rng.integers(0, 7 * w, c), unit="D")
    ll = pd.DataFrame(
        {
            "district_name": rng.choice(variants, c),
            "onset_date": onset.strftime("%Y-%m-%d"),
            "report_date": (onset + pd.to_timedelta(rng.integers(1, 20, c), unit="D")).strftime(
                "%Y-%m-%d"
            ),
            "outcome": rng.choice(["recovered", "died"], c, p=[0.98, 0.02]),
        }
    )
    linelist = folder / "ll.csv"
    ll.to_csv(linelist, index=False)
    specs = [
        ReportSpec(
            name="weekly",
            path=str(weekly),
            files=(weekly,),
            country="TVR",
            zeros="explicit",
            columns=ReportColumns(
                place="district", week="week_start", cases="cases", received="received"
            ),
        ),
        ReportSpec(
            name="ll",
            path=str(linelist),
            files=(linelist,),
            country="TVR",
            shape="linelist",
            columns=ReportColumns(
                place="district_name",
                onset="onset_date",
                report_date="report_date",
                outcome="outcome",
            ),
        ),
    ]
    return units, specs, len(grid)


def main(u: int = 500, w: int = 260, c: int = 200_000) -> None:
    with tempfile.TemporaryDirectory() as d:
        units, specs, n = synthetic(u, w, c, Path(d))
        for spec, rows in zip(specs, (n, c), strict=True):
            t = time.perf_counter()
            r = read_reports(spec, units, today="2030-01-01")
            dt = time.perf_counter() - t
            print(
                f"{spec.name:>7}: {rows:>9,} rows, {len(r.matches):>5} distinct names: "
                f"{dt:6.2f} s ({rows / dt:,.0f} rows/s)"
            )
    from marchland.demo import scenario_path

    t = time.perf_counter()
    report = check(scenario_path())
    print(f"check(demo): {time.perf_counter() - t:.2f} s, ok={report.ok}")


if __name__ == "__main__":
    main(*map(int, sys.argv[1:4]))
