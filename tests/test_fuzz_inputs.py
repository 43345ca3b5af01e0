"""Fuzz corpus: mutated demo report files are read as ``marchland check`` reads them.

Covered (see ``tests/fuzz_corpus.py``): every demo source shape (weekly CSV, Sunday-calendar
table with day-first dates, line list, workbook) under other encodings, truncation, byte flips,
column swaps, hostile strings, extreme numbers and dates, malformed rows, same-day conflicts
and workbook oddities. Each case must end in a refusal naming the file or in a reading where
rows in = counted + rejected (= the file's records), every reject names file, row and column,
and no CSV cell of the rejects or matches starts like a formula. The thousands-case version
is ``benchmarks/fuzz_inputs.py``.
"""

from __future__ import annotations

import sys
from pathlib import Path

import pytest

sys.path.insert(0, str(Path(__file__).parent))
from fuzz_corpus import Corpus  # noqa: E402

# Cases in the default run: bounded by read_reports' per-source overhead (about 0.1 s of CPU
# a case); the benchmark runs thousands.
N_CASES = 300


@pytest.fixture(scope="module")
def corpus() -> Corpus:
    return Corpus()


def test_fuzz_corpus_no_crash_no_accounting_gap_no_formula(corpus: Corpus, tmp_path: Path) -> None:
    cases = corpus.cases(N_CASES, seed=20)
    problems = []
    for i, case in enumerate(cases):
        folder = tmp_path / str(i)
        folder.mkdir()
        problems += corpus.run(case, folder)
    assert problems == []
    # The corpus does reach every mutation kind.
    kinds = {m for c in cases for m in c.mutations}
    assert len(kinds) >= 15
