"""The monthly run reads only what was known on its as-of date (invented grid world)."""

import pandas as pd
import pytest
from month_world import fake_region, write_world

from marchland import monthly


@pytest.fixture(scope="module")
def world(tmp_path_factory):
    return write_world(tmp_path_factory.mktemp("world"))


def _run(cfg_path, open_region):
    with pytest.MonkeyPatch.context() as mp:
        mp.setattr(monthly, "_open_region", open_region)
        return monthly.run_month(cfg_path, "2026-08")


def _with_late_reports(cfg):
    region = fake_region(cfg)
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
