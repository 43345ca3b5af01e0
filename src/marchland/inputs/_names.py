"""Place-name matching: report names to unit ids, in a fixed order, never guessing.

Order: exact code; exact name; normalised name (case, accents, punctuation, abbreviations,
configured words such as "district of" stripped); the user's alias table; a fuzzy match
(rapidfuzz WRatio) only above a score and ahead of the runner-up by a margin. A name that
matches several units at the first step that finds it is ambiguous, never resolved by order.
"""

from __future__ import annotations

import functools
import re
import unicodedata
from dataclasses import dataclass

import pandas as pd
from rapidfuzz import fuzz, process

METHODS = ("exact-code", "exact-name", "normalised", "alias", "fuzzy")

# Common abbreviations in place names; expanded on both sides before comparing.
ABBREVIATIONS = {
    "st": "saint",
    "ste": "sainte",
    "mt": "mount",
    "ft": "fort",
    "pt": "port",
    "n": "north",
    "s": "south",
    "e": "east",
    "w": "west",
    "upr": "upper",
    "lwr": "lower",
}
# Letters NFKD does not decompose into a base letter plus a mark.
_FOLD = str.maketrans(
    {"ø": "o", "æ": "ae", "œ": "oe", "ß": "ss", "ł": "l", "đ": "d", "ð": "d", "þ": "th", "ı": "i"}
)


def normalise(name: str, strip_words: tuple[str, ...] = ()) -> str:
    """Fold a place name for comparison: case, accents, punctuation, abbreviations, words.

    Examples
    --------
    >>> normalise("St. Éloi-sur-Senn")
    'saint eloi sur senn'
    >>> normalise("District of N. Varre", ("district of", "district"))
    'north varre'
    """
    s = unicodedata.normalize("NFKD", str(name).casefold().translate(_FOLD))
    s = "".join(c for c in s if not unicodedata.combining(c))
    s = s.replace("&", " and ").replace("'", "").replace("\u2019", "")
    s = re.sub(r"[^\w\s]|_", " ", s)
    words = [ABBREVIATIONS.get(w, w) for w in s.split()]
    s = " ".join(words)
    if strip_words:
        stripped = " ".join(_strip_pattern(tuple(strip_words)).sub(" ", s).split())
        s = stripped or s  # a name that is only a stripped word keeps it
    return s


@functools.lru_cache(maxsize=32)
def _strip_pattern(words: tuple[str, ...]) -> re.Pattern:
    # Longest first, so "district of" goes before "district".
    folded = sorted({normalise(w) for w in words if w.strip()}, key=len, reverse=True)
    return re.compile(r"\b(?:" + "|".join(re.escape(w) for w in folded) + r")\b")


@dataclass(frozen=True)
class Match:
    """The outcome for one distinct place: a unit, or a reason and the nearest candidates."""

    unit_id: str | None
    method: str | None
    score: float
    reason: str | None
    candidates: str


class Matcher:
    """Match places of one country (and level) against its units.

    Parameters
    ----------
    units : pandas.DataFrame
        Candidate units (index ``unit_id``, column ``name``).
    aliases : pandas.DataFrame
        Columns ``alias``, ``unit_id`` for this country.
    strip_words : tuple of str
    fuzzy_score, fuzzy_margin : float
        rapidfuzz WRatio (0-100) needed, and lead over the runner-up.
    """

    def __init__(
        self,
        units: pd.DataFrame,
        aliases: pd.DataFrame,
        *,
        strip_words: tuple[str, ...],
        fuzzy_score: float,
        fuzzy_margin: float,
    ) -> None:
        self.strip = tuple(strip_words)
        self.score = fuzzy_score
        self.margin = fuzzy_margin
        ids = pd.Index(units.index.astype(str))
        names = units["name"].astype(str).str.strip().to_numpy()
        self.ids = list(ids)
        self.names = list(names)
        self.by_code = {i.upper(): i for i in ids}
        self.by_name = _groups(names, ids)
        self.norm = [normalise(n, self.strip) for n in names]
        self.by_norm = _groups(self.norm, ids)
        self.by_alias = _groups(aliases["alias"].astype(str).str.strip(), aliases["unit_id"])
        self.by_alias_norm = _groups(
            [normalise(a, self.strip) for a in aliases["alias"].astype(str)], aliases["unit_id"]
        )

    def _nearest(self, key: str) -> list[tuple[str, str, float]]:
        hits = process.extract(key, self.norm, scorer=fuzz.WRatio, limit=5)
        out, seen = [], set()
        for _, score, i in hits:
            if self.ids[i] not in seen:
                seen.add(self.ids[i])
                out.append((self.ids[i], self.names[i], float(score)))
        return out

    def match(self, code: str | None, place: str | None) -> Match:
        """Match one (code, place) pair."""
        if code:
            uid = self.by_code.get(code.strip().upper())
            if uid is not None:
                return Match(uid, "exact-code", 100.0, None, "")
        if not place:
            return Match(None, None, 0.0, "unknown-place", "")
        place = place.strip()
        if place.upper() in self.by_code:
            return Match(self.by_code[place.upper()], "exact-code", 100.0, None, "")
        key = normalise(place, self.strip)
        for method, table, k in (
            ("exact-name", self.by_name, place),
            ("normalised", self.by_norm, key),
            ("alias", self.by_alias, place),
            ("alias", self.by_alias_norm, key),
        ):
            found = table.get(k)
            if found is not None:
                if len(found) == 1:
                    return Match(found[0], method, 100.0, None, "")
                cands = "; ".join(f"{self._name(u)} [{u}]" for u in found[:5])
                return Match(None, None, 100.0, "ambiguous-place", cands)
        near = self._nearest(key) if self.norm else []
        cands = "; ".join(f"{n} [{u}] {s:.0f}" for u, n, s in near[:3])
        if near and near[0][2] >= self.score:
            second = near[1][2] if len(near) > 1 else 0.0
            if near[0][2] - second >= self.margin:
                return Match(near[0][0], "fuzzy", near[0][2], None, cands)
            return Match(None, None, near[0][2], "ambiguous-place", cands)
        return Match(None, None, near[0][2] if near else 0.0, "unknown-place", cands)

    def _name(self, uid: str) -> str:
        return self.names[self.ids.index(uid)] if uid in self.ids else uid


def _groups(keys, ids) -> dict[str, list[str]]:
    """Key -> unique unit ids, preserving first-seen order."""
    out: dict[str, list[str]] = {}
    for k, u in zip(keys, ids, strict=True):
        lst = out.setdefault(k, [])
        if u not in lst:
            lst.append(u)
    return out
