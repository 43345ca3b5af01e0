"""The monthly run reads only what was known on its as-of date (invented grid world)."""

import pandas as pd
import pytest
from month_world import fake_region, write_world

from marchland.pack import monthly


@pytest.fixture(scope="module")
def world(tmp_path_factory):
    return write_world(tmp_path_factory.mktemp("world"))


def _run(cfg_path, open_region):
    with pytest.MonkeyPatch.context() as mp:
        mp.setattr(monthly, "_open_region", open_region)
        return monthly.run_month(cfg_path, "2026-08")


def _with_late_reports(cfg, today=None):
    region = fake_region(cfg, today)
    late = region.counts.copy()
    # Corrections that arrive long after the August run's as-of date: every count goes up, so
    # units that had reported zeros get first cases (the backtest's outcomes would change).
    late["received"] = pd.Timestamp("2026-12-15")
    late["cases"] = late["cases"] * 3 + 2
    region.counts = pd.concat([region.counts, late], ignore_index=True)
    return region


def test_reports_received_after_as_of_change_nothing_in_the_month(world):
    plain = _run(world, fake_region)
    leaky = _run(world, _with_late_reports)
    assert plain.as_of < pd.Timestamp("2026-12-15")
    for name in ("backtest", "risk", "rates", "hotspots"):
        a, b = getattr(plain, name), getattr(leaky, name)
        assert a is not None, name
        pd.testing.assert_frame_equal(a, b, obj=name)


def test_config_covariates_reach_the_score_and_the_backtest(world, tmp_path):
    # A table covariate on the grid's districts (the column number, east-west), named in the
    # config: the risk table gets its part and value, and the backtest is given the same table.
    from month_world import _ids

    from marchland.risk import score as risk_module

    (tmp_path / "east.csv").write_text(
        "code,col\n" + "".join(f"{uid},{i}\n" for i, _j, _c, _p, uid in _ids())
    )
    text = world.read_text().replace(
        "[risk]\n",
        f'[[risk.covariates]]\nname = "east"\ntable = "{(tmp_path / "east.csv").as_posix()}"\n'
        'id_column = "code"\nvalue_column = "col"\n\n[risk]\n',
    )
    cfg_path = world.parent / "world_cov.toml"
    cfg_path.write_text(text)
    seen = []
    original = risk_module.run_backtest

    def spy(*args, **kw):
        seen.append(kw.get("covariates"))
        return original(*args, **kw)

    with pytest.MonkeyPatch.context() as mp:
        mp.setattr(risk_module, "run_backtest", spy)
        res = _run(cfg_path, fake_region)
    risk = res.risk
    assert "part_east" in risk.columns and "east" in risk.columns
    col = {uid: i for i, _j, _c, _p, uid in _ids()}
    assert risk["east"].to_dict() == {u: float(col[u]) for u in risk.index}
    assert "east" in risk.attrs["coefficients"]
    assert len(seen) == 1 and seen[0] is not None
    assert seen[0]["east"].to_dict() == {u: float(v) for u, v in col.items()}


def test_a_bad_covariate_table_stops_the_run(world, tmp_path):
    from marchland.errors import InputError

    (tmp_path / "bad.csv").write_text("code,col\nAAA-01-0000,1\nZZZ-9,2\n")
    text = world.read_text().replace(
        "[risk]\n",
        f'[[risk.covariates]]\nname = "east"\ntable = "{(tmp_path / "bad.csv").as_posix()}"\n'
        'id_column = "code"\nvalue_column = "col"\n\n[risk]\n',
    )
    cfg_path = world.parent / "world_bad_cov.toml"
    cfg_path.write_text(text)
    with pytest.raises(InputError, match="in no boundary file") as info:
        _run(cfg_path, fake_region)
    assert (info.value.row, info.value.column) == (2, "code")
