"""Write every generated file of the scenario (boundaries, raster, reports, tables, truth)."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pyproj

from ._boundaries import country_copies, write_boundaries
from ._population import build_flood, write_flood, write_raster
from ._reports import (
    DIRT_COLUMNS,
    reported_counts,
    write_mrw,
    write_osk,
    write_qln,
    write_tvr,
)
from ._scenario import build_scenario
from ._world import GEN_CRS

SUPPLY_COMMENT = "# Example values for the fictional Senn basin scenario, not guidance."
# Planning quantities per case: invented example values for the scenario only.
SUPPLY_ITEMS = [
    ("oral rehydration salts", "sachet", 8, "all", 0.2),
    ("intravenous fluid", "litre", 6, "severe", 0.25),
    ("treatment cot", "piece", 0.1, "severe", 0.1),
    ("water treatment tablets", "tablet", 90, "all", 0.15),
    ("household hygiene kit", "kit", 1, "all", 0.1),
    ("zinc tablets", "box", 0.1, "all", 0.1),
]


def _csv(frame: pd.DataFrame, path: Path, **kw) -> None:
    path.parent.mkdir(parents=True, exist_ok=True)
    frame.to_csv(path, index=False, lineterminator="\n", **kw)


def _clean(folder: Path, patterns) -> None:
    """Remove files an earlier run generated, so a rename never leaves a stale file behind."""
    for pattern in patterns:
        for p in folder.glob(pattern):
            p.unlink()


def write_all(root: Path) -> dict:
    """Build the scenario and write every file under ``root``; return a summary."""
    sc = build_scenario()
    rng = sc.rng
    d = sc.districts
    ob = sc.outbreak
    data = root / "demo_data"
    reports = data / "reports"
    truth = data / "truth"
    for f in (reports, truth, root / "boundaries"):
        f.mkdir(parents=True, exist_ok=True)
    _clean(
        reports, ["tvr_weekly_*.csv", "osk_provinces.xlsx", "mrw_linelist.csv", "qln_weekly.csv"]
    )
    _clean(truth, ["*.csv"])
    _clean(root / "boundaries", ["*_adm1.*", "*_adm2.*"])

    copies = country_copies(sc.world, rng)
    write_boundaries(sc.world, copies, root / "boundaries")
    write_raster(sc.population, data / "population.tif")
    write_flood(build_flood(sc.world, sc.population.labels), data / "flood_share.tif")

    cases, deaths = reported_counts(sc, rng)
    dirt: list[dict] = []
    aliases: list[tuple] = []
    notes = write_tvr(sc, cases, deaths, reports, rng, dirt)
    write_osk(sc, cases, deaths, reports, rng, dirt, aliases)
    write_mrw(sc, cases, deaths, reports, rng, dirt, aliases)
    gap = write_qln(sc, cases, deaths, reports, rng, dirt, aliases)

    _csv(sc.links, data / "links.csv")
    _csv(pd.DataFrame(aliases, columns=["country", "alias", "unit_id"]), data / "aliases.csv")
    _csv(_depots(sc), data / "depots.csv")
    lines = ["item,unit,per_case,basis,buffer_share"]
    lines += [f"{i},{u},{q:g},{b},{s:g}" for i, u, q, b, s in SUPPLY_ITEMS]
    (data / "supply_items.csv").write_text(
        "\n".join([SUPPLY_COMMENT, *lines]) + "\n", encoding="utf-8"
    )

    weeks = ob.weeks.strftime("%Y-%m-%d")
    n, w = ob.cases.shape
    uid = np.repeat(d.index.to_numpy(), w)
    wk = np.tile(weeks, n)
    _csv(
        pd.DataFrame(
            {"unit_id": uid, "week": wk, "cases": ob.cases.ravel(), "deaths": ob.deaths.ravel()}
        ),
        truth / "incidence.csv",
    )
    _csv(
        pd.DataFrame({"unit_id": uid, "week": wk, "force": ob.force.ravel()}),
        truth / "force.csv",
        float_format="%.6g",
    )
    hit = ob.first_week >= 0
    _csv(
        pd.DataFrame(
            {
                "unit_id": d.index[hit],
                "week": weeks[ob.first_week[hit]],
                "seeded_by": np.where(
                    ob.seeded_by[hit] >= 0, d.index.to_numpy()[ob.seeded_by[hit]], ""
                ),
            }
        ),
        truth / "first_case.csv",
    )
    _csv(sc.world.adjacency, truth / "adjacency.csv")
    from ._outbreak import HOT_MONTHS

    _csv(
        pd.DataFrame(
            [(u, str(m)) for u in sc.hot_ids for m in HOT_MONTHS], columns=["unit_id", "month"]
        ),
        truth / "hot.csv",
    )
    _csv(pd.DataFrame(dirt, columns=DIRT_COLUMNS), truth / "dirt.csv")
    _csv(
        d[["name", "country", "province_id", "care", "river", "island"]].reset_index(),
        truth / "districts.csv",
    )
    _csv(d["population"].rename("population").reset_index(), truth / "population.csv")
    _csv(
        pd.DataFrame({"country": "QLN", "week": [g.strftime("%Y-%m-%d") for g in gap]}),
        truth / "gaps.csv",
    )

    return {
        "seed_district": sc.seed_id,
        "island": d.index[d["island"]].tolist(),
        "hot_area": sc.hot_ids,
        "links": sc.links.to_dict("records"),
        "districts_per_country": d["country"].value_counts().sort_index().to_dict(),
        "unaffected": int((~hit).sum()),
        "qln_gap_weeks": [g.strftime("%Y-%m-%d") for g in gap],
        **notes,
    }


def _depots(sc) -> pd.DataFrame:
    """Twelve candidate depot towns: the largest towns, at most four per country."""
    towns = sc.population.towns.assign(country=sc.districts["country"].to_numpy())
    towns = towns[~sc.districts["island"].to_numpy()]
    towns = towns.sort_values("population", ascending=False)
    towns = towns.groupby("country", sort=False).head(3 if len(towns) else 0)
    towns = towns.head(12)
    tr = pyproj.Transformer.from_crs(GEN_CRS, "EPSG:4326", always_xy=True)
    lon, lat = tr.transform(towns["x"].to_numpy(), towns["y"].to_numpy())
    existing = np.zeros(len(towns), dtype=bool)
    existing[:3] = True  # the three largest towns already hold a warehouse
    return pd.DataFrame(
        {
            "site": [f"DEP-{k + 1:02d}" for k in range(len(towns))],
            "name": towns["name"].to_numpy(),
            "lon": np.round(lon, 4),
            "lat": np.round(lat, 4),
            "existing": np.where(existing, "true", "false"),
        }
    )
