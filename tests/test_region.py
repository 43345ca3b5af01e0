"""open_region and check on the demo scenario, and bad inputs giving one-line errors.

Covered: every deliberate dirty row of the demo (demo_data/truth/dirt.csv) rejected for its own
reason at its own file, sheet, row and column, and nothing else rejected; spelling variants
matched; every row of every report file accounted for; the mixed admin-1/admin-2 analysis
units covering the region with no gap or overlap beyond the boundary files' own; counts on
analysis units; the lazily built graph; check() with a source that cannot be read; bad
configs and inputs raising InputError (never another exception).
"""

from __future__ import annotations

import shutil
import warnings
from pathlib import Path

import pandas as pd
import pytest
import shapely

from marchland.config.load import load_config
from marchland.errors import DataWarning, InputError
from marchland.inputs.reports import REASONS, as_of
from marchland.pack.region import CheckReport, Region, check, open_region

ROOT = Path(__file__).resolve().parents[1]
SCENARIO = ROOT / "demo_data" / "scenario.toml"
DIRT = ROOT / "demo_data" / "truth" / "dirt.csv"


@pytest.fixture(scope="module")
def region() -> Region:
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DataWarning)
        return open_region(SCENARIO)


@pytest.fixture(scope="module")
def report() -> CheckReport:
    return check(SCENARIO)


def test_every_dirty_row_rejected_for_its_reason(region: Region) -> None:
    dirt = pd.read_csv(DIRT, dtype=str, keep_default_na=False)
    want = {
        # The truth counts data rows from 1; rejects number rows as a spreadsheet (header 1).
        (Path(d.source_file).name, d.sheet, int(d.row) + 1): (d.reason, d.column)
        for d in dirt.itertuples()
    }
    rej = region.rejects
    got = {
        (f, s, int(r)): (why, col)
        for f, s, r, why, col in zip(
            rej["file"], rej["sheet"], rej["row"], rej["reason"], rej["column"], strict=True
        )
    }
    assert got == want
    assert set(rej["reason"]) <= set(REASONS)


def test_every_row_accounted_for(region: Region) -> None:
    acct = region.accounting
    assert (acct["rows_in"] == acct["counted"] + acct["rejected"]).all()
    # Rows in, counted independently of marchland: every data row of every file and sheet.
    cfg = region.config
    for spec in cfg.reports:
        n = 0
        for f in spec.files:
            if f.suffix == ".xlsx":
                n += sum(len(t) for t in pd.read_excel(f, sheet_name=None).values())
            else:
                n += len(pd.read_csv(f, dtype=str, skip_blank_lines=False))
        assert acct.loc[spec.name, "rows_in"] == n, spec.name
    assert len(region.rejects) == acct["rejected"].sum()


def test_spelling_variants_matched(region: Region) -> None:
    m = region.matches
    unknown = set(region.rejects.loc[region.rejects["reason"] == "unknown-place", "value"])
    unmatched = m[m["unit_id"].isna()]
    assert set(unmatched["place"]) == unknown
    ll = m[m["source"] == "mrw-linelist"]
    assert {"exact-name", "normalised", "alias"} <= set(ll["method"])
    # Accented, abbreviated and "District of" variants land on the same district.
    by_unit = ll.dropna(subset=["unit_id"]).groupby("unit_id")["place"].nunique()
    assert by_unit.max() >= 4


def test_analysis_units_mixed_levels_cover_region(region: Region) -> None:
    u, allu = region.units, region.all_units
    assert u.groupby("country")["level"].unique().map(list).to_dict() == {
        "MRW": [2],
        "OSK": [1],
        "QLN": [2],
        "TVR": [2],
    }
    districts = allu[allu["level"] == 2]
    # Same ground as the district files: no gap, no overlap beyond the files' own.
    a = shapely.union_all(u.geometry.to_numpy())
    d = shapely.union_all(districts.geometry.to_numpy())
    assert a.symmetric_difference(d).area < 1e-6 * d.area
    own_overlap = districts.area.sum() - d.area
    our_overlap = u.area.sum() - a.area
    assert our_overlap <= own_overlap + 1e-6 * d.area
    # Province population is the sum of its districts'.
    osk = districts[districts["country"] == "OSK"].groupby("parent_id")["population"].sum()
    pd.testing.assert_series_equal(u.loc[osk.index, "population"], osk, check_names=False)
    assert (u["population"] > 0).all()
    assert u.crs.is_projected


def test_counts_on_analysis_units(region: Region) -> None:
    c = region.counts
    assert set(c["unit_id"]) <= set(region.units.index)
    assert c["week"].dt.day_of_week.eq(0).all()
    latest = as_of(c)
    assert not latest.duplicated(["unit_id", "week"]).any()
    raw = as_of(region.reports.counts)
    assert latest["cases"].sum() == raw["cases"].sum()


def test_graph_is_built_lazily(region: Region) -> None:
    g = region.graph
    assert set(g.ids) == set(region.units.index)
    assert (g.edges["kind"] == "link").any()
    assert g is region.graph


def test_check_report(report: CheckReport) -> None:
    assert report.ok
    s = report.sources[report.sources["kind"] == "reports"]
    assert len(s) == 4
    assert (s["rows_in"] == s["used"] + s["rejected"]).all()
    dirt = pd.read_csv(DIRT)
    assert s["rejected"].sum() == len(dirt)
    assert report.rejected_by_reason.sum().sum() == len(dirt)
    text = report.to_text()
    for name in s.index:
        assert name in text
    assert "decision support" in text.lower()
    assert f"= {int(s['used'].sum())} used + {len(dirt)} rejected" in text
    for d in dirt.itertuples():  # every dirty row is listed with its file and row
        # The truth counts data rows; the check names spreadsheet rows (header = row 1).
        assert f"{Path(d.source_file).name}" in text and f"row {int(d.row) + 1}" in text
    assert isinstance(report.notes, tuple)
    assert set(report.units["analysis_level"]) == {1, 2}
    assert report.completeness.loc["QLN", "gap_weeks"] > 0


def test_check_survives_an_unreadable_source(tmp_path: Path) -> None:
    # Copy the scenario and break one report file: the others are still read.
    shutil.copytree(ROOT / "demo_data", tmp_path / "demo_data")
    shutil.copytree(ROOT / "boundaries", tmp_path / "boundaries")
    (tmp_path / "demo_data" / "reports" / "qln_weekly.csv").write_text("nothing,useful\n1,2\n")
    r = check(tmp_path / "demo_data" / "scenario.toml")
    assert not r.ok
    assert r.sources.loc["qln-weekly", "status"] == "error"
    assert "Region" in r.sources.loc["qln-weekly", "message"]
    assert r.sources.loc["tvr-weekly", "status"] == "ok"
    assert "ERR" in r.to_text()
    with pytest.raises(InputError, match="qln_weekly.csv"):
        open_region(tmp_path / "demo_data" / "scenario.toml")


def test_bad_boundaries_are_input_errors(tmp_path: Path) -> None:
    shutil.copytree(ROOT / "demo_data", tmp_path / "demo_data")
    shutil.copytree(ROOT / "boundaries", tmp_path / "boundaries")
    (tmp_path / "boundaries" / "osk_adm2.geojson").write_text("{not json")
    r = check(tmp_path / "demo_data" / "scenario.toml")
    assert not r.ok and "osk_adm2.geojson" in r.to_text()
    with pytest.raises(InputError, match="osk_adm2.geojson"):
        open_region(load_config(tmp_path / "demo_data" / "scenario.toml"))


def test_week_conventions_line_up_with_the_simulated_truth(region: Region) -> None:
    # The demo's true weekly incidence (ISO weeks): each country's reports, read through its
    # own week convention (Monday dates, "YYYY-Www", Sunday year + week, onset dates), line up
    # with it at lag 0 better than one week early or late.
    truth = pd.read_csv(ROOT / "demo_data" / "truth" / "incidence.csv", parse_dates=["week"])
    truth["unit_id"] = truth["unit_id"].map(
        lambda u: u if u in region.units.index else region.all_units.at[u, "parent_id"]
    )
    truth = truth.groupby(["unit_id", "week"], as_index=False)["cases"].sum()
    got = as_of(region.counts)
    country = region.units["country"]
    for c in sorted(set(country)):
        corr = {}
        for lag in (-1, 0, 1):
            t = truth.assign(week=truth["week"] + pd.Timedelta(weeks=lag))
            m = got[got["unit_id"].map(country) == c].merge(
                t, on=["unit_id", "week"], suffixes=("", "_true")
            )
            corr[lag] = m["cases"].astype(float).corr(m["cases_true"].astype(float))
        assert corr[0] > max(corr[-1], corr[1]), (c, corr)


def test_check_opens_the_risk_covariates_as_the_run_will(tmp_path):
    from dataclasses import replace

    from marchland.config.schema import RiskCovariate
    from marchland.demo import scenario_path

    cfg = load_config(scenario_path())
    report = check(cfg)
    rows = report.sources[report.sources["kind"] == "covariate"]
    assert len(rows) == len(cfg.risk.covariates) >= 1
    assert (rows["status"] == "ok").all()
    assert "196 units" in rows["message"].iloc[0]

    # A table naming a unit no boundary file holds: check says so, by file, row and column.
    bad = tmp_path / "access.csv"
    bad.write_text("unit_id,share\nTVR-01-01,0.5\nNOWHERE-99,0.2\n")
    cv = RiskCovariate(name="access", table=bad, id_column="unit_id", value_column="share")
    broken = replace(cfg, risk=replace(cfg.risk, covariates=(cv,)))
    report = check(broken)
    row = report.sources.loc["covariate access"]
    assert row["status"] == "error"
    assert "access.csv" in row["message"] and "row 2" in row["message"]
    assert "NOWHERE-99" in row["message"]
    assert not report.ok


def test_check_lists_border_pairs_the_graph_left_out(report: CheckReport) -> None:
    import dataclasses

    from marchland.graph.border import LEFT_OUT_COLUMNS
    from marchland.pack._sections import left_out_block

    # The demo: every pair within the tolerance is a neighbour, and check says so.
    graph_row = report.sources.loc["graph"]
    assert graph_row["status"] == "ok"
    assert "0 pairs within 300 m left out" in graph_row["message"]
    assert list(report.border_left_out.columns) == list(LEFT_OUT_COLUMNS)
    assert len(report.border_left_out) == 0
    assert "None: every pair" in left_out_block(report.border_left_out)
    # Demanding 100 km of facing border leaves every gap-bridged pair out: each is listed
    # (pairs that truly share a line would still be joined), with the advice to add links.
    cfg = load_config(SCENARIO)
    strict = dataclasses.replace(cfg, graph=dataclasses.replace(cfg.graph, min_shared_m=1e5))
    rep = check(strict)
    left = rep.border_left_out
    assert len(left) > 0
    assert (left["country_a"] != left["country_b"]).all()
    assert (left["reason"] == "short").all()
    assert (left["gap_m"] <= cfg.graph.tolerance_m + 1e-6).all()
    text = rep.to_text()
    assert f"Border pairs left out ({len(left)})" in text
    assert "add it to the links table" in text
    html = left_out_block(left)
    assert f"Border pairs left out ({len(left)})" in html
    assert "add it as a row of the links table" in html
    assert str(left["unit_a"].iloc[0]) in html


def test_future_weeks_follow_the_given_run_date_not_the_clock(tmp_path: Path) -> None:
    from month_world import write_world

    cfg = write_world(tmp_path)
    with open(tmp_path / "aaa.csv", "a") as f:
        f.write("AAA-01-0000,2027-03-01,4,0,2027-03-05\n")  # a week after the first date

    def future_rows(today: str) -> list[int]:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", DataWarning)
            rj = open_region(cfg, today=today).rejects
        return sorted(rj.loc[rj["reason"] == "future-week", "row"].astype(int))

    last_row = len((tmp_path / "aaa.csv").read_text().splitlines())
    # The same files and date give the same rejects whatever the day of the run.
    assert future_rows("2026-11-03") == [last_row] == future_rows("2026-11-03")
    assert future_rows("2027-04-01") == []


def test_check_lists_pairs_joined_on_a_short_facing_length() -> None:
    import dataclasses

    from marchland.pack._sections import short_joins_block

    # At 3 km of gap tolerance some demo pairs are joined across a gap while facing each other
    # along less than that: each is listed with the advice to raise min_shared_m; raising it
    # above their facing length leaves them out of the graph (and then they are "left out").
    cfg = load_config(SCENARIO)
    wide = dataclasses.replace(cfg, graph=dataclasses.replace(cfg.graph, tolerance_m=3000.0))
    rep = check(wide)
    short = rep.border_short_joins
    assert len(short) > 0 and (short["near_shared_m"] < 3000.0).all()
    assert (short["country_a"] != short["country_b"]).all()
    text = rep.to_text()
    assert f"Border pairs joined on a short facing length ({len(short)})" in text
    assert "raise [graph] min_shared_m" in text
    assert "facing length" in short_joins_block(short)
    graph = dataclasses.replace(wide.graph, min_shared_m=3000.0)
    strict = check(dataclasses.replace(wide, graph=graph))
    assert len(strict.border_short_joins) == 0
    left = strict.border_left_out
    pairs = set(zip(left["unit_a"], left["unit_b"], strict=True))
    assert set(zip(short["unit_a"], short["unit_b"], strict=True)) <= pairs
