"""Config loading: defaults, paths, and every kind of mistake rejected by name.

Covered: a minimal config with defaults; relative paths resolved against the file's folder;
globs; unknown sections and keys (nested, with key paths); wrong types; values outside the
allowed set; missing files; a loaded Config passed through; bool is not an int.
"""

from __future__ import annotations

import datetime as dt
from pathlib import Path

import pytest

from marchland.config.load import config_from_dict, load_config
from marchland.config.schema import Config
from marchland.errors import ConfigError

MINIMAL = """
[[boundaries]]
path = "b.gpkg"
id = "code"
name = "name"
country = "TVR"
level = 2
parent = "prov_code"

[[reports]]
name = "tvr"
path = "rep_*.csv"
country = "tvr"
[reports.columns]
place = "district"
week = "week_start"
cases = "cases"
received = "received"
"""


@pytest.fixture()
def folder(tmp_path: Path) -> Path:
    for f in ("b.gpkg", "rep_01.csv", "rep_02.csv", "aliases.csv", "links.csv"):
        (tmp_path / f).write_text("x")
    return tmp_path


def write(folder: Path, text: str) -> Path:
    p = folder / "scenario.toml"
    p.write_text(text)
    return p


def test_minimal_defaults(folder: Path) -> None:
    cfg = load_config(write(folder, MINIMAL))
    assert cfg.region.calendar == "iso"
    assert cfg.boundaries[0].path == (folder / "b.gpkg").resolve()
    rep = cfg.reports[0]
    assert rep.country == "TVR"
    assert [f.name for f in rep.files] == ["rep_01.csv", "rep_02.csv"]
    assert rep.columns.deaths is None
    assert cfg.graph.links is None and cfg.graph.tolerance_m == 300.0
    assert cfg.supplies.planning_attack_rate.mid == pytest.approx(0.003)
    assert cfg.output.dir == (folder / "out").resolve()
    assert load_config(cfg) is cfg
    assert isinstance(cfg, Config)


def test_full_sections(folder: Path) -> None:
    text = (
        MINIMAL
        + """
[region]
name = "x"
crs = "EPSG:3035"
calendar = "sunday"
seed = 7
[matching]
aliases = "aliases.csv"
fuzzy_score = 90
strip_words = ["district of"]
[graph]
links = "links.csv"
weighting = "binary"
[analysis]
windows_weeks = [2, 4]
[supplies]
planning_attack_rate = { low = 0.001, mid = 0.002, high = 0.01, severe_share = 0.25 }
[output]
dir = "../o"
"""
    )
    cfg = load_config(write(folder, text))
    assert cfg.region.crs == "EPSG:3035" and cfg.region.seed == 7
    assert cfg.matching.aliases == (folder / "aliases.csv").resolve()
    assert cfg.matching.fuzzy_score == 90.0
    assert cfg.graph.links.name == "links.csv"
    assert cfg.analysis.windows_weeks == (2, 4)
    assert cfg.supplies.severe_share == 0.25
    assert cfg.output.dir == (folder.parent / "o").resolve()


@pytest.mark.parametrize(
    ("extra", "key"),
    [
        ("[regoin]\nname='x'\n", "regoin"),
        ("[region]\nnmae='x'\n", "region.nmae"),
        ("[region]\nseed='x'\n", "region.seed"),
        ("[region]\nseed=true\n", "region.seed"),
        ("[region]\ncalendar='lunar'\n", "region.calendar"),
        ("[region]\ncrs='EPSG:4326'\n", "region.crs"),
        ("[region]\ncrs='not a crs'\n", "region.crs"),
        ("[graph]\ntolerance_m=-1\n", "graph.tolerance_m"),
        ("[graph]\nlinks='nowhere.csv'\n", "graph.links"),
        ("[analysis]\nwindows_weeks=[4, 'x']\n", "analysis.windows_weeks[1]"),
        ("[analysis]\nfdr=1.5\n", "analysis.fdr"),
        ("[checks]\ndeaths_over_cases='drop'\n", "checks.deaths_over_cases"),
        (
            "[[reports]]\nname='b'\npath='rep_01.csv'\ncountry='X'\ndate_format='%Q'\n",
            "reports[1].date_format",
        ),
        ("[supplies]\nplanning_attack_rate={low=0.1, mid=0.01, high=0.2}\n", "planning_attack"),
        ("[supplies]\nplanning_attack_rate={lo=0.1}\n", "supplies.planning_attack_rate.lo"),
        ("[supplies]\nreach_km=0\n", "supplies.reach_km"),
        ("[supplies]\nreach_km=inf\n", "supplies.reach_km"),
        ("[supplies]\nk=-1\n", "supplies.k"),
        ("[supplies]\nforecast_quantile=0.3\n", "supplies.forecast_quantile"),
        ("[supplies]\nforecast_quantile=1\n", "supplies.forecast_quantile"),
        ("[supplies]\nforecast_quantile='high'\n", "supplies.forecast_quantile"),
        ("[risk]\nrecent_weeks=0\n", "risk.recent_weeks"),
        ("[risk]\nreintroduction_weeks=-2\n", "risk.reintroduction_weeks"),
        ("[risk]\nreintroduction_weeks=2.5\n", "risk.reintroduction_weeks"),
        ("[risk]\npenalty=-0.5\n", "risk.penalty"),
        ("[risk]\npenalty=inf\n", "risk.penalty"),
    ],
)
def test_mistakes_named(folder: Path, extra: str, key: str) -> None:
    with pytest.raises(ConfigError) as info:
        load_config(write(folder, MINIMAL + extra))
    msg = str(info.value)
    assert key in msg
    assert "scenario.toml" in msg


def test_allowed_values_message(folder: Path) -> None:
    with pytest.raises(ConfigError) as info:
        load_config(write(folder, MINIMAL.replace('country = "tvr"', 'country = "tvr"\nshape="x"')))
    assert "'shape' needs to be one of ('weekly', 'workbook', 'linelist'). 'x' was given" in str(
        info.value
    )
    assert "reports[0].shape" in str(info.value)


def test_report_column_key_path(folder: Path) -> None:
    text = MINIMAL + (
        '\n[[reports]]\nname = "b"\npath = "rep_01.csv"\ncountry = "OSK"\n'
        '[reports.columns]\nplace = "p"\nweek = "w"\ncases = 3\nreceived = "r"\n'
    )
    with pytest.raises(ConfigError, match=r"reports\[1\]\.columns\.cases"):
        load_config(write(folder, text))
    text = text.replace("cases = 3", "cases = 'c'\ncasez = 'c'")
    with pytest.raises(ConfigError, match=r"reports\[1\]\.columns\.casez"):
        load_config(write(folder, text))


def test_missing_files(folder: Path) -> None:
    with pytest.raises(ConfigError, match=r"boundaries\[0\]\.path"):
        load_config(write(folder, MINIMAL.replace("b.gpkg", "missing.gpkg")))
    with pytest.raises(ConfigError, match=r"reports\[0\]\.path.*no file matches"):
        load_config(write(folder, MINIMAL.replace("rep_*.csv", "none_*.csv")))
    with pytest.raises(ConfigError, match="cannot read"):
        load_config(folder / "nope.toml")
    (folder / "broken.toml").write_text("[region\n")
    with pytest.raises(ConfigError, match="not valid TOML"):
        load_config(folder / "broken.toml")


def test_required_keys(folder: Path) -> None:
    with pytest.raises(ConfigError, match=r"boundaries\[0\]\.id.*required"):
        load_config(write(folder, MINIMAL.replace('id = "code"\n', "")))
    with pytest.raises(ConfigError, match="country"):
        load_config(write(folder, MINIMAL.replace('country = "TVR"\n', "")))
    with pytest.raises(ConfigError, match=r"reports\[0\]\.columns\.received"):
        load_config(write(folder, MINIMAL.replace('received = "received"\n', "")))
    with pytest.raises(ConfigError, match="at least one"):
        load_config(write(folder, "[region]\nname='x'\n"))


def test_linelist_fields_and_dates(folder: Path) -> None:
    text = (
        MINIMAL.replace('place = "district"', 'place = "district"\nonset = "o"')
        .replace('received = "received"', 'died_values = ["died", "dead"]')
        .replace(
            'country = "tvr"', 'country = "tvr"\nshape = "linelist"\nreceived_date = 2026-03-01'
        )
    )
    rep = load_config(write(folder, text)).reports[0]
    assert rep.columns.onset == "o"
    assert rep.died_values == ("died", "dead")
    assert rep.received_date == dt.date(2026, 3, 1)


def test_config_from_dict(folder: Path) -> None:
    import tomllib

    cfg = config_from_dict(tomllib.loads(MINIMAL), base_dir=folder)
    assert cfg.path is None
    assert cfg.reports[0].files[0].parent == folder.resolve()


def test_risk_options_and_depot_modes(folder: Path) -> None:
    cfg = load_config(write(folder, MINIMAL))
    assert (cfg.risk.recent_weeks, cfg.risk.reintroduction_weeks, cfg.risk.penalty) == (
        3,
        None,
        1.0,
    )
    text = MINIMAL + "[risk]\nrecent_weeks=2\nreintroduction_weeks=4\npenalty=0\n"
    cfg = load_config(write(folder, text + "[supplies]\nk=0\nreach_km=35.5\n"))
    assert (cfg.risk.recent_weeks, cfg.risk.reintroduction_weeks, cfg.risk.penalty) == (2, 4, 0.0)
    assert cfg.supplies.k == 0 and cfg.supplies.reach_km == 35.5
    off = load_config(write(folder, MINIMAL + "[risk]\nreintroduction_weeks=0\n"))
    assert off.risk.reintroduction_weeks is None


def test_severe_share_has_one_default(folder: Path) -> None:
    from marchland.config import schema
    from marchland.supplies import plan

    assert plan.DEFAULT_SEVERE_SHARE is schema.DEFAULT_SEVERE_SHARE
    assert load_config(write(folder, MINIMAL)).supplies.severe_share == schema.DEFAULT_SEVERE_SHARE


def test_forecast_quantile_default_and_value(folder: Path) -> None:
    from marchland.config import schema

    assert load_config(write(folder, MINIMAL)).supplies.forecast_quantile == 0.9
    assert schema.DEFAULT_FORECAST_QUANTILE == 0.9
    cfg = load_config(write(folder, MINIMAL + "[supplies]\nforecast_quantile=0.75\n"))
    assert cfg.supplies.forecast_quantile == 0.75


COVARIATE = '[[risk.covariates]]\nname = "flood"\nraster = "flood.tif"\n'


@pytest.mark.parametrize(
    ("extra", "key", "reason"),
    [
        ('[[risk.covariates]]\nname = "flood"\n', "risk.covariates[0]", "exactly one"),
        (COVARIATE + 'table = "t.csv"\n', "risk.covariates[0]", "exactly one"),
        (COVARIATE.replace("flood.tif", "none.tif"), "risk.covariates[0].raster", "not found"),
        (COVARIATE + "colour = 'x'\n", "risk.covariates[0].colour", "unknown key"),
        (COVARIATE + "id_column = 'code'\n", "risk.covariates[0].id_column", "table"),
        (COVARIATE.replace('"flood"', '"Flood share"'), "risk.covariates[0].name", "lower-case"),
        (COVARIATE.replace('"flood"', '"growth"'), "risk.covariates[0].name", "built-in"),
        (COVARIATE.replace('name = "flood"\n', ""), "risk.covariates[0].name", "required"),
        (COVARIATE + COVARIATE, "risk.covariates", "unique"),
        ("[risk]\ncovariates = 'flood.tif'\n", "risk.covariates", "array of tables"),
    ],
)
def test_covariate_mistakes_named(folder: Path, extra: str, key: str, reason: str) -> None:
    (folder / "flood.tif").write_text("x")
    (folder / "t.csv").write_text("x")
    with pytest.raises(ConfigError) as info:
        load_config(write(folder, MINIMAL + extra))
    msg = str(info.value)
    assert f"{key}:" in msg and reason in msg and "scenario.toml" in msg


def test_covariates_read_in_order(folder: Path) -> None:
    (folder / "flood.tif").write_text("x")
    (folder / "water.csv").write_text("x")
    text = (
        MINIMAL
        + COVARIATE
        + (
            '[[risk.covariates]]\nname = "water_access"\ntable = "water.csv"\n'
            'id_column = "code"\nvalue_column = "share"\n'
        )
    )
    cov = load_config(write(folder, text)).risk.covariates
    assert [c.name for c in cov] == ["flood", "water_access"]
    assert cov[0].raster == (folder / "flood.tif").resolve() and cov[0].table is None
    assert (cov[1].table.name, cov[1].id_column, cov[1].value_column) == (
        "water.csv",
        "code",
        "share",
    )
    assert load_config(write(folder, MINIMAL)).risk.covariates == ()


def test_country_names_one_per_code(folder: Path) -> None:
    named = MINIMAL.replace('country = "TVR"\n', 'country = " tvr "\ncountry_name = "Tavrenne"\n')
    cfg = load_config(write(folder, named))
    assert cfg.boundaries[0].country == "TVR"
    assert cfg.country_names == {"TVR": "Tavrenne"}
    assert cfg.country_label("TVR") == "Tavrenne (TVR)" and cfg.country_label("OSK") == "OSK"
    assert load_config(write(folder, MINIMAL)).country_names == {}
    second = (
        '\n[[boundaries]]\npath = "b.gpkg"\nid = "code"\nname = "name"\ncountry = "TVR"\n'
        'level = 1\ncountry_name = "{}"\n'
    )
    # The same name again is fine; a second name for the code is refused by key path.
    same = load_config(write(folder, named + second.format("Tavrenne")))
    assert same.country_names == {"TVR": "Tavrenne"}
    with pytest.raises(ConfigError, match=r"boundaries\[1\]\.country_name: country TVR is named"):
        load_config(write(folder, named + second.format("Tavrene")))
    by_column = MINIMAL.replace(
        'country = "TVR"\n', 'country_column = "iso"\ncountry_name = "Tavrenne"\n'
    )
    with pytest.raises(ConfigError, match=r"boundaries\[0\]\.country_name: needs a fixed"):
        load_config(write(folder, by_column))
