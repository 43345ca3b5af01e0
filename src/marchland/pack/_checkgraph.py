"""The border graph step of ``marchland check``: the pairs a person should look at."""

from __future__ import annotations

import warnings

import pandas as pd

from ..config.schema import Config
from ..errors import DataWarning, InputError
from ..graph.build import border_graph
from ..inputs.units import analysis_units


def border_pairs(
    cfg: Config, units, counts, rows: dict, notes: list
) -> tuple[pd.DataFrame | None, pd.DataFrame | None]:
    """Build the border graph of the analysis units; record it as a 'graph' source row.

    Returns the pairs a person should look at: those within the tolerance left out
    (``BorderGraph.left_out``) and those joined on a facing length below the tolerance
    (``BorderGraph.short_joins``); both None when the graph cannot be built.
    """
    g = cfg.graph
    path = g.links or ""
    try:
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always", DataWarning)
            bg = border_graph(
                analysis_units(units, counts),
                tolerance=g.tolerance_m,
                links=g.links,
                min_shared_m=g.min_shared_m,
                parents=units["parent_id"],
            )
    except InputError as exc:
        rows["graph"] = _graph_row(exc.file or path, "error", str(exc))
        return None, None
    notes.extend(str(w.message) for w in caught if issubclass(w.category, DataWarning))
    cross = int(bg.edges["cross_border"].sum()) // 2
    rows["graph"] = _graph_row(
        path,
        "ok",
        f"{len(bg.edges) // 2} neighbour pairs ({cross} across borders); "
        f"{len(bg.left_out)} pairs within {g.tolerance_m:g} m left out",
    )
    return bg.left_out, bg.short_joins(g.tolerance_m)


def _graph_row(path, status: str, message: str) -> dict:
    return {"kind": "graph", "path": str(path), "status": status, "message": message}


def pair_lines(left: pd.DataFrame | None, short: pd.DataFrame | None, limit: int) -> list[str]:
    """Return the check's text on the border pairs to look at (at most ``limit`` of each)."""
    lines: list[str] = []
    if left is not None and len(left):
        lines.append(
            f"Border pairs left out ({len(left)}): within the gap tolerance but not made "
            "neighbours. If a pair really borders, add it to the links table ([graph] links):"
        )
        lines += _pair_rows(left, limit, reason=True)
    if short is not None and len(short):
        lines.append(
            f"Border pairs joined on a short facing length ({len(short)}): across a gap, "
            "facing each other along less than the gap tolerance (a corner where a border "
            "meets a country missing from the data looks like this). If a pair does not "
            "really border, raise [graph] min_shared_m above its facing length:"
        )
        lines += _pair_rows(short, limit, reason=False)
    return lines


def _pair_rows(pairs: pd.DataFrame, limit: int, *, reason: bool) -> list[str]:
    rows = [
        f"  {r.unit_a} ({r.country_a}) - {r.unit_b} ({r.country_b}): gap {r.gap_m:.0f} m, "
        f"facing {r.near_shared_m:.0f} m" + (f" ({r.reason})" if reason else "")
        for r in pairs.head(limit).itertuples()  # at most ``limit`` lines
    ]
    if len(pairs) > limit:
        rows.append(f"  ... and {len(pairs) - limit} more")
    return rows
