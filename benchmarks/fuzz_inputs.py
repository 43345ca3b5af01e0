"""Fuzz the report readers with thousands of mutated demo files (the suite runs a few dozen).

    PYTHONPATH=src python benchmarks/fuzz_inputs.py --cases 3000 --seed 1

Prints cases, refusals, problems (unexpected errors, accounting violations, rejects without
a location, formula-leading CSV cells) and seconds per case; exits 1 if any problem.
"""

from __future__ import annotations

import argparse
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests"))
from fuzz_corpus import Corpus  # noqa: E402


def main() -> int:
    """Run the corpus and print a one-line summary plus the first problems."""
    ap = argparse.ArgumentParser()
    ap.add_argument("--cases", type=int, default=2000)
    ap.add_argument("--seed", type=int, default=1)
    args = ap.parse_args()
    corpus = Corpus()
    problems: list[str] = []
    t0 = time.perf_counter()
    for case in corpus.cases(args.cases, seed=args.seed):
        with tempfile.TemporaryDirectory() as d:
            problems += corpus.run(case, Path(d))
    dt = time.perf_counter() - t0
    print(f"{args.cases} cases, {len(problems)} problems, {dt / args.cases:.2f} s a case")
    for p in problems[:20]:
        print(" ", p[:300])
    return 1 if problems else 0


if __name__ == "__main__":
    sys.exit(main())
