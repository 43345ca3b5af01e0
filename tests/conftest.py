"""Fixtures shared by several test modules."""

from __future__ import annotations

import pytest
from month_world import fake_region, write_world

from marchland.pack import bundle, monthly


@pytest.fixture(scope="session")
def grid_month(tmp_path_factory):
    """The grid world's October month, run and written once (the tests only read it)."""
    root = tmp_path_factory.mktemp("grid-month")
    cfg = write_world(root)
    with pytest.MonkeyPatch.context() as mp:
        mp.setattr(monthly, "_open_region", fake_region)
        result = monthly.run_month(cfg, "2026-10")
    return result, bundle.write_month(result, root / "out")
