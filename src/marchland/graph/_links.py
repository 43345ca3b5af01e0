"""Extra links (ferries, bridges, road crossings) from a table, added to the graph's pairs."""

from __future__ import annotations

import os
import warnings

import numpy as np
import pandas as pd
import shapely

from ..errors import DataWarning, InputError

LINK_COLUMNS = ("from_id", "to_id", "kind", "name")


def _read_links(links):
    if isinstance(links, str | os.PathLike):
        path = os.fspath(links)
        try:
            table = pd.read_csv(path, dtype=str, keep_default_na=False)
        except (OSError, pd.errors.ParserError) as err:
            raise InputError(f"cannot read the links table ({err})", file=path) from None
        return table, path
    if isinstance(links, pd.DataFrame):
        return links, None
    raise InputError(
        "links need to be a DataFrame or the path of a CSV file with columns "
        f"{list(LINK_COLUMNS)}. {type(links).__name__} was given instead."
    )


def add_links(pairs: pd.DataFrame, links, ids, geoms, parents=None) -> pd.DataFrame:
    table, path = _read_links(links)
    for col in ("from_id", "to_id"):
        if col not in table.columns:
            raise InputError(
                f"the links table needs columns {list(LINK_COLUMNS)}; {col!r} is missing",
                file=path,
                column=col,
            )
    if len(table) == 0:
        return pairs
    n = len(ids)
    pos = pd.Series(np.arange(n), index=pd.Index(ids).astype(str))
    kinds = table["kind"] if "kind" in table.columns else pd.Series("link", index=table.index)
    names = table["name"] if "name" in table.columns else pd.Series("", index=table.index)
    lift = None
    if parents is not None:
        lift = pd.Series(parents).dropna().astype(str)
        lift.index = lift.index.astype(str)
    ends = []
    for col in ("from_id", "to_id"):
        val = table[col].astype(str).str.strip()
        name = val
        if lift is not None:
            # A link may name a district of a country analysed at province level: climb to the
            # nearest ancestor that is an analysis unit (a few levels at most).
            for _ in range(3):
                up = ~name.isin(pos.index) & name.isin(lift.index)
                if not up.any():
                    break
                name = name.where(~up, name.map(lift))
        p = pos.reindex(name.to_numpy()).to_numpy()
        missing = np.flatnonzero(np.isnan(p))
        if len(missing):
            r = missing[0]
            raise InputError(
                f"{val.iloc[r]!r} is not an analysis unit of this graph"
                f"{_parent_hint(val.iloc[r], pos.index) if lift is None else ''}",
                file=path,
                row=r + 1,
                column=col,
                value=val.iloc[r],
            )
        ends.append(p.astype(np.int64))
    a, b = ends
    inner = a == b
    if lift is not None and inner.any():
        # Both ends inside one analysis unit: nothing to link at this level; say so.
        r = np.flatnonzero(inner)
        warnings.warn(
            f"links table rows {(r + 1).tolist()} join places inside one analysis unit and "
            "add no edge at this level",
            DataWarning,
            stacklevel=4,
        )
        table, a, b, kinds, names = (
            table[~inner],
            a[~inner],
            b[~inner],
            kinds[~inner],
            names[~inner],
        )
    self_loop = np.flatnonzero(a == b)
    if len(self_loop):
        r = self_loop[0]
        raise InputError(
            "a link must join two different units",
            file=path,
            row=r + 1,
            column="to_id",
            value=table["to_id"].iloc[r],
        )
    lo, hi = np.minimum(a, b), np.maximum(a, b)
    new = pd.DataFrame(
        {
            "i": lo,
            "j": hi,
            "link_kind": kinds.astype("string").to_numpy(),
            "link_name": names.astype("string").to_numpy(),
        }
    )
    new["link_kind"] = new["link_kind"].fillna("link").replace("", "link")
    new = new.drop_duplicates(["i", "j"])  # a pair listed twice is one link (first row kept)
    pair_key = pairs["i"].to_numpy() * n + pairs["j"].to_numpy()
    new_key = new["i"].to_numpy() * n + new["j"].to_numpy()
    # A link over a pair that already borders keeps its boundary kind and records the link.
    hit = pd.Series(np.arange(len(pairs)), index=pair_key).reindex(new_key).to_numpy()
    on_edge = ~np.isnan(hit)
    rows = hit[on_edge].astype(np.int64)
    pairs = pairs.copy()
    pairs.loc[pairs.index[rows], "link_kind"] = new["link_kind"].to_numpy()[on_edge]
    pairs.loc[pairs.index[rows], "link_name"] = new["link_name"].to_numpy()[on_edge]
    add = new[~on_edge]
    if len(add):
        add = add.assign(
            shared_m=np.nan,
            gap_m=shapely.distance(geoms[add["i"].to_numpy()], geoms[add["j"].to_numpy()]),
            kind="link",
        )
        pairs = pd.concat([pairs, add[pairs.columns]], ignore_index=True)
    return pairs


def _parent_hint(value: str, known: pd.Index) -> str:
    """Suggest the province when a link names a district of a country analysed at level 1."""
    head = value.rsplit("-", 1)[0] if value.count("-") >= 2 else None
    if head is not None and head in known:
        return f"; its country is analysed at a coarser level, so name {head!r} instead"
    return ""
