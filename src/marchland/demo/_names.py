"""Invented place names for the four fictional countries.

Each country gets its own hand-written stems and endings so the names of one country sound
alike and unlike the others; every stem and ending was written for this scenario, and the
combinations are drawn with the scenario's generator so the list is reproducible.
"""

from __future__ import annotations

import numpy as np

# Stems and endings per country, written for the scenario (no real place is meant).
_PARTS: dict[str, tuple[tuple[str, ...], tuple[str, ...]]] = {
    "TVR": (
        (
            "Vel",
            "Tarn",
            "Mirr",
            "Quel",
            "Brae",
            "Cour",
            "Lian",
            "Dov",
            "Ambr",
            "Gisp",
            "Hollo",
            "Ivr",
            "Jess",
            "Kav",
            "Murn",
            "Nev",
            "Orr",
            "Pell",
            "Rov",
            "Sarn",
            "Tesk",
            "Ulv",
            "Varr",
            "Wenn",
            "Yell",
            "Fauv",
            "Grel",
            "Cass",
            "Bourr",
            "Esq",
        ),
        (
            "enne",
            "ouse",
            "alet",
            "iac",
            "ombe",
            "elin",
            "ay",
            "ival",
            "oncq",
            "essac",
            "aune",
            "igny",
        ),
    ),
    "OSK": (
        (
            "Hald",
            "Brekk",
            "Skyr",
            "Tovr",
            "Ulfs",
            "Varn",
            "Eid",
            "Fjal",
            "Kols",
            "Myrr",
            "Rask",
            "Svel",
            "Ylv",
            "Dagr",
            "Kvist",
            "Ragn",
            "Thyl",
            "Orm",
            "Geir",
            "Sturl",
            "Hrof",
            "Bjel",
            "Ausk",
            "Nyrr",
        ),
        (
            "varre",
            "eskil",
            "thrun",
            "mossa",
            "kelde",
            "ovik",
            "rynd",
            "alsk",
            "unga",
            "essen",
            "orp",
        ),
    ),
    "MRW": (
        (
            "Aum",
            "Brév",
            "Cull",
            "Drem",
            "Éd",
            "Fenn",
            "Gath",
            "Hob",
            "Ill",
            "Kör",
            "Lamm",
            "Morr",
            "Nöl",
            "Orp",
            "Quarr",
            "Roth",
            "Sull",
            "Tarr",
            "Umb",
            "Vosk",
            "Whel",
            "Pell",
            "Dun",
            "Cæl",
        ),
        ("ery", "anne", "wick", "ock", "elle", "ow", "ast", "iel", "ogan", "ith", "enby", "arrow"),
    ),
    "QLN": (
        (
            "Quess",
            "Bal",
            "Carv",
            "Dorr",
            "Esp",
            "Gorr",
            "Iss",
            "Nass",
            "Orv",
            "Pazz",
            "Sav",
            "Tozz",
            "Ul",
            "Vass",
            "Zerr",
            "Mozz",
            "Fell",
            "Ciur",
            "Brasc",
            "Lurr",
        ),
        ("ano", "ella", "iero", "ussa", "ondo", "ira", "essa", "ula", "orbe", "ignu"),
    ),
}
# Combinations that come too close to real places or common words; never used.
_AVOID = {"Morrow", "Ivray", "Rothery", "Dovay", "Illow", "Hobow"}
# Marrowen names carry the words that abbreviations in its line list act on.
_MRW_PREFIXES = ("Saint ", "North ", "South ", "Upper ")


def name_pool(country: str, n: int, rng: np.random.Generator, *, prefixes: bool = False) -> list:
    """Draw ``n`` distinct invented names for ``country``.

    Parameters
    ----------
    country : str
        One of the scenario's country codes.
    n : int
        How many names.
    rng : numpy.random.Generator
        The scenario's generator.
    prefixes : bool
        Give about one name in five a Marrowen-style prefix word ("Saint", "North", ...).

    Returns
    -------
    list of str

    Examples
    --------
    >>> import numpy as np
    >>> names = name_pool("OSK", 5, np.random.default_rng(1))
    >>> len(set(names))
    5
    """
    stems, ends = _PARTS[country]
    combos = [s + e for s in stems for e in ends]
    order = rng.permutation(len(combos))
    out: list[str] = []
    seen: set[str] = set()
    for k in order:
        name = combos[k]
        # Avoid doubled letters at the join ("Tarnnenne") and near-duplicates.
        if (
            name in _AVOID
            or name.lower() in seen
            or any(c * 3 in name.lower() for c in "abcdefghijklmnopqrstuvwxyz")
        ):
            continue
        seen.add(name.lower())
        if prefixes and rng.random() < 0.2:
            name = _MRW_PREFIXES[rng.integers(len(_MRW_PREFIXES))] + name
        out.append(name)
        if len(out) == n:
            return out
    raise ValueError(f"only {len(out)} names available for {country}, {n} asked")
