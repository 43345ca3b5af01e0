"""The bundled fictional scenario: four invented countries around the river Senn and Lake Ivesse.

Tavrenne (TVR), Oskeland (OSK), Marrowen (MRW) and Quillany (QLN) are made up, and so is every
province, district, town and number in the scenario. The map sits over open ocean in the South
Atlantic (about 16-22 degrees west, 13-18 degrees south), where there is no land, so nothing
in it maps onto a real place. Everything is generated from one fixed seed by :func:`generate`
(``python -m marchland.demo``); the generated files are committed and
``tests/test_demo.py`` checks that regenerating them gives the same content.

Files written under ``root``:

- ``boundaries/``: each country's admin-1 and admin-2 file, in its own format and CRS, digitised
  so that neighbouring countries' borders do not line up (gaps and overlaps of up to ~270 m).
- ``demo_data/population.tif``: people per ~1 km cell.
- ``demo_data/flood_share.tif``: share of each cell flooded in the wet season (a border-risk
  covariate), high along the Senn and the lake shore; drawn from the geometry alone.
- ``demo_data/reports/``: the four countries' report files, with deliberate dirt.
- ``demo_data/links.csv``, ``aliases.csv``, ``depots.csv``, ``supply_items.csv``.
- ``demo_data/truth/``: what really happened (incidence, force of infection, first cases and
  their sources, adjacency, the hot area, the dirt, district attributes, populations).
"""

from __future__ import annotations

from pathlib import Path

__all__ = ["SEED", "generate", "scenario_path"]

SEED = 20250407
_ROOT = Path(__file__).resolve().parents[3]


def scenario_path() -> Path:
    """Path of the bundled scenario's configuration, ``demo_data/scenario.toml``.

    Returns
    -------
    pathlib.Path

    Examples
    --------
    >>> scenario_path().name
    'scenario.toml'
    >>> scenario_path().exists()
    True
    """
    return _ROOT / "demo_data" / "scenario.toml"


def generate(root: str | Path | None = None) -> dict:
    """Regenerate the scenario's files under ``root`` from the fixed seed.

    ``demo_data/scenario.toml`` is written by hand and is not touched.

    Parameters
    ----------
    root : str or pathlib.Path, optional
        Folder to write ``boundaries/`` and ``demo_data/`` into; the repository root by default.

    Returns
    -------
    dict
        A summary: seed district, island, hot area, links, districts per country, notes.

    Examples
    --------
    ``generate(folder)`` writes a fresh copy; the committed copy lives beside the config:

    >>> import pandas as pd
    >>> links = pd.read_csv(scenario_path().parent / "links.csv")
    >>> sorted(set(links["kind"]))
    ['bridge', 'ferry']
    """
    from ._write import write_all

    return write_all(Path(root) if root is not None else _ROOT)
