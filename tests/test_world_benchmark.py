"""The benchmark world generator (benchmarks/world.py) writes a scenario marchland can read.

Invented data (a property test): a very small world is generated into a temporary folder and
read back with ``open_region``. Covered: every district is read, each country comes from its
own boundary files, and the only rejected report rows are the ones the generator planted.
"""

from __future__ import annotations

import importlib.util
from pathlib import Path

import pandas as pd
import pytest

from marchland.pack import open_region

_SCRIPT = Path(__file__).resolve().parents[1] / "benchmarks" / "world.py"


@pytest.fixture(scope="module")
def small_world(tmp_path_factory):
    spec = importlib.util.spec_from_file_location("bench_world", _SCRIPT)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    out = tmp_path_factory.mktemp("world")
    summary = module.generate(60, out, seed=3)
    return out, summary, open_region(out / "scenario.toml")


def test_every_district_is_read_at_district_level(small_world):
    out, summary, region = small_world
    truth = pd.read_csv(out / "truth" / "districts.csv")
    assert sorted(region.units.index) == sorted(truth["unit_id"])
    assert set(region.units["level"]) == {2}
    assert region.units["country"].value_counts().to_dict() == summary["districts_per_country"]


def test_countries_come_from_separate_files(small_world):
    _, _, region = small_world
    per_file = region.units.groupby("source")["country"].agg(["nunique", "first"])
    assert (per_file["nunique"] == 1).all()
    assert sorted(per_file["first"]) == ["MRW", "OSK", "QLN", "TVR"]
    # The borders were digitised apart: some neighbours across them are only gap-bridged.
    edges = region.graph.edges
    assert (edges.loc[edges["cross_border"], "kind"] == "gap-bridged").any()


def test_only_planted_rows_are_rejected(small_world):
    out, _, region = small_world
    dirt = pd.read_csv(out / "truth" / "dirt.csv")
    planted = sorted(
        zip(
            dirt["source_file"].str.extract(r"reports/(\w+)_weekly")[0] + "-weekly",
            # the truth file counts data rows; rejects number rows as a spreadsheet does
            # (header = row 1), so the same row is one further down
            dirt["row"] + 1,
            dirt["reason"],
            strict=True,
        )
    )
    got = sorted(
        zip(region.rejects["source"], region.rejects["row"], region.rejects["reason"], strict=True)
    )
    assert len(planted) == 12  # three kinds per country
    assert got == planted
    assert region.accounting["rejected"].sum() == len(planted)
