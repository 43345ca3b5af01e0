"""The weekly update: its page holds exactly the week's numbers; bad weeks are one clear line.

The week's totals are recomputed here from the counts as of the week's as-of date (the latest
revision received by then, per unit and week), not from the code under test.
"""

from __future__ import annotations

import re

import pandas as pd
import pytest
from click.testing import CliRunner
from month_world import fake_region, write_world

from marchland.cli import cli
from marchland.errors import InputError
from marchland.pack import _weekpage, monthly, weekly


@pytest.fixture(scope="module")
def world(tmp_path_factory):
    root = tmp_path_factory.mktemp("wk")
    cfg = write_world(root)
    with pytest.MonkeyPatch.context() as mp:
        mp.setattr(monthly, "_open_region", fake_region)
        wk = weekly.run_week(cfg, "2026-W40")
        region = fake_region(wk.config)
    return root, cfg, wk, region


def test_page_holds_exactly_the_weeks_numbers(world):
    root, _, wk, region = world
    dest = _weekpage.write_week(wk, root / "out")
    html = (dest / "week.html").read_text(encoding="utf-8")
    start = pd.Timestamp("2026-09-28")  # ISO 2026-W40 starts on this Monday
    as_of = start + pd.Timedelta(days=6 + wk.config.region.as_of_lag_days)
    c = region.counts
    c = c[pd.to_datetime(c["received"]) <= as_of]
    latest = c.sort_values("received").drop_duplicates(["unit_id", "week"], keep="last")
    week = latest[pd.to_datetime(latest["week"]) == start]
    by = week.assign(country=week["unit_id"].map(region.units["country"])).groupby("country")
    section = html.split('id="week"')[1].split("</section>")[0]
    for country, g in by:
        row = re.search(rf"\({country}\)</td>(.*?)</tr>|>{country}</td>(.*?)</tr>", section)
        assert row, country
        cells = re.findall(r"<td[^>]*>([^<]*)</td>", row.group(1) or row.group(2))
        assert int(cells[0].replace(",", "")) == int(g["cases"].sum())
        assert int(cells[2].replace(",", "")) == g["unit_id"].nunique()
    total = re.search(r">region</td>(.*?)</tr>", section).group(1)
    assert int(re.findall(r"<td[^>]*>([^<]*)</td>", total)[0].replace(",", "")) == int(
        week["cases"].sum()
    )
    assert {"week.html", "manifest.json"} <= {p.name for p in dest.iterdir()}
    assert "<script" not in html.lower() and not re.search(r"https?://", html)


@pytest.mark.parametrize(
    ("week", "message"),
    [
        ("2026-42", "needs YYYY-Www"),
        ("2026-W60", "needs YYYY-Www"),
        ("2099-W10", "after today"),
        ("2020-W10", "no report covers 2020-W10"),
    ],
)
def test_bad_weeks_are_one_line_and_exit_2(world, monkeypatch, week, message):
    root, cfg, _, _ = world
    monkeypatch.setattr(monthly, "_open_region", fake_region)
    res = CliRunner().invoke(cli, ["run", str(cfg), "--week", week, "--out", str(root / "o2")])
    assert res.exit_code == 2, res.output
    lines = [x for x in res.output.splitlines() if x.strip()]
    assert len(lines) == 1 and lines[0].startswith("error:") and message in lines[0]
    assert "Traceback" not in res.output


def test_api_refuses_a_malformed_week_with_an_input_error():
    with pytest.raises(InputError, match="YYYY-Www"):
        weekly.parse_week("W42-2026")
