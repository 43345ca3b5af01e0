"""The border graph step of ``marchland check``: the pairs it left out, for a person to see."""

from __future__ import annotations

import warnings

import pandas as pd

from ..config.schema import Config
from ..errors import DataWarning, InputError
from ..graph.build import border_graph
from ..inputs.units import analysis_units


def border_left_out(cfg: Config, units, counts, rows: dict, notes: list) -> pd.DataFrame | None:
    """Build the border graph of the analysis units; record it as a 'graph' source row."""
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
        return None
    notes.extend(str(w.message) for w in caught if issubclass(w.category, DataWarning))
    cross = int(bg.edges["cross_border"].sum()) // 2
    rows["graph"] = _graph_row(
        path,
        "ok",
        f"{len(bg.edges) // 2} neighbour pairs ({cross} across borders); "
        f"{len(bg.left_out)} pairs within {g.tolerance_m:g} m left out",
    )
    return bg.left_out


def _graph_row(path, status: str, message: str) -> dict:
    return {"kind": "graph", "path": str(path), "status": status, "message": message}
