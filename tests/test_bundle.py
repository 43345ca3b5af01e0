"""The monthly bundle: contents, atomic replacement, determinism, report escaping.

Covered: every file and layer of the bundle is written; the manifest's sha256 of each input
matches hashlib on the file; a failure injected in the last writing step leaves the previous
bundle byte for byte as it was and no partial folder behind; an existing month is never
replaced without ``overwrite``; a rerun with the same inputs and as-of date gives byte-identical
files except those the manifest lists as carrying a run-time value; a replacing run killed
between its two renames is undone by the next run;
every string from the inputs is escaped in report.html; a missing analysis module shows as
"not computed", never as a faked result. Runs on the invented grid world of ``month_world``
(the region is built from the grid instead of read from files, so this stays quick).
"""

from __future__ import annotations

import hashlib
import json
import os
import re
import time

import geopandas as gpd
import pandas as pd
import pyogrio
import pytest
from month_world import fake_region, write_world

from marchland.errors import InputError
from marchland.pack import _folder, _steps, bundle, monthly


@pytest.fixture(scope="module")
def world(tmp_path_factory):
    return write_world(tmp_path_factory.mktemp("world"))


def _run(cfg_path):
    with pytest.MonkeyPatch.context() as mp:
        mp.setattr(monthly, "_open_region", fake_region)
        return monthly.run_month(cfg_path, "2026-10")


@pytest.fixture(scope="module")
def result(world):
    return _run(world)


@pytest.fixture(scope="module")
def written(result, tmp_path_factory):
    out = tmp_path_factory.mktemp("out")
    return bundle.write_month(result, out)


@pytest.fixture
def no_figures(monkeypatch):
    """Atomicity tests need the writing steps, not the drawing: skip the maps for speed."""
    monkeypatch.setattr(bundle, "_write_figures", lambda result, root, **kw: {})


def _snapshot(folder):
    return {
        p.relative_to(folder).as_posix(): hashlib.sha256(p.read_bytes()).hexdigest()
        for p in sorted(folder.rglob("*"))
        if p.is_file()
    }


def test_bundle_has_every_part(written, result):
    assert written.name == "2026-10"
    for name in ("layers.gpkg", "atlas.pdf", "report.html", "rejects.csv", "manifest.json"):
        assert (written / name).is_file(), name
    tables = {p.stem for p in (written / "tables").glob("*.csv")}
    assert {
        "rates",
        "rates_by_area",
        "rates_history",
        "weekly",
        "hotspots",
        "global_moran",
        "spread",
        "fronts",
        "velocity",
        "introductions",
        "risk",
        "backtest",
        "priorities",
        "depots",
        "completeness",
        "edges",
        "units",
    } <= tables
    pngs = {p.stem for p in (written / "maps").glob("*.png")}
    assert {
        "attack_rate",
        "attack_rate_months",
        "hotspots",
        "arrival",
        "border_risk",
        "priorities",
        "epi_region",
        "epi_countries",
        "epi_provinces_AAA",
        "epi_provinces_BBB",
    } <= pngs
    # A cover page, then one atlas page per figure (counted in the PDF's page objects).
    pages = len(re.findall(rb"/Type\s*/Page\b(?!s)", (written / "atlas.pdf").read_bytes()))
    assert pages == 1 + len(list((written / "maps").glob("*.png")))
    layers = set(pyogrio.list_layers(written / "layers.gpkg")[:, 0])
    assert {
        "units",
        "rates",
        "hotspots",
        "spread",
        "fronts",
        "risk",
        "priorities",
        "depots",
    } <= layers
    rates = pyogrio.read_dataframe(written / "layers.gpkg", layer="rates")
    assert len(rates) == len(result.units)
    assert {"unit_id", "name", "population", "month_rate", "month_rate_seb"} <= set(rates.columns)
    risk = pyogrio.read_dataframe(written / "layers.gpkg", layer="risk")
    assert risk["unit_id"].tolist() == result.risk.index.tolist()  # in rank order
    edges = pyogrio.read_dataframe(written / "layers.gpkg", layer="edges")
    assert "index" not in edges.columns and len(edges) > 0
    # Every GeoPackage layer also as GeoParquet, with the same rows, columns and geometry.
    assert {p.stem for p in (written / "layers").glob("*.parquet")} == layers
    for name in ("rates", "risk", "edges"):
        gpkg = pyogrio.read_dataframe(written / "layers.gpkg", layer=name)
        pq = gpd.read_parquet(written / "layers" / f"{name}.parquet")
        assert list(pq.columns) == list(gpkg.columns) and pq.crs == gpkg.crs
        assert pq.geometry.geom_equals_exact(gpkg.geometry, tolerance=1e-6).all()


def test_step_timings_add_up_to_the_run(world, tmp_path):
    # Every stretch of run_month + write_month is inside one timed step: what is left over is
    # bookkeeping between steps (a loose 25% bound: a shared machine stalls at random).
    t0 = time.perf_counter()
    res = _run(world)
    dest = bundle.write_month(res, tmp_path)
    wall = time.perf_counter() - t0
    m = json.loads((dest / "manifest.json").read_text())
    total = sum(m["timings_s"].values())
    assert 0.75 * wall <= total <= wall
    # Steps run in a forked copy alongside others give their own seconds apart (the sum above
    # counts only the wait for them); with one CPU they ran in turn and still say so.
    assert {"forecast", "bundle: tables", "bundle: layers"} <= set(m["alongside_s"])
    assert all(v >= 0 for v in m["alongside_s"].values())


def test_rejects_csv_holds_every_reject(written, result):
    rj = pd.read_csv(written / "rejects.csv")
    assert len(rj) == len(result.rejects)
    assert list(rj.columns[:5]) == ["source", "row", "column", "value", "reason"]


def test_manifest_records_inputs_versions_timings(written, result):
    m = json.loads((written / "manifest.json").read_text())
    assert m["month"] == "2026-10" and m["seed"] == result.seed == 11
    assert m["as_of"] == "2026-11-03"
    base = result.config.base_dir
    assert m["inputs"], "inputs listed"
    for item in m["inputs"]:
        path = base / item["path"]
        assert item["sha256"] == hashlib.sha256(path.read_bytes()).hexdigest()
    for step in monthly.STEPS:
        assert step in m["timings_s"], step
    assert {"bundle: maps", "bundle: report", "bundle: manifest"} <= set(m["timings_s"])
    assert {"numpy", "pandas", "geopandas", "matplotlib", "python"} <= set(m["versions"])
    assert m["config"]["settings"]["analysis"]["permutations"] == 99
    assert m["accounting"][0]["rows_in"] == m["accounting"][0]["counted"] + 2
    listed = {f["path"] for f in m["files"]}
    assert "report.html" in listed and "manifest.json" not in listed


def test_existing_month_is_not_overwritten_without_overwrite(written, result):
    before = _snapshot(written)
    with pytest.raises(InputError, match="overwrite"):
        bundle.write_month(result, written.parent)
    assert _snapshot(written) == before


@pytest.mark.parametrize("step", ["_write_report", "_write_manifest"])
def test_failure_in_a_late_step_leaves_previous_bundle_intact(
    no_figures, result, tmp_path, monkeypatch, step
):
    first = bundle.write_month(result, tmp_path)
    before = _snapshot(first)

    def boom(*args, **kwargs):
        raise RuntimeError("disk full (injected)")

    monkeypatch.setattr(bundle, step, boom)
    with pytest.raises(RuntimeError, match="injected"):
        bundle.write_month(result, tmp_path, overwrite=True)
    assert _snapshot(first) == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["2026-10"], "no partial folder left"


def test_failure_on_first_write_leaves_nothing(no_figures, result, tmp_path, monkeypatch):
    monkeypatch.setattr(bundle, "_write_manifest", lambda *a: 1 / 0)
    with pytest.raises(ZeroDivisionError):
        bundle.write_month(result, tmp_path)
    assert list(tmp_path.iterdir()) == []


def test_overwrite_replaces_only_when_complete(no_figures, result, tmp_path):
    first = bundle.write_month(result, tmp_path)
    (first / "stale.txt").write_text("from an older run")
    again = bundle.write_month(result, tmp_path, overwrite=True)
    assert again == first and not (again / "stale.txt").exists()
    assert (again / "manifest.json").is_file()
    assert sorted(p.name for p in tmp_path.iterdir()) == ["2026-10"]


def test_partial_folder_of_a_dead_run_is_cleared(no_figures, result, tmp_path):
    # A process killed mid-write leaves its hidden partial folder; the pid no longer runs.
    dead = tmp_path / ".2026-10.partial-999999999-abc"
    dead.mkdir()
    (dead / "half.csv").write_text("x")
    bundle.write_month(result, tmp_path)
    assert not dead.exists()


def _pack(text):
    return lambda folder: (folder / "a.txt").write_text(text)


def test_replacing_a_pack_is_one_atomic_swap_on_linux(tmp_path, monkeypatch):
    import sys

    if sys.platform.startswith("linux"):
        assert _folder._renameat2() is not None  # glibc 2.28+; the CI machines have it
    bundle.replace_atomically(tmp_path, "2026-10", _pack("old"))

    def no_rename(*a, **k):
        raise AssertionError("two-rename fallback used")

    if _folder._renameat2() is not None:
        # With the exchange there is no rename at all, so no moment without a pack.
        monkeypatch.setattr(os, "rename", no_rename)
    dest = bundle.replace_atomically(tmp_path, "2026-10", _pack("new"), overwrite=True)
    assert (dest / "a.txt").read_text() == "new"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["2026-10"]


def test_a_kill_between_the_two_renames_is_undone_by_the_next_run(tmp_path):
    import subprocess
    import sys

    from marchland.errors import DataWarning

    bundle.replace_atomically(tmp_path, "2026-10", _pack("old"))
    # Where there is no atomic exchange: the process dies (no clean-up possible) right after
    # moving the old pack aside, before the new one is in place.
    script = f"""
import os
from marchland.pack import _folder, bundle
_folder._exchange = lambda a, b: False
_folder._between_renames = lambda: os._exit(9)
bundle.replace_atomically({str(tmp_path)!r}, "2026-10",
                          lambda d: (d / "a.txt").write_text("new"), overwrite=True)
"""
    child = subprocess.run([sys.executable, "-c", script], capture_output=True, timeout=120)
    assert child.returncode == 9, child.stderr
    assert not (tmp_path / "2026-10").exists()
    hidden = sorted(p.name for p in tmp_path.iterdir())
    assert len(hidden) == 2 and hidden[0].startswith(".2026-10.partial-")  # the new pack
    assert hidden[1].startswith(".2026-10.replaced-")  # the old one
    # The next run (here its first check) puts the old pack back and says so; without
    # overwrite it then refuses as for any existing month.
    with (
        pytest.warns(DataWarning, match="restored the previous pack"),
        pytest.raises(InputError, match="exists already"),
    ):
        _folder.check_destination(tmp_path, "2026-10", overwrite=False)
    assert (tmp_path / "2026-10" / "a.txt").read_text() == "old"
    assert not (tmp_path / hidden[1]).exists()
    dest = bundle.replace_atomically(tmp_path, "2026-10", _pack("newer"), overwrite=True)
    assert (dest / "a.txt").read_text() == "newer"
    assert [p.name for p in tmp_path.iterdir()] == ["2026-10"]


def test_a_kill_after_the_swap_leaves_the_new_pack_and_the_next_run_clears_the_old(tmp_path):
    import subprocess
    import sys

    bundle.replace_atomically(tmp_path, "2026-10", _pack("old"))
    script = f"""
import os, shutil
from marchland.pack import _folder, bundle
shutil.rmtree = lambda *a, **k: os._exit(9)  # dies while removing the swapped-out old pack
bundle.replace_atomically({str(tmp_path)!r}, "2026-10",
                          lambda d: (d / "a.txt").write_text("new"), overwrite=True)
"""
    child = subprocess.run([sys.executable, "-c", script], capture_output=True, timeout=120)
    assert child.returncode == 9, child.stderr
    assert (tmp_path / "2026-10" / "a.txt").read_text() == "new"
    bundle.replace_atomically(tmp_path, "2026-10", _pack("newer"), overwrite=True)
    assert [p.name for p in tmp_path.iterdir()] == ["2026-10"]


def test_a_rerun_gives_byte_identical_files_but_those_the_manifest_lists(world, written, tmp_path):
    # A second run and write of the same month, later by the clock: every file (tables,
    # GeoPackage, GeoParquet, maps, atlas, report) has the same bytes, except the files the
    # manifest itself names as carrying a value of the moment (its own timings).
    time.sleep(1.1)  # the GeoPackage's time stamps have second resolution
    again = bundle.write_month(_run(world), tmp_path)
    a, b = _snapshot(written), _snapshot(again)
    varies = json.loads((again / "manifest.json").read_text())["varies_between_runs"]
    assert set(varies) == {"manifest.json"} and all(varies.values())
    assert sorted(a) == sorted(b) and len(a) > 40
    differ = sorted(k for k in a if a[k] != b[k])
    assert differ == ["manifest.json"], differ
    # The manifest's record of the files agrees too.
    fa = json.loads((written / "manifest.json").read_text())["files"]
    fb = json.loads((again / "manifest.json").read_text())["files"]
    assert fa == fb


def test_future_weeks_are_judged_against_the_runs_date_not_the_clock(world, monkeypatch):
    seen = []

    def spy(cfg, today=None):
        seen.append(today)
        raise InputError("stop here", file="spy.csv")

    monkeypatch.setattr(monthly, "_open_region", spy)
    for kw in ({}, {"as_of": "2026-12-01"}, {"as_of": "2026-10-20"}, {"run_date": "2027-02-03"}):
        with pytest.raises(InputError, match="stop here"):
            monthly.run_month(world, "2026-10", **kw)
    # The month's as-of date (end + as_of_lag_days = 3), a later as-of date, never earlier than
    # the month's own, or the explicit run date.
    assert [f"{d:%Y-%m-%d}" for d in seen] == [
        "2026-11-03",
        "2026-12-01",
        "2026-11-03",
        "2027-02-03",
    ]


def test_manifest_records_the_run_date(written, result):
    m = json.loads((written / "manifest.json").read_text())
    assert m["run_date"] == f"{result.run_date:%Y-%m-%d}" == "2026-11-03"


def test_as_of_before_any_report_of_the_month_is_refused_before_the_analysis(world, monkeypatch):
    monkeypatch.setattr(monthly, "_open_region", fake_region)
    monkeypatch.setattr(_steps._Context, "rates", lambda self: pytest.fail("analysis ran"))
    with pytest.raises(InputError, match="no report of 2026-10 had been received by the as-of"):
        monthly.run_month(world, "2026-10", as_of="2020-01-01")


def test_report_escapes_input_strings(written):
    html = (written / "report.html").read_text()
    assert "&lt;script&gt;alert(&#x27;x&#x27;)&lt;/script&gt;" in html
    # The map's data block and script are the only script elements (test_report_browser).
    assert html.lower().count("<script") == 2
    assert "<script>alert" not in html.lower()


def test_report_is_self_contained(written):
    html = (written / "report.html").read_text()
    assert not re.search(r"https?://", html)
    srcs = re.findall(r'<img[^>]*\ssrc="([^"]*)"', html)
    assert srcs and all(s.startswith("data:image/png;base64,") for s in srcs)
    assert not re.search(r"<(link|iframe|object|embed)\b", html)
    assert not re.search(r"url\((?!#)", html)  # only in-page references (the map's hatching)
    assert html.count("<img") == len(list((written / "maps").glob("*.png")))


def test_report_carries_cautions_headline_and_backtest(written, result):
    html = (written / "report.html").read_text()
    for text in (
        "Decision support, not a diagnosis",
        "incomplete and delayed",
        "Small numbers are unstable",
        "field epidemiologists",
        "Example planning values, not guidance",
        "How far to trust it",
        "global Moran",
        "expected newly affected units",
    ):
        assert text in html, text
    cases = int(result.headline["cases"])
    assert f"{cases:,}" in html


def test_missing_module_is_shown_absent_not_faked(world, tmp_path, monkeypatch):
    real = _steps._need

    def no_hotspots(module, *names):
        if module == "stats.autocorrelation":
            raise monthly._Absent("module marchland.stats.autocorrelation is not available yet")
        return real(module, *names)

    monkeypatch.setattr(_steps, "_need", no_hotspots)
    monkeypatch.setattr(monthly, "_open_region", fake_region)
    res = monthly.run_month(world, "2026-10")
    assert res.hotspots is None and res.global_moran is None
    assert "hotspots" in res.absent and res.headline["global_moran_i"] is None
    out = bundle.write_month(res, tmp_path)
    html = (out / "report.html").read_text()
    assert "Not computed: hotspots" in html
    assert not (out / "maps" / "hotspots.png").exists()
    assert not (out / "tables" / "hotspots.csv").exists()


def test_month_must_be_yyyy_mm(world, monkeypatch):
    monkeypatch.setattr(monthly, "_open_region", fake_region)
    with pytest.raises(InputError, match="YYYY-MM"):
        monthly.run_month(world, "October")


def test_weeks_belong_to_the_month_of_their_fourth_day(result):
    weeks = result.month_weeks
    # 2026-09-28 (Mon) has its Thursday on 1 October; 2026-10-26 has it on 29 October.
    assert weeks[0] == pd.Timestamp("2026-09-28") and weeks[-1] == pd.Timestamp("2026-10-26")
    assert os.path.basename(str(result.config.path)) == "world.toml"


def test_month_without_reports_is_refused(world, monkeypatch):
    monkeypatch.setattr(monthly, "_open_region", fake_region)
    with pytest.raises(InputError, match="no report covers 2025-01; the reports run from"):
        monthly.run_month(world, "2025-01")


def test_a_statistic_the_month_cannot_carry_is_reported_not_fatal(world, monkeypatch):
    def flat(self):
        raise InputError("global Moran's I needs at least 4 units with differing values")

    monkeypatch.setattr(monthly, "_open_region", fake_region)
    monkeypatch.setattr(monthly._Context, "hotspots", flat)
    res = monthly.run_month(world, "2026-10")
    assert res.absent["hotspots"].startswith("not computable on this month's data: global")
    assert res.rates is not None and res.risk is not None and res.priorities is not None


def test_a_bad_input_file_still_stops_the_run(world, monkeypatch):
    def bad(cfg, today=None):
        raise InputError("cases must be a whole number", file="aaa.csv", row=3, column="cases")

    monkeypatch.setattr(monthly, "_open_region", bad)
    with pytest.raises(InputError, match="aaa.csv, row 3"):
        monthly.run_month(world, "2026-10")


def test_headline_agrees_with_the_weekly_counts(result):
    # Recomputed here from the weekly table, by the rule "a week belongs to the month of its
    # Thursday", independently of the rates module.
    w = result.weekly
    thursday = w["week"] + pd.Timedelta(days=3)
    october = w[(thursday.dt.year == 2026) & (thursday.dt.month == 10)]
    h = result.headline
    assert h["cases"] == october["cases"].sum()
    assert h["deaths"] == october["deaths"].sum()
    reporting = result.units.loc[october["unit_id"].unique(), "population"].sum()
    assert h["rate"] == pytest.approx(october["cases"].sum() / reporting * 1e5)
    first = result.fronts["first_week"]
    assert h["newly_affected"] == int(((first + pd.Timedelta(days=3)).dt.month == 10).sum())
    assert h["expected_new_units"] == pytest.approx(result.risk["probability"].sum())


def test_a_run_killed_midway_leaves_the_previous_bundle(world, result, tmp_path, no_figures):
    import signal
    import subprocess
    import sys
    import time

    first = bundle.write_month(result, tmp_path)
    before = _snapshot(first)
    # A child process writes the same month again and is killed (SIGKILL, no clean-up
    # possible) while its report step hangs, i.e. midway through the bundle.
    script = f"""
import sys, time
sys.path.insert(0, {str(os.path.dirname(__file__))!r})
from month_world import fake_region
from marchland.pack import _folder, bundle
from marchland.pack import monthly
monthly._open_region = fake_region
bundle._write_figures = lambda result, root: {{}}
bundle._write_report = lambda *a: time.sleep(120)
res = monthly.run_month({str(world)!r}, "2026-10")
bundle.write_month(res, {str(tmp_path)!r}, overwrite=True)
"""
    child = subprocess.Popen([sys.executable, "-c", script])
    try:
        deadline = time.monotonic() + 120
        partial = []
        while time.monotonic() < deadline and child.poll() is None:
            partial = [p for p in tmp_path.glob(".2026-10.partial-*") if (p / "tables").is_dir()]
            if partial and list((partial[0] / "tables").glob("*.csv")):
                break
            time.sleep(0.2)
        assert partial, "the child never got midway"
        child.send_signal(signal.SIGKILL)
        child.wait(timeout=30)
    finally:
        if child.poll() is None:
            child.kill()
    assert _snapshot(first) == before
    assert partial[0].exists()  # what a killed process leaves behind ...
    bundle.write_month(result, tmp_path, overwrite=True)
    assert not partial[0].exists()  # ... is cleared by the next run
    assert sorted(p.name for p in tmp_path.iterdir()) == ["2026-10"]


def test_cumulative_stops_at_the_month_and_a_late_as_of_is_flagged(world, monkeypatch):
    monkeypatch.setattr(monthly, "_open_region", fake_region)
    res = monthly.run_month(world, "2026-09", as_of="2026-10-20")
    weekly = res.weekly
    assert weekly["week"].max() == pd.Timestamp("2026-09-28") - pd.Timedelta(days=7)
    by_unit = weekly.groupby("unit_id")["cases"].sum()
    got = res.rates["cumulative_cases"].astype(float)
    assert got.to_dict() == pytest.approx(by_unit.reindex(got.index).astype(float).to_dict())
    assert any("more than a week after 2026-09 ended" in w for w in res.warnings)


def test_supply_totals_per_depot_catchment_add_up_to_the_country_totals(result, written):
    by_depot, by_country = result.supply_totals_by_depot, result.supply_totals
    assert by_depot is not None and by_country is not None
    assert (written / "tables" / "supply_totals_by_depot.csv").is_file()
    # Every candidate sits in exactly one catchment and one country: the sums must agree.
    for col in ("units", "population", "planning_cases", "expected_cases"):
        assert by_depot[col].sum() == pytest.approx(by_country[col].sum()), col
    assigned = result.depot_assignment["depot"].value_counts()
    got = by_depot["units"].drop("(none)", errors="ignore")
    assert got.sort_index().astype(int).tolist() == assigned.sort_index().tolist()


def test_country_names_reach_maps_and_country_tables(world, monkeypatch):
    # The grid world's boundary file carries both countries (country_column), which cannot
    # take a country_name; give the names through two fixed-code [[boundaries]] entries.
    import dataclasses

    from marchland.config.load import load_config
    from marchland.config.schema import BoundarySource
    from marchland.figures import maps
    from marchland.pack import _figures, _report

    cfg = load_config(world)
    extra = tuple(
        BoundarySource(path=cfg.boundaries[1].path, id="code", name="name", level=2, country=c,
                       country_name=n)
        for c, n in (("AAA", "Aland"), ("BBB", "Bellmark"))
    )  # fmt: skip
    cfg = dataclasses.replace(cfg, boundaries=cfg.boundaries + extra)
    monkeypatch.setattr(monthly, "_open_region", fake_region)
    res = monthly.run_month(cfg, "2026-10")
    countries = res.rates_by_area[res.rates_by_area["level"] == "country"]
    assert set(countries["name"]) == {"Aland (AAA)", "Bellmark (BBB)"}
    assert set(countries["group"]) == {"AAA", "BBB"}
    html = _report.render_report(res, {})
    for table in ("Countries: the month", "Speed of spread by country", "Totals per country"):
        part = html[html.index(table) : html.index("</table>", html.index(table))]
        shown = {c for c in ("Aland (AAA)", "Bellmark (BBB)") if c in part}
        assert shown and ">AAA<" not in part and ">BBB<" not in part, table
    # (The grid region has no completeness table; the demo's is labelled the same way.)
    seen = {}
    real = maps.base_map

    def spy(units, **kw):
        seen.update(kw)
        return real(units, **kw)

    monkeypatch.setattr(maps, "base_map", spy)
    figures = _figures.draw_figures(res)
    name, fig, _caption = next(figures)
    figures.close()
    import matplotlib.pyplot as plt

    plt.close(fig)
    assert seen["country_names"] == {"AAA": "Aland", "BBB": "Bellmark"}
    texts = {t.get_text() for ax in fig.axes for t in ax.texts}
    assert {"Aland", "Bellmark"} <= texts


def test_units_layer_names_boundary_files_relative_to_the_config(tmp_path):
    # The units layer carries each unit's boundary file as a path relative to the config's
    # folder (no machine paths in a shared bundle); a unit without one keeps it missing.
    from types import SimpleNamespace

    base = tmp_path / "scenario"
    src = [str(base / "boundaries" / "a.gpkg"), None, str(tmp_path / "elsewhere" / "b.gpkg")]
    units = pd.DataFrame({"source": pd.array(src, dtype="str")}, index=["u1", "u2", "u3"])
    result = SimpleNamespace(config=SimpleNamespace(base_dir=base))
    out = bundle._portable(units, result)["source"]
    assert out.dtype == units["source"].dtype
    assert out.iloc[0] == os.path.join("boundaries", "a.gpkg")
    assert out.iloc[2] == os.path.join("..", "elsewhere", "b.gpkg")
    assert pd.isna(out.iloc[1])


def test_flat_joins_list_cells_and_leaves_text_alone():
    import numpy as np

    df = pd.DataFrame(
        {
            "ids": [["a", "b"], None, ("c",), np.array([1, 2]), {"d"}],
            "mixed": [["x"], 2, "y", None, 3.5],
            "text": ["p", None, "q", "r", "s"],
        }
    )
    out = bundle._flat(df)
    assert out["ids"].tolist()[:1] + out["ids"].tolist()[2:] == ["a; b", "c", "1; 2", "d"]
    assert pd.isna(out["ids"].iloc[1])
    assert out["mixed"].tolist()[:3] == ["x", 2, "y"]
    pd.testing.assert_series_equal(out["text"], df["text"])
