"""The command line, with click's CliRunner: every command and every exit code.

Covered: ``--help`` (instant, carries the cautions), ``--version``, the help of every command
(a ``$ marchland`` example, help on every option); exit 0 on success, 2 on bad input (one line
``error: ...`` on stderr naming file/row/column, no traceback), 1 on an unexpected error (a
hint to rerun with -v; -v shows the traceback); ``run`` refuses to overwrite a month without
``--overwrite``; ``check``, ``backtest`` and ``demo`` on real inputs.
"""

from __future__ import annotations

import json
import subprocess
import sys

import pytest
from click.testing import CliRunner
from month_world import fake_region, write_world

from marchland import __version__, cli
from marchland.errors import InputError
from marchland.pack import monthly


@pytest.fixture
def runner():
    return CliRunner()


@pytest.fixture(scope="module")
def world(tmp_path_factory):
    return write_world(tmp_path_factory.mktemp("world"))


@pytest.fixture
def grid(monkeypatch):
    """Read the grid world's region from the grid itself (the file readers are tested apart)."""
    monkeypatch.setattr(monthly, "_open_region", fake_region)
    monkeypatch.setattr("marchland.pack.bundle._write_figures", lambda result, root, **kw: {})


def test_help_is_quick_and_carries_the_cautions(runner):
    res = runner.invoke(cli.cli, ["--help"])
    assert res.exit_code == 0
    out = " ".join(res.output.split())
    for text in (
        "not a diagnosis",
        "incomplete and delayed",
        "small numbers are unstable",
        "field epidemiologists",
    ):
        assert text in out, text
    for cmd in ("run", "check", "backtest", "demo"):
        assert cmd in out


def test_importing_the_cli_stays_light():
    code = (
        "import sys, marchland.cli; heavy = [m for m in ('geopandas', 'matplotlib', "
        "'esda', 'libpysal', 'statsmodels', 'marchland.stats.rates') if m in sys.modules]; "
        "print(heavy)"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "[]"


def test_version(runner):
    res = runner.invoke(cli.cli, ["--version"])
    assert res.exit_code == 0 and res.output.strip() == f"marchland {__version__}"


@pytest.mark.parametrize("command", ["run", "check", "backtest", "demo"])
def test_every_command_has_an_example_and_option_help(runner, command):
    res = runner.invoke(cli.cli, [command, "--help"])
    assert res.exit_code == 0
    assert f"$ marchland {command}" in res.output
    params = cli.cli.commands[command].params
    assert all(p.help for p in params if p.param_type_name == "option"), command
    assert cli.cli.commands[command].short_help


def test_bad_month_is_exit_2_with_one_line(runner, world):
    res = runner.invoke(cli.cli, ["run", str(world), "--month", "2026-13"])
    assert res.exit_code == 2
    assert res.stderr.count("\n") == 1 and res.stderr.startswith("error: ")
    assert "YYYY-MM" in res.stderr and "Traceback" not in res.stderr


def test_missing_config_is_exit_2(runner, tmp_path):
    res = runner.invoke(cli.cli, ["check", str(tmp_path / "nope.toml")])
    assert res.exit_code == 2
    assert res.stderr.startswith("error: ") and "nope.toml" in res.stderr
    assert res.stderr.count("\n") == 1


def test_unknown_option_is_exit_2(runner, world):
    res = runner.invoke(cli.cli, ["run", str(world), "--month", "2026-10", "--colour"])
    assert res.exit_code == 2 and res.stderr.startswith("error: ")
    assert res.stderr.count("\n") == 1


def test_config_error_names_the_file_and_key(runner, tmp_path):
    bad = tmp_path / "bad.toml"
    bad.write_text('[region]\ncalendar = "lunar"\n')
    res = runner.invoke(cli.cli, ["run", str(bad), "--month", "2026-10"])
    assert res.exit_code == 2
    line = res.stderr.strip()
    assert line.startswith("error: ") and "bad.toml" in line and "region.calendar" in line
    assert "\n" not in line and "Traceback" not in res.output + res.stderr


def test_input_error_midway_is_one_line_naming_file_row_column(runner, world, monkeypatch):
    def bad_row(*args, **kwargs):
        raise InputError(
            "cases must be a whole number >= 0",
            file="week12.csv",
            row=4,
            column="cases",
            value="-3",
        )

    monkeypatch.setattr(monthly, "run_month", bad_row)
    res = runner.invoke(
        cli.cli, ["run", str(world), "--month", "2026-10", "--out", str(world.parent / "o")]
    )
    assert res.exit_code == 2
    assert res.stderr == (
        "error: week12.csv, row 4, column 'cases', value '-3': cases must be a whole number >= 0\n"
    )


def test_unexpected_error_is_exit_1_with_a_hint(runner, world, monkeypatch):
    def bug(*args, **kwargs):
        raise RuntimeError("something broke")

    monkeypatch.setattr(monthly, "run_month", bug)
    args = ["run", str(world), "--month", "2026-10", "--out", str(world.parent / "o1")]
    res = runner.invoke(cli.cli, args)
    assert res.exit_code == 1
    assert "something broke" in res.stderr and "rerun with -v" in res.stderr
    assert "Traceback" not in res.stderr
    res = runner.invoke(cli.cli, ["-v", *args])
    assert res.exit_code == 1 and "Traceback" in res.stderr


def test_run_writes_the_bundle_and_refuses_to_overwrite(runner, world, grid, tmp_path):
    args = ["run", str(world), "--month", "2026-10", "--out", str(tmp_path)]
    res = runner.invoke(cli.cli, args)
    assert res.exit_code == 0, res.stderr
    assert (tmp_path / "2026-10" / "manifest.json").is_file()
    assert "written to" in res.output and "not a diagnosis" in res.output
    assert "tables/" in res.output
    res = runner.invoke(cli.cli, args)
    assert res.exit_code == 2 and "--overwrite" in res.stderr
    res = runner.invoke(cli.cli, [*args, "--overwrite", "--as-of", "2026-11-10"])
    assert res.exit_code == 0, res.stderr
    assert "as of 2026-11-10" in res.output


def test_run_summary_lists_warnings(runner, world, grid, tmp_path, monkeypatch):
    import warnings

    from marchland.errors import DataWarning

    real = monthly._Context.spread

    def noisy(self):
        warnings.warn("district X reported 3 weeks late", DataWarning, stacklevel=1)
        return real(self)

    monkeypatch.setattr(monthly._Context, "spread", noisy)
    res = runner.invoke(cli.cli, ["run", str(world), "--month", "2026-10", "--out", str(tmp_path)])
    assert res.exit_code == 0, res.stderr
    assert "1 warning" in res.output and "district X reported 3 weeks late" in res.output


def test_quiet_run_prints_little(runner, world, grid, tmp_path):
    res = runner.invoke(
        cli.cli, ["-q", "run", str(world), "--month", "2026-10", "--out", str(tmp_path)]
    )
    assert res.exit_code == 0 and res.output == ""


def test_backtest_prints_the_table(runner, world, grid):
    res = runner.invoke(cli.cli, ["backtest", str(world)])
    assert res.exit_code == 0, res.stderr
    for text in ("score", "distance", "neighbours", "auc"):
        assert text in res.output


def test_check_reads_every_source(runner, world):
    res = runner.invoke(cli.cli, ["check", str(world)])
    assert res.exit_code == 0, res.stderr
    assert "aaa-weekly" in res.output and "bbb-weekly" in res.output
    assert "2070 rows read = 2070 used + 0 rejected" in res.output


def test_check_judges_future_weeks_by_the_given_run_date(runner, world):
    # The world's weeks run to 2026-10-26: checked as on 2026-09-01, the 8 weekly rows per
    # unit after that date are future weeks; by default (today) none is.
    res = runner.invoke(cli.cli, ["check", str(world), "--run-date", "2026-09-01"])
    assert res.exit_code == 0, res.stderr
    assert "2070 rows read = 1590 used + 480 rejected" in res.output
    assert "future-week 240" in res.output
    bad = runner.invoke(cli.cli, ["check", str(world), "--run-date", "1 Sept"])
    assert bad.exit_code == 2 and "needs a date YYYY-MM-DD" in bad.output


def test_check_exits_2_when_a_source_cannot_be_used(runner, world, tmp_path):
    # Without the province file every district names a parent no boundary file has.
    text = world.read_text()
    start = text.index('[[boundaries]]\npath = "provinces.gpkg"')
    end = text.index("[[boundaries]]", start + 1)
    broken = tmp_path / "broken.toml"
    broken.write_text(text[:start] + text[end:])
    for name in ("grid.gpkg", "pop.csv", "aaa.csv", "bbb.csv", "items.csv", "depots.csv"):
        (tmp_path / name).write_bytes((world.parent / name).read_bytes())
    res = runner.invoke(cli.cli, ["check", str(broken)])
    assert res.exit_code == 2
    assert "ERR" in res.output and "parent" in res.output


def test_run_reads_the_real_files(runner, world, tmp_path, monkeypatch):
    monkeypatch.setattr("marchland.pack.bundle._write_figures", lambda result, root, **kw: {})
    res = runner.invoke(cli.cli, ["run", str(world), "--month", "2026-10", "--out", str(tmp_path)])
    assert res.exit_code == 0, res.stderr
    import json

    m = json.loads((tmp_path / "2026-10" / "manifest.json").read_text())
    assert {i["path"] for i in m["inputs"]} >= {"aaa.csv", "bbb.csv", "grid.gpkg", "provinces.gpkg"}
    assert m["steps_not_run"] == {}


def test_demo_runs_the_bundled_scenario(runner, tmp_path):
    res = runner.invoke(cli.cli, ["demo", "--out", str(tmp_path)])
    assert res.exit_code == 0, res.stderr
    bundle = tmp_path / "2026-10"
    for name in ("report.html", "atlas.pdf", "layers.gpkg", "manifest.json", "rejects.csv"):
        assert (bundle / name).is_file(), name
    assert len(list((bundle / "maps").glob("*.png"))) >= 10
    assert "written to" in res.output
    # It says what it read: every demo source, with its row count and rejects from the manifest.
    manifest = json.loads((bundle / "manifest.json").read_text())
    assert "4 report source(s)" in res.output
    for source in ("tvr-weekly", "osk-provinces", "mrw-linelist", "qln-weekly"):
        assert source in res.output
    assert "196 analysis units in 4 countries" in res.output
    assert "OSK admin-1" in res.output
    rows_in = sum(int(s["rows_in"]) for s in manifest["accounting"])
    assert f"{rows_in:,} rows" in res.output
    again = runner.invoke(cli.cli, ["demo", "--out", str(tmp_path)])
    assert again.exit_code == 2, again.output
    assert "--overwrite" in again.stderr, again.stderr


# --- hostile input and environment (issue 20) --------------------------------------------------
def test_output_path_that_is_a_file_refused_before_the_analysis(
    runner, world, tmp_path, monkeypatch
):
    def never(*a, **k):
        raise AssertionError("the analysis ran before the output was checked")

    monkeypatch.setattr(monthly, "run_month", never)
    blocker = tmp_path / "a-file"
    blocker.write_text("x")
    out = str(blocker / "bundles")  # a folder inside a file: cannot be made
    res = runner.invoke(cli.cli, ["run", str(world), "--month", "2026-03", "--out", out])
    assert res.exit_code == 2
    err = res.output.strip().splitlines()
    assert len(err) == 1 and "a-file" in err[0] and "not a folder" in err[0]


def test_check_fails_a_source_with_every_row_rejected(runner, world, tmp_path):
    import shutil

    import pandas as pd

    copy = tmp_path / "w"
    shutil.copytree(world.parent, copy)
    table = pd.read_csv(copy / "aaa.csv", dtype=str)
    table["cases"] = "1e3"  # not a plain count: every row rejected
    table.to_csv(copy / "aaa.csv", index=False)
    res = runner.invoke(cli.cli, ["check", str(copy / world.name)])
    assert res.exit_code == 2
    assert "every row rejected" in res.output and "All sources read." not in res.output


def test_run_refuses_a_source_with_every_row_rejected(runner, world, tmp_path):
    import shutil

    copy = tmp_path / "w"
    shutil.copytree(world.parent, copy)
    lines = (copy / "aaa.csv").read_text().splitlines()
    # A trailing delimiter on the header only: every data row is one field short.
    (copy / "aaa.csv").write_text("\n".join([lines[0] + ",", *lines[1:]]) + "\n")
    res = runner.invoke(
        cli.cli, ["run", str(copy / world.name), "--month", "2026-03", "--out", str(tmp_path / "o")]
    )
    assert res.exit_code == 2, res.output
    assert "every row of report source" in res.output
    assert len(res.output.strip().splitlines()) == 1


def _one_error_line(res):
    assert res.exit_code == 2, res.output
    assert res.stderr.startswith("error: ") and res.stderr.count("\n") == 1, res.stderr
    assert "Traceback" not in res.output and "unexpected" not in res.output
    return res.stderr


def _world_with(tmp_path, world, old, new):
    import shutil

    copy = tmp_path / "w"
    shutil.copytree(world.parent, copy)
    cfg = copy / world.name
    text = cfg.read_text()
    assert old in text
    cfg.write_text(text.replace(old, new))
    return copy, cfg


def test_a_boundary_path_to_a_csv_is_named_as_not_a_boundary_file(runner, world, tmp_path):
    copy, cfg = _world_with(tmp_path, world, 'path = "grid.gpkg"', 'path = "pop.csv"')
    res = runner.invoke(cli.cli, ["run", str(cfg), "--month", "2026-10", "--out", str(tmp_path)])
    err = _one_error_line(res)
    assert "pop.csv" in err
    assert "not a vector boundary file (GeoPackage, GeoJSON, Shapefile, GeoParquet)" in err


def test_a_report_path_to_an_unrelated_file_does_not_echo_its_content(runner, world, tmp_path):
    copy, cfg = _world_with(tmp_path, world, 'path = "aaa.csv"', 'path = "notes.txt"')
    (copy / "notes.txt").write_text("private first line, not a report\nmore text\n")
    res = runner.invoke(cli.cli, ["run", str(cfg), "--month", "2026-10", "--out", str(tmp_path)])
    err = _one_error_line(res)
    assert "notes.txt" in err and "does not look like this report table" in err
    assert "private" not in res.output


def test_a_misnamed_column_still_lists_the_files_header(runner, world, tmp_path):
    copy, cfg = _world_with(tmp_path, world, 'cases = "cases"', 'cases = "n_cases"')
    res = runner.invoke(cli.cli, ["run", str(cfg), "--month", "2026-10", "--out", str(tmp_path)])
    err = _one_error_line(res)
    assert "'n_cases'" in err and "'deaths'" in err  # the configured report's own header


def test_as_of_before_any_data_is_one_line_before_the_analysis(
    runner, world, grid, tmp_path, monkeypatch
):
    from marchland.pack import _steps

    monkeypatch.setattr(_steps._Context, "rates", lambda self: pytest.fail("analysis ran"))
    res = runner.invoke(
        cli.cli,
        ["run", str(world), "--month", "2026-10", "--as-of", "2020-01-01", "--out", str(tmp_path)],
    )
    err = _one_error_line(res)
    assert "as_of" in err and "2020-01-01" in err and "no report of 2026-10" in err


def test_the_console_script_ends_with_the_commands_exit_code_and_output(tmp_path):
    # main() ends the process without the interpreter's teardown: what the command printed
    # must still arrive and its exit code must be the process's.
    def run(*args: str) -> subprocess.CompletedProcess:
        code = "import sys; from marchland.cli import main; sys.argv[0] = 'marchland'; main()"
        return subprocess.run(
            [sys.executable, "-c", code, *args], capture_output=True, text=True, timeout=120
        )

    ok = run("--version")
    assert ok.returncode == 0 and ok.stdout.strip().startswith("marchland ")
    bad = run("run", "no-such.toml", "--month", "2026-10")
    assert bad.returncode == 2 and "no-such.toml" in bad.stderr
    usage = run("run", "--month", "2026-13")
    assert usage.returncode == 2 and "needs YYYY-MM" in usage.stderr
