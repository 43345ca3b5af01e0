"""The README's Python tour runs as written on the bundled scenario."""

import pathlib
import re

README = pathlib.Path(__file__).resolve().parents[1] / "README.md"


def test_readme_python_tour_runs():
    blocks = re.findall(r"```python\n(.*?)```", README.read_text(), flags=re.S)
    assert blocks, "README has no python block"
    namespace: dict = {}
    exec(compile(blocks[0], str(README), "exec"), namespace)  # noqa: S102
    assert set(namespace["rates"].columns) >= {"cases", "population", "rate", "lower", "upper"}
    assert {"I", "p", "q", "quadrant", "label"} <= set(namespace["spots"].columns)
    assert namespace["risk"]["rank"].min() == 1


def test_readme_gives_exactly_the_two_setup_commands():
    text = README.read_text()
    setup = text.split("## Set up on a fresh machine", 1)[1].split("##", 1)[0]
    commands = re.findall(r"```\n(.*?)```", setup, flags=re.S)[0].split()
    assert commands == ["make", "demo", "make", "test"]


def test_readme_python_tour_reproduces_the_report_numbers():
    # The tour passes region.settings(...) into the API; the monthly run's own steps (the
    # numbers the report prints) must come out the same, unit by unit.
    import pandas as pd

    from marchland.pack._steps import _Context

    blocks = re.findall(r"```python\n(.*?)```", README.read_text(), flags=re.S)
    ns: dict = {}
    exec(compile(blocks[0], str(README), "exec"), ns)  # noqa: S102
    region = ns["region"]
    ctx = _Context(region.config, region, pd.Period("2026-10", freq="M"), ns["as_of"])
    report_spots = ctx.hotspots()["hotspots"]
    spots = ns["spots"]
    pd.testing.assert_series_equal(
        spots["label"].sort_index(), report_spots["label"].sort_index(), check_names=False
    )
    pd.testing.assert_series_equal(spots["q"].sort_index(), report_spots["q"].sort_index())
    report_risk = ctx.risk()["risk"]
    pd.testing.assert_series_equal(
        ns["risk"]["rank"].sort_index(), report_risk["rank"].sort_index()
    )
    pd.testing.assert_series_equal(
        ns["risk"]["probability"].sort_index(), report_risk["probability"].sort_index()
    )


def test_region_settings_names_the_known_functions():
    import pytest

    import marchland as ml
    from marchland.demo import scenario_path

    region = ml.open_region(scenario_path())
    with pytest.raises(ValueError, match="needs to be one of"):
        region.settings("hotspot")
    assert region.settings("border_risk")["horizon_weeks"] == region.config.risk.horizon_weeks
