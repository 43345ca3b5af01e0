"""The table of pairs within the gap tolerance that the corner rule left out."""

from __future__ import annotations

import numpy as np
import pandas as pd


def left_out_table(left: pd.DataFrame, pairs: pd.DataFrame, ids, country) -> pd.DataFrame:
    """Pairs within the tolerance the rule left out, minus those a link joined after all."""
    n = len(ids)
    joined = pairs["i"].to_numpy() * n + pairs["j"].to_numpy()
    left = left[~np.isin(left["i"].to_numpy() * n + left["j"].to_numpy(), joined)]
    i, j = left["i"].to_numpy(), left["j"].to_numpy()
    out = pd.DataFrame(
        {
            "unit_a": ids[i],
            "unit_b": ids[j],
            "country_a": country[i],
            "country_b": country[j],
            "gap_m": left["gap_m"].to_numpy(dtype=float),
            "near_shared_m": left["near_shared_m"].to_numpy(dtype=float),
            "reason": left["reason"].astype(str).to_numpy(),
        },
    )
    return out.sort_values(["gap_m", "unit_a", "unit_b"], ignore_index=True)
