"""Chain-ladder factors and ultimates against the chainladder package.

Source: the Taylor & Ashe (1983) general-insurance triangle, shipped inside chainladder as
``load_sample("genins")`` (no download), and ``chainladder.Chainladder`` / ``Development``
(volume-weighted factors, Mack 1993). Each accident period becomes a week, each development
period a received date one week later, and the cumulative value the count known at that delay.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

cl = pytest.importorskip("chainladder", reason="chainladder is in the test extra")

from marchland.delays import nowcast, reporting_triangle  # noqa: E402
from marchland.delays._pattern import factors, to_final  # noqa: E402

START = pd.Timestamp("2024-01-01")  # a Monday
# chainladder's sample loader parses integer years with a format, which pandas deprecates; a
# third-party warning we cannot fix, matched narrowly.
pytestmark = pytest.mark.filterwarnings(
    "ignore:Parsing integer or float values with a format:Warning"
)


def _genins_counts():
    tri = cl.load_sample("genins")
    grid = np.asarray(tri.values)[0, 0]  # accident x development, cumulative, NaN unknown
    n = grid.shape[0]
    i, j = np.nonzero(~np.isnan(grid))
    week = START + pd.to_timedelta(7 * i, unit="D")
    # Delay j is the snapshot on the week's last day + 7 j days (see the delay convention).
    received = week + pd.to_timedelta(6 + 7 * j, unit="D")
    counts = pd.DataFrame(
        {
            "unit_id": "TVR-01-01",
            "week": week,
            "cases": pd.array(np.round(grid[i, j]).astype(int), dtype="Int64"),
            "received": received,
        }
    )
    as_of = START + pd.Timedelta(days=7 * (n - 1) + 6)
    return tri, counts, as_of, n


def test_triangle_matches_genins():
    tri, counts, as_of, n = _genins_counts()
    ours = reporting_triangle(counts, as_of=as_of, max_delay_weeks=n - 1).to_numpy()
    ref = np.asarray(tri.values)[0, 0]
    np.testing.assert_allclose(ours, ref, rtol=1e-12)


def test_factors_and_ultimates_match_chainladder():
    tri, counts, as_of, n = _genins_counts()
    ref_ldf = np.asarray(cl.Development().fit(tri).ldf_.values)[0, 0, 0]
    ref_ult = np.asarray(cl.Chainladder().fit(tri).ultimate_.values)[0, 0, :, 0]
    C = reporting_triangle(counts, as_of=as_of, max_delay_weeks=n - 1).to_numpy()[None]
    age = np.arange(n - 1, -1, -1)
    f = factors(C, age, 0, window=n)[0]
    np.testing.assert_allclose(f, ref_ldf, rtol=1e-6)
    nc = nowcast(counts, as_of=as_of, method="chain-ladder", max_delay_weeks=n - 1, window_weeks=n)
    np.testing.assert_allclose(nc["nowcast"].to_numpy(), ref_ult, rtol=1e-6)
    assert to_final(f[None])[0, 0] == pytest.approx(np.prod(ref_ldf), rel=1e-6)
