"""The map's data block says what the page said before it was made compact (issue 19).

The page used to carry every hover text, fact and weekly count written out per unit; it now
carries templates, codes and rounded numbers that ``webmap.js`` writes out. The reference here
is the previous page's own code, kept verbatim below (``_previous_*``): every text of every
unit must come back the same, through the Python reading of the block (:func:`_webmap.decode`,
the script's steps in Python) and through the script itself run in Node.js with a minimal
document (hover, click, search). Number formatting is checked against Python's ``format``
(correctly rounded, half to even), ties included.
"""

from __future__ import annotations

import json
import os
import subprocess

import numpy as np
import pandas as pd
import pytest
from hypothesis import given
from hypothesis import strategies as st
from system_tools import need

from marchland.pack import _webmap


# --- the previous page's texts, as its code wrote them (reference) --------------------------
def _fmt_series(s: pd.Series, spec: str) -> pd.Series:
    v = pd.to_numeric(s, errors="coerce").astype(float)
    return v.map(lambda x: "–" if not np.isfinite(x) else format(x, spec))


def _previous_texts(result) -> dict[str, list[str]]:
    units = result.units
    out = {}
    r = result.rates
    rate = r["month_rate"].where(r["month_weeks_reported"] > 0)
    text = (
        _fmt_series(rate, ",.1f") + " per 100,000 (95% CI " + _fmt_series(r["month_lower"], ",.1f")
        + " to " + _fmt_series(r["month_upper"], ",.1f") + "); "
        + _fmt_series(r["month_cases"], ",.0f") + " cases"
    )  # fmt: skip
    from marchland.figures import _mapclass as mc

    bins = mc._rate_bounds(result.rates_history, 5)
    _, classes = mc._rate_colours(rate, bins)
    out["rate"] = text.where(classes != -2, "no report in the month")
    hs = result.hotspots
    lab = hs["label"].reindex(units.index).astype(object)
    q = hs["q"].reindex(lab.index)
    out["hotspots"] = (
        lab.fillna("not in the analysis").astype(str) + " (q = " + _fmt_series(q, ".3f") + ")"
    )
    cl = result.clusters
    if isinstance(cl, pd.DataFrame) and "units" in cl and len(cl[cl["p"] <= 0.05]):
        cl = cl[cl["p"] <= 0.05]
        t = pd.Series("in no emerging cluster", index=units.index, dtype=object)
        for i, row in enumerate(cl.itertuples(index=False), start=1):
            members = pd.Index(list(row.units)).intersection(t.index)
            t.loc[members] = f"cluster {i}: p = {format(float(row.p), '.3f')}"
        out["emerging"] = t
    risk = result.risk
    affected = result.fronts.index[result.fronts["first_week"].notna()]
    t = pd.Series("not a candidate", index=units.index, dtype=object)
    t.loc[t.index.intersection(pd.Index(affected))] = "affected (cases by the as-of date)"
    cand = (
        _fmt_series(risk["probability"] * 100, ".1f") + "% chance of a first case (rank "
        + _fmt_series(risk["rank"], ".0f") + ")"
    )  # fmt: skip
    t.loc[cand.index.intersection(t.index)] = cand
    out["risk"] = t
    p = result.priorities
    t = pd.Series("not a candidate", index=units.index, dtype=object)
    c = "rank " + _fmt_series(p["rank"], ".0f") + "; planning cases "
    c = c + _fmt_series(p["planning_cases"], ",.0f")
    t.loc[c.index.intersection(t.index)] = c
    out["priorities"] = t
    out["population"] = _fmt_series(units["population"], ",.0f")
    for col, label, spec in (
        ("month_cases", "cases, the month", ",.0f"),
        ("month_deaths", "deaths, the month", ",.0f"),
        ("cumulative_cases", "cases since the start", ",.0f"),
        ("cumulative_rate", "rate since the start /100,000", ",.1f"),
    ):
        out[label] = _fmt_series(r[col].reindex(units.index), spec)
    out["CFR since the start"] = _fmt_series(r["cfr"].reindex(units.index) * 100, ".1f") + "%"
    return {k: v.reindex(units.index).fillna("–").astype(str).tolist() for k, v in out.items()}


def _previous_epi(result) -> list[list[int]]:
    w = result.weekly
    weeks = pd.DatetimeIndex(sorted(pd.to_datetime(w["week"]).unique()))[-26:]
    sub = w[pd.to_datetime(w["week"]).isin(weeks)]
    table = sub.pivot_table(index="unit_id", columns="week", values="cases", aggfunc="sum")
    arr = table.reindex(index=result.units.index, columns=weeks).to_numpy(dtype=float)
    return np.where(np.isfinite(arr), arr, -1).astype(np.int64).tolist()


@pytest.fixture(scope="module")
def month(grid_month):
    import dataclasses

    result = grid_month[0]
    # A report spelling that is neither id nor name, as place-name matching records it.
    extra = pd.DataFrame({"source": ["x"], "place": ["Old Ninefive"], "unit_id": ["BBB-02-0905"]})
    result = dataclasses.replace(
        result,
        matches=extra if result.matches is None else pd.concat([result.matches, extra]),
    )
    data, _ = _webmap.map_data(result)
    return result, data


def test_every_text_is_the_previous_pages_text(month):
    result, data = month
    n = len(result.units)
    want = _previous_texts(result)
    shown = {lay["key"]: _webmap.decode(lay["text"], n) for lay in data["layers"]}
    facts = zip(data["facts"], data["factValues"], strict=True)
    shown |= {f: _webmap.decode(v, n) for f, v in facts}
    # Every layer and fact of the previous page is there (the grid month has them all).
    assert set(want) <= set(shown)
    for key, texts in want.items():
        assert shown[key] == texts, key
    assert any("per 100,000" in t for t in shown["rate"])
    assert any("chance of a first case" in t for t in shown["risk"])


def test_weekly_cases_countries_and_names_are_the_previous_pages(month):
    result, data = month
    n = len(result.units)
    assert _webmap.epi_rows(data["epi"], len(data["weeks"])) == _previous_epi(result)
    country = result.units["country"].map(result.config.country_label).astype(str).tolist()
    assert [data["countries"][c] for c in _webmap.uncodes(data["country"], n)] == country
    i = data["id"].index("BBB-02-0905")
    assert data["find"][str(i)] == "Old Ninefive"


@given(
    st.one_of(
        st.floats(min_value=-1e9, max_value=1e9),
        st.sampled_from([np.nan, np.inf, -np.inf, 0.05, 0.15, 2.675, 1e-300]),
        # Exact ties at one, three and no decimals (half to even in Python's format).
        st.integers(-(10**6), 10**6).map(lambda k: k / 4),
        st.integers(-(10**6), 10**6).map(lambda k: k / 16),
        st.integers(-(10**6), 10**6).map(lambda k: k / 2),
    ),
    st.sampled_from([".0f", ",.0f", ".1f", ",.1f", ".3f"]),
)
def test_numbers_read_back_as_pythons_format_writes_them(x, spec):
    # Reference: CPython's format() (correctly rounded, ties to even); NaN/inf: a dash.
    dec = int(spec[-2])
    n = _webmap._scaled(pd.Series([x]), dec)[0]
    got = _webmap.format_number(None if np.isnan(n) else n, dec, spec.startswith(","))
    want = format(x, spec) if np.isfinite(x) else "–"
    if want.startswith("-") and set(want) <= set("-0.,"):
        want = want[1:]  # a negative zero loses its sign in an integer (no value shows one)
    assert got == want


def test_a_spec_the_script_cannot_write_is_refused():
    with pytest.raises(ValueError, match="only"):
        _webmap.Texts.of("{0}", pd.Index(["a"]), (pd.Series([1.0], index=["a"]), ".2e"))


def _node() -> str:
    return need(("node",), "Node.js", "nodejs", "map script not run")


def test_the_pages_script_shows_the_previous_texts_bars_and_search(month, tmp_path):
    result, data = month
    n = len(result.units)
    data = dict(data, hatch=_webmap.hatch_keys(data["layers"]))
    block = tmp_path / "data.json"
    block.write_text(json.dumps(data, ensure_ascii=False), encoding="utf-8")
    script = tmp_path / "webmap.js"
    script.write_text(_webmap.script(), encoding="utf-8")
    harness = os.path.join(os.path.dirname(__file__), "webmap_dom.js")
    res = subprocess.run(
        [_node(), harness, str(script), str(block), "ninefive"],
        capture_output=True, text=True, timeout=120, check=False,
    )  # fmt: skip
    assert res.returncode == 0, res.stderr[-2000:]
    got = json.loads(res.stdout)
    want = _previous_texts(result)
    keys = [lay["key"] for lay in data["layers"]]
    for k, key in enumerate(keys):
        if key in want:
            assert [t[1] for t in got["tips"][k]] == want[key], key
    assert [t[0] for t in got["tips"][0]] == result.units["name"].astype(str).tolist()
    epi = _previous_epi(result)
    for i in (0, n // 2, n - 1):
        name, line, rows, _, bars, _ = got["panels"][i]
        assert name == result.units["name"].iloc[i]
        table = dict(map(tuple, rows))
        for f in data["facts"]:
            assert table[f] == want[f][i], f
        fills = [b[0] for b in bars if isinstance(b, list)]
        assert fills == ["#c9c4b8" if v < 0 else "#6d7fa8" for v in epi[i]]
        assert bars[-1] == f"max {max([1, *epi[i]])} cases a week"
    target = data["id"].index("BBB-02-0905")
    assert got["found"] == "BBB-02-0905"
    assert any("as Old Ninefive" in h for h in got["hits"])
    assert got["panels"][target][1].startswith("BBB-02-0905 · ")


def test_plain_strings_from_a_registered_layer_come_back_as_written():
    # register_layer builders may give one string per unit: a table of the distinct strings.
    s = pd.Series(["a {0} }", "b", "a {0} }", None], index=list("wxyz"))
    t = _webmap.Texts.from_strings(s)
    assert t.strings().tolist() == ["a {0} }", "b", "a {0} }", "–"]
    enc = t.encode(pd.Index(list("wxyzq")))  # q: a unit the layer does not know
    assert _webmap.decode(enc, 5) == ["a {0} }", "b", "a {0} }", "–", "–"]
    assert len(enc["t"]) == 4 and "f" not in enc
