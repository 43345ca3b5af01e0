"""Reading weekly report files: shapes, place-name matching, epi weeks, revisions, rejects.

:func:`read_reports` reads every report source of a region (weekly tables, workbooks with a
sheet per period, line lists; CSV or XLSX), matches place names to unit ids, puts each count
on an epi week of the analysis calendar and keeps every version received. Every input row is
either counted or rejected with a reason (``REASONS``); :func:`as_of` gives the data as known
on a date.
"""

from __future__ import annotations

import os
import warnings
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np
import pandas as pd

from ..compute import get_executor, share_tasks
from ..errors import DataWarning, InputError
from ._names import Matcher
from ._order import grouped_latest, latest_rows
from ._parse import flag as _flag
from ._parse import parse_table as _parse_table
from ._parse import read_tables, text_frame
from .weeks import epi_week, week_start

if TYPE_CHECKING:  # pragma: no cover
    from ..config.schema import ChecksConfig, Config, MatchingConfig, ReportSpec

__all__ = [
    "Reports",
    "as_of",
    "as_of_rows",
    "epi_week",
    "load_aliases",
    "read_reports",
    "reporting_completeness",
    "week_start",
]

COUNT_COLUMNS = ("unit_id", "week", "cases", "deaths", "received", "source", "row")
# Beside the contract's columns: the file and sheet a row came from, and whether a zero is
# implied by the source's convention (a listed week without the unit) rather than written.
EXTRA_COUNT_COLUMNS = ("file", "sheet", "implied")
# The counts' columns that label where a row came from: held as categories.
_LABEL_COLUMNS = ("source", "file", "sheet")
REJECT_COLUMNS = ("source", "file", "sheet", "row", "column", "value", "reason", "candidates")
MATCH_COLUMNS = (
    "source",
    "country",
    "code",
    "place",
    "unit_id",
    "method",
    "score",
    "candidates",
    "rows",
)
REASONS = (
    "blank",
    "missing-value",
    "unparseable",
    "unknown-place",
    "ambiguous-place",
    "negative",
    "deaths-over-cases",
    "future-week",
    "duplicate",
    "wrong-field-count",
    "ambiguous-date",
    "implausible-date",
    "conflict",
)


def as_of(counts: pd.DataFrame, date: object = None) -> pd.DataFrame:
    """Give the data as known on ``date``: per (unit_id, week) the latest row received by then.

    Parameters
    ----------
    counts : pandas.DataFrame
        Counts with every accepted version (columns as in ``COUNT_COLUMNS``).
    date : date-like, optional
        Keep rows received on or before this date; ``None`` keeps every row.

    Returns
    -------
    pandas.DataFrame
        One row per reported (unit_id, week), sorted by unit_id and week. Unit-weeks nobody had
        reported by ``date`` are absent (missing is not zero).

    Examples
    --------
    >>> c = pd.DataFrame({"unit_id": ["a", "a", "a"],
    ...                   "week": pd.to_datetime(["2026-01-05"] * 2 + ["2026-01-12"]),
    ...                   "cases": pd.array([3, 5, 1], dtype="Int64"),
    ...                   "deaths": pd.array([0, 1, 0], dtype="Int64"),
    ...                   "received": pd.to_datetime(["2026-01-13", "2026-01-27", "2026-01-20"]),
    ...                   "source": "x", "row": [1, 2, 3]})
    >>> as_of(c, "2026-01-21")["cases"].tolist()
    [3, 1]
    >>> as_of(c)["cases"].tolist()
    [5, 1]
    """
    rows = as_of_rows(counts, date)
    if len(rows) == len(counts) and np.array_equal(rows, np.arange(len(counts))):
        return counts.reset_index(drop=True)  # a view already: nothing to copy
    return counts.iloc[rows].reset_index(drop=True)


def as_of_rows(counts: pd.DataFrame, date: object = None) -> np.ndarray:
    """Positions in ``counts`` of the rows of :func:`as_of` ``(counts, date)``, in its order.

    For callers that need a few columns of the view, not a copy of every column.

    Examples
    --------
    >>> c = pd.DataFrame({"unit_id": ["a", "a", "b"],
    ...                   "week": pd.to_datetime(["2026-01-05"] * 3),
    ...                   "received": pd.to_datetime(["2026-01-13", "2026-01-27", "2026-01-20"])})
    >>> as_of_rows(c, "2026-01-21").tolist(), as_of_rows(c).tolist()
    ([0, 2], [1, 2])
    """
    ts = None if date is None else pd.Timestamp(date)
    # Versions as the reader sorts them, or a view already (the usual cases): a mask, no sort.
    keep = latest_rows(counts, ts) if ts is None or ts.tz is None else None
    if keep is not None:
        return np.flatnonzero(keep)
    # Categorical ids whose units come in blocks in another order than the categories'.
    rows = grouped_latest(counts, ts) if ts is None or ts.tz is None else None
    if rows is not None:
        return rows
    key = counts[["unit_id", "week", "received"]].reset_index(drop=True)
    if ts is not None:
        key = key[key["received"] <= ts]
    # Stable sort: for equal received dates the later row of the later file wins.
    key = key.sort_values(["unit_id", "week", "received"], kind="stable")
    return key.drop_duplicates(["unit_id", "week"], keep="last").index.to_numpy()


# --- the result ------------------------------------------------------------------------------
@dataclass(frozen=True)
class Reports:
    """Everything read from the report sources of a region.

    Attributes
    ----------
    counts : pandas.DataFrame
        Every accepted version: ``unit_id week cases deaths received source row`` (see
        ``COUNT_COLUMNS``) plus ``file sheet implied``. ``unit_id`` is at the source's own level.
        Zeros a source implies by its convention (a cases-only table's listed week, a line
        list's weeks without cases) are rows with ``implied=True`` and ``row`` <NA>.
    rejects : pandas.DataFrame
        ``source file sheet row column value reason candidates``, one row per rejected input
        row; ``reason`` is one of ``REASONS``.
    matches : pandas.DataFrame
        Every distinct place of every source: ``source country code place unit_id method
        score candidates rows``; ``method`` is one of exact-code, exact-name, normalised,
        alias, fuzzy (empty when rejected).
    completeness : pandas.DataFrame
        Per unit (index ``unit_id``): ``country level expected_weeks reported_weeks share
        first_week last_week last_received``, over the region's span of weeks.
    completeness_by_country : pandas.DataFrame
        The same per country (index ``country``), plus ``units``, ``units_never`` (units with
        no report at all) and ``gap_weeks`` (weeks in the span with no report from the country).
    accounting : pandas.DataFrame
        Per source (index ``source``): ``country shape level files rows_in counted rejected``;
        ``rows_in == counted + rejected`` is checked when it is built.
    """

    counts: pd.DataFrame
    rejects: pd.DataFrame
    matches: pd.DataFrame
    completeness: pd.DataFrame
    completeness_by_country: pd.DataFrame
    accounting: pd.DataFrame


def load_aliases(
    aliases: str | os.PathLike[str] | pd.DataFrame | None, units: pd.DataFrame
) -> pd.DataFrame:
    """Read the alias table (``country,alias,unit_id``) and check every unit id exists.

    Examples
    --------
    >>> u = pd.DataFrame({"country": ["TVR"]}, index=pd.Index(["TVR-01"], name="unit_id"))
    >>> load_aliases(pd.DataFrame({"country": ["tvr"], "alias": ["Old Orlane"],
    ...                            "unit_id": ["TVR-01"]}), u)["country"].tolist()
    ['TVR']
    """
    cols = ["country", "alias", "unit_id"]
    if aliases is None:
        return pd.DataFrame({c: pd.Series(dtype=object) for c in cols})
    file = None
    if isinstance(aliases, pd.DataFrame):
        table = aliases.copy()
    else:
        file = Path(aliases)
        table = read_tables(file)[0][1]
    missing = [c for c in cols if c not in table.columns]
    if missing:
        raise InputError(
            f"the alias table needs columns {cols}; missing {missing}", file=file, column=missing[0]
        )
    table = text_frame(table[cols])
    table = table[table.notna().all(axis=1)]
    table["country"] = table["country"].str.upper()
    unknown = ~table["unit_id"].isin(units.index)
    if unknown.any():
        r = int(table.index[unknown.to_numpy()][0]) + 1
        raise InputError(
            "the alias names a unit id that is in no boundary file",
            file=file,
            row=r,
            column="unit_id",
            value=table.loc[unknown, "unit_id"].iloc[0],
        )
    return table.reset_index(drop=True).astype(object)


# --- one source ------------------------------------------------------------------------------
def _take(values: pd.Series, pos: np.ndarray, fill: object) -> np.ndarray:
    """``values[pos]`` with ``fill`` where ``pos`` is -1 (no match-table row)."""
    out = np.full(len(pos), fill, dtype=object)
    hit = pos >= 0
    out[hit] = values.to_numpy(dtype=object)[pos[hit]]
    return out


def _match_places(df: pd.DataFrame, matcher: Matcher, spec: ReportSpec) -> pd.DataFrame:
    """Match each distinct (code, place) once; return the match table for this source."""
    # Rows without any place were rejected already; they name nothing to match.
    live = df["reason"].ne("blank") & (df["place"].notna() | df["code"].notna())
    keys = df.loc[live, ["code", "place"]].fillna("").astype(str)
    pairs = keys.value_counts().rename("rows").reset_index()
    found = [matcher.match(cd, pl) for cd, pl in zip(pairs["code"], pairs["place"], strict=True)]
    pairs["unit_id"] = [m.unit_id for m in found]
    pairs["method"] = [m.method or "" for m in found]
    pairs["score"] = [m.score for m in found]
    pairs["candidates"] = [m.candidates for m in found]
    pairs["_reason"] = [m.reason for m in found]
    pairs.insert(0, "country", spec.country)
    pairs.insert(0, "source", spec.name)
    return pairs


def _implied_zeros(
    counts: pd.DataFrame, spec: ReportSpec, ids: pd.Index, calendar: str
) -> pd.DataFrame:
    """Zeros the source states by convention, for unit-weeks it did not list.

    A cases-only table lists only units with cases: in a week it sent anything for, every
    other unit had none. A line list lists every case: every week from its first to its last
    report is covered. A week a source sent nothing for stays missing (not zero).
    """
    if counts.empty or (spec.shape != "linelist" and spec.zeros != "cases-only"):
        return counts.iloc[:0]
    if spec.shape == "linelist":
        # The last week wholly over by the last report received.
        final = counts["received"].max() - pd.Timedelta(days=6)
        last = week_start(pd.Series([final]), calendar).iloc[0]
        weeks = pd.date_range(counts["week"].min(), last, freq="7D")
        got = np.sort(counts["received"].unique())
        ends = (weeks + pd.Timedelta(days=6)).to_numpy()
        pos = np.minimum(np.searchsorted(got, ends), len(got) - 1)
        received = pd.Series(got[pos], index=weeks)
    else:
        received = counts.groupby("week")["received"].min()
        weeks = received.index
    grid = pd.MultiIndex.from_product([ids, weeks], names=["unit_id", "week"])
    have = pd.MultiIndex.from_frame(counts[["unit_id", "week"]])
    grid = grid.difference(have)
    if len(grid) == 0:
        return counts.iloc[:0]
    z = grid.to_frame(index=False)
    has_deaths = counts["deaths"].notna().any()
    z["cases"] = pd.array(np.zeros(len(z), dtype=int), dtype="Int64")
    z["deaths"] = pd.array(
        np.zeros(len(z), dtype=int) if has_deaths else [pd.NA] * len(z), dtype="Int64"
    )
    z["received"] = z["week"].map(received).to_numpy()
    z["source"] = spec.name
    z["row"] = pd.array([pd.NA] * len(z), dtype="Int64")
    z["file"] = ""
    z["sheet"] = ""
    z["implied"] = True
    return z


def _linelist_versions(ok: pd.DataFrame, spec: ReportSpec) -> pd.DataFrame:
    """Cases per place-week as known at each received date (cumulative over the list)."""
    ok = ok.sort_values(["unit_id", "week", "received", "row"], kind="stable")
    g = ok.groupby(["unit_id", "week"], sort=False)
    ok = ok.assign(cases=g.cumcount() + 1)
    if "died" in ok:
        ok["deaths"] = ok["died"].astype(int).groupby([ok["unit_id"], ok["week"]]).cumsum()
    else:
        ok["deaths"] = pd.NA
    first_row = g["row"].transform("min")
    v = ok.assign(row=first_row).drop_duplicates(["unit_id", "week", "received"], keep="last")
    v = v.assign(cases=v["cases"].astype("Int64"), deaths=v["deaths"].astype("Int64"))
    return v


def _read_source(
    spec: ReportSpec,
    key: str,
    units: pd.DataFrame,
    aliases: pd.DataFrame,
    calendar: str,
    matching: MatchingConfig,
    checks: ChecksConfig,
    today: pd.Timestamp,
) -> tuple[pd.DataFrame, pd.DataFrame, pd.DataFrame, dict]:
    window = (
        pd.Timestamp(checks.earliest_date or today - pd.DateOffset(years=10)),
        pd.Timestamp(checks.latest_date or today + pd.DateOffset(years=1)),
    )
    cands = units[(units["country"] == spec.country) & (units["level"] == spec.level)]
    if cands.empty:
        raise InputError(
            f"no boundary units of country {spec.country!r} at level {spec.level}",
            file=spec.path,
            column=f"{key}.country",
        )
    matcher = Matcher(
        cands,
        aliases[aliases["country"] == spec.country],
        strip_words=matching.strip_words,
        fuzzy_score=matching.fuzzy_score,
        fuzzy_margin=matching.fuzzy_margin,
    )
    parts = []
    for f in spec.files:
        tables = read_tables(f, spec.sheets)
        skipped: list[str] = []
        first_error = None
        for sheet, frame in tables:
            try:
                parts.append(_parse_table(frame, spec, key, f, sheet, calendar, today, window))
            except InputError as exc:
                # A stray sheet (notes, a summary) in a workbook does not block the others.
                if not sheet:
                    raise
                skipped.append(sheet)
                first_error = first_error or exc
        if first_error is not None and len(skipped) == len(tables):
            raise first_error
        if skipped:
            warnings.warn(
                f"{spec.name}: {f.name}: skipped sheets without the configured columns: {skipped}",
                DataWarning,
                stacklevel=4,
            )
    df = pd.concat(parts, ignore_index=True) if parts else pd.DataFrame()
    matches = _match_places(df, matcher, spec)
    m = matches.set_index(["code", "place"])
    keys = pd.MultiIndex.from_frame(df[["code", "place"]].fillna("").astype(str))
    pos = m.index.get_indexer(keys)
    df["unit_id"] = _take(m["unit_id"], pos, None)
    df["candidates"] = _take(m["candidates"], pos, "")
    why = pd.Series(_take(m["_reason"], pos, None), dtype=object)
    pcol = spec.columns.place or spec.columns.code
    shown = df["place"].fillna(df["code"])
    for r in ("unknown-place", "ambiguous-place"):
        _flag(df, (why == r).to_numpy(), r, pcol, shown)
    df.loc[df["reason"].isna(), "candidates"] = ""
    if spec.shape != "linelist":
        c = spec.columns
        _flag(df, (df["cases"] < 0).fillna(False), "negative", c.cases, df["_raw_cases"])
        _flag(df, (df["deaths"] < 0).fillna(False), "negative", c.deaths, df.get("_raw_deaths"))
        over = (df["deaths"] > df["cases"]).fillna(False).to_numpy()
        if checks.deaths_over_cases == "reject":
            _flag(df, over, "deaths-over-cases", c.deaths, df.get("_raw_deaths"))
        else:
            capped = over & df["reason"].isna().to_numpy()
            if capped.any():
                df.loc[capped, "deaths"] = df.loc[capped, "cases"]
                warnings.warn(
                    f"{spec.name}: deaths capped at cases in {int(capped.sum())} rows",
                    DataWarning,
                    stacklevel=4,
                )
    _flag(
        df,
        df["_future"],
        "future-week",
        df["_future_col"].iloc[0] if len(df) else "",
        df["_future_val"],
    )
    ok = df["reason"].isna()
    dup_key = (
        ["_key"] if spec.shape == "linelist" else ["unit_id", "week", "cases", "deaths", "received"]
    )
    dup = ok & df[dup_key].where(ok).duplicated(keep="first") if len(df) else ok
    _flag(df, dup.to_numpy(), "duplicate", "")
    if spec.shape != "linelist" and checks.same_day_conflict == "reject" and len(df):
        # One unit-week received twice on one day with different counts: file order would
        # settle it silently, so neither row is used.
        ok = df["reason"].isna()
        key3 = ["unit_id", "week", "received"]
        live = df.loc[ok, [*key3, "cases", "deaths"]].astype({"cases": object, "deaths": object})
        live = live.fillna({"deaths": -1})
        n = live.groupby(key3, dropna=False)[["cases", "deaths"]].transform("nunique")
        clash = pd.Series(False, index=df.index)
        clash[live.index] = (n.max(axis=1) > 1).to_numpy()
        _flag(df, clash.to_numpy(), "conflict", spec.columns.cases, df["_raw_cases"])

    ok = df["reason"].isna()
    rejects = df.loc[~ok, ["file", "sheet", "row", "column", "value", "reason", "candidates"]]
    rejects.insert(0, "source", spec.name)
    good = df.loc[ok].copy()
    if spec.shape == "linelist":
        good = _linelist_versions(good, spec)
    good["source"] = spec.name
    good["implied"] = False
    good["row"] = good["row"].astype("Int64")
    counts = good.loc[:, [*COUNT_COLUMNS, *EXTRA_COUNT_COLUMNS]]
    zeros = _implied_zeros(counts, spec, cands.index, calendar)
    if len(zeros):
        counts = pd.concat([counts, zeros], ignore_index=True)
    # One source, a few files and sheets repeated on every row: small codes, not a string
    # per row, while the sources wait to be put together.
    counts = counts.astype({c: "category" for c in _LABEL_COLUMNS})
    acct = {
        "source": spec.name,
        "country": spec.country,
        "shape": spec.shape,
        "level": spec.level,
        "files": len(spec.files),
        "rows_in": len(df),
        "counted": int(ok.sum()),
        "rejected": int((~ok).sum()),
    }
    if acct["rows_in"] != acct["counted"] + acct["rejected"]:  # a bug, never a user mistake
        raise RuntimeError(f"row accounting failed for {spec.name}: {acct}")
    matches = matches.drop(columns="_reason").loc[:, list(MATCH_COLUMNS)]
    return counts, rejects, matches, acct


# --- completeness ----------------------------------------------------------------------------
def reporting_completeness(
    counts: pd.DataFrame, units: pd.DataFrame, specs: Sequence[ReportSpec]
) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Share of expected unit-weeks reported, per unit and per country.

    Expected: every unit of each source's country and level, every week from the country's
    first reported week to the last week reported anywhere in the region (a country that
    falls silent shows the gap; one whose outbreak starts late is not charged for before).
    Implied zeros count as reported; weeks nobody sent do not.

    Returns
    -------
    (by_unit, by_country) : tuple of pandas.DataFrame
        As ``Reports.completeness`` and ``Reports.completeness_by_country``.

    Examples
    --------
    >>> from marchland.config import ReportSpec
    >>> units = pd.DataFrame({"country": "QLN", "level": 2},
    ...                      index=pd.Index(["QLN-01-01", "QLN-01-02"], name="unit_id"))
    >>> counts = pd.DataFrame({"unit_id": ["QLN-01-01", "QLN-01-01", "QLN-01-02"],
    ...                        "week": pd.to_datetime(["2026-01-05", "2026-01-19", "2026-01-19"]),
    ...                        "received": pd.to_datetime(["2026-01-09", "2026-01-23",
    ...                                                    "2026-01-23"])})
    >>> spec = ReportSpec(name="q", path="", files=(), country="QLN")
    >>> unit, country = reporting_completeness(counts, units, [spec])
    >>> unit["share"].round(2).tolist(), int(country.loc["QLN", "gap_weeks"])
    ([0.67, 0.33], 1)
    """
    levels = pd.DataFrame([(s.country, s.level) for s in specs], columns=["country", "level"])
    # Only the two columns: copying the units' geometry here cost more than the rest.
    exp = pd.DataFrame(units[["country", "level"]]).reset_index()
    exp = exp.merge(levels.drop_duplicates(), on=["country", "level"])
    exp = exp.set_index(units.index.name or "unit_id")[["country", "level"]]
    exp = exp[~exp.index.duplicated()]
    # On integer codes of the unit ids: mapping or grouping millions of string ids made a
    # Python string of each (at 50,000 units 1.9 s of CPU; 1.1 s on codes).
    codes, ids = pd.factorize(counts["unit_id"])
    week = counts["week"]
    g = week.groupby(codes)
    per = pd.DataFrame(
        {
            "reported_weeks": g.nunique(),
            "first_week": g.min(),
            "last_week": g.max(),
            "last_received": counts["received"].groupby(codes).max(),
        }
    )
    # Each unit's country (NaN for a unit outside every source), and each row's through it.
    unit_country = pd.Series(ids).map(exp["country"])
    last = week.max() if len(counts) else pd.NaT
    start = per["first_week"].groupby(unit_country).min()
    n_weeks = (((last - start).dt.days // 7) + 1).reindex(exp["country"].unique()).fillna(0)
    per.index = pd.Index(ids[per.index.to_numpy()], name=exp.index.name)
    ccodes, cnames = pd.factorize(unit_country)
    row_country = ccodes[codes]
    unit = exp.join(per, how="left")
    unit["reported_weeks"] = unit["reported_weeks"].fillna(0).astype(int)
    unit["expected_weeks"] = unit["country"].map(n_weeks).astype(int)
    unit["share"] = unit["reported_weeks"] / unit["expected_weeks"].clip(lower=1)
    cols = [
        "country",
        "level",
        "expected_weeks",
        "reported_weeks",
        "share",
        "first_week",
        "last_week",
        "last_received",
    ]
    unit = unit.loc[:, cols]
    unit.index.name = "unit_id"
    cg = unit.groupby("country")
    country = pd.DataFrame(
        {
            "units": cg.size(),
            "units_never": (unit["reported_weeks"] == 0).groupby(unit["country"]).sum(),
            "expected_weeks": cg["expected_weeks"].sum(),
            "reported_weeks": cg["reported_weeks"].sum(),
            "last_received": cg["last_received"].max(),
        }
    )
    country["share"] = country["reported_weeks"] / country["expected_weeks"].clip(lower=1)
    known = row_country >= 0
    sent = week[known].groupby(row_country[known]).nunique()
    sent.index = cnames[sent.index.to_numpy()]
    sent = sent.reindex(country.index).fillna(0)
    country["gap_weeks"] = (country.index.map(n_weeks).to_numpy() - sent).astype(int)
    country.index.name = "country"
    return unit, country


def _empty(columns: Sequence[str]) -> pd.DataFrame:
    return pd.DataFrame({c: pd.Series(dtype=object) for c in columns})


# --- the public reader -----------------------------------------------------------------------
def read_reports(
    specs: Config | ReportSpec | Sequence[ReportSpec],
    units: pd.DataFrame,
    *,
    aliases: str | os.PathLike[str] | pd.DataFrame | None = None,
    calendar: str = "iso",
    matching: MatchingConfig | None = None,
    checks: ChecksConfig | None = None,
    today: object = None,
    workers: int | None = None,
) -> Reports:
    r"""Read every report source into counts (all versions), rejects and match tables.

    Parameters
    ----------
    specs : Config, ReportSpec or list of ReportSpec
        The ``[[reports]]`` tables of a config. Given a whole ``Config``, its ``[matching]``,
        ``[checks]``, alias table and region calendar are used unless passed here.
    units : pandas.DataFrame
        All units (both levels), as from :func:`marchland.read_units`.
    aliases : path or DataFrame, optional
        ``country,alias,unit_id`` names a person has confirmed.
    calendar : {"iso", "sunday"}
        The analysis calendar; every count's ``week`` is the first day of one of its weeks.
        A source week of the other calendar goes to the analysis week holding its middle day.
    matching, checks : optional
        Fuzzy-match thresholds and words to strip; what to do with deaths > cases.
    today : date-like, optional
        Weeks after this (or after the row's received date) are rejected as "future-week".
        Default: today's date.
    workers : int, optional
        Processes reading sources at once (this one and forked copies; results are the same
        with any number). Default: the config's ``[compute]`` workers when given a whole
        ``Config`` without a Dask scheduler, else 1.

    Returns
    -------
    Reports
        ``.counts .rejects .matches .completeness .completeness_by_country .accounting``.

    Raises
    ------
    InputError
        A file cannot be read or lacks a configured column (the error names file and column).
        Problems in single rows never raise: they become rejects.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> from marchland.config import ReportSpec, ReportColumns
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> _ = (d / "w.csv").write_text(
    ...     "district,week_start,cases,received\n"
    ...     "Ast,2026-01-05,3,2026-01-12\n"
    ...     "Bel,2026-01-05,-1,2026-01-12\n"
    ...     ",,,\n"
    ...     "Nowhere,2026-01-05,2,2026-01-12\n")
    >>> spec = ReportSpec(name="t", path=str(d / "w.csv"), files=(d / "w.csv",),
    ...                   country="TVR", zeros="explicit", columns=ReportColumns(
    ...                   place="district", week="week_start", cases="cases",
    ...                   received="received"))
    >>> units = pd.DataFrame({"name": ["Ast", "Bel"], "country": "TVR", "level": 2},
    ...                      index=pd.Index(["TVR-01-01", "TVR-01-02"], name="unit_id"))
    >>> r = read_reports(spec, units, today="2026-06-01")
    >>> r.counts[["unit_id", "cases"]].values.tolist()
    [['TVR-01-01', 3]]
    >>> r.rejects[["row", "reason"]].values.tolist()
    [[3, 'negative'], [4, 'blank'], [5, 'unknown-place']]
    >>> r.accounting[["rows_in", "counted", "rejected"]].values.tolist()
    [[4, 1, 3]]
    """
    from ..config.schema import CALENDARS, ChecksConfig, Config, MatchingConfig, ReportSpec

    if isinstance(specs, Config):
        cfg = specs
        specs = cfg.reports
        matching = matching or cfg.matching
        checks = checks or cfg.checks
        aliases = aliases if aliases is not None else cfg.matching.aliases
        calendar = cfg.region.calendar
        if workers is None and getattr(cfg.compute, "scheduler", None) is None:
            workers = get_executor(cfg.compute).workers
    elif isinstance(specs, ReportSpec):
        specs = [specs]
    if calendar not in CALENDARS:
        raise ValueError(
            f"'calendar' needs to be one of {CALENDARS}. {calendar!r} was given instead."
        )
    matching = matching or MatchingConfig()
    checks = checks or ChecksConfig()
    today = pd.Timestamp(today if today is not None else pd.Timestamp.now()).normalize()
    alias_table = load_aliases(aliases, units)
    specs = list(specs)

    def one(i: int) -> tuple[pd.DataFrame, pd.DataFrame, pd.DataFrame, dict]:
        return _read_source(
            specs[i], f"reports[{i}]", units, alias_table, calendar, matching, checks, today
        )

    # Sources are independent: local forked copies share them (results in source order, the
    # same with any number of workers; one worker, or no fork on this platform: one by one).
    results = share_tasks(one, len(specs), workers=max(1, workers or 1))
    return _assemble(results, units, specs, calendar)


def _assemble(
    results: list, units: pd.DataFrame, specs: Sequence[ReportSpec], calendar: str
) -> Reports:
    count_cols = [*COUNT_COLUMNS, *EXTRA_COUNT_COLUMNS]
    parts = [r[0] for r in results if len(r[0])]
    # Each source's frame goes once it is in the whole (the caller's list lets go of it too).
    results[:] = [(None, *r[1:]) for r in results]
    # Categories shared by every part, so they stay categories when put together (sorted, as
    # a category of the whole would be).
    for col in _LABEL_COLUMNS:
        cats = sorted(set().union(*(p[col].cat.categories for p in parts)))
        parts = [p.assign(**{col: p[col].cat.set_categories(cats)}) for p in parts]
    counts = pd.concat(parts, ignore_index=True) if parts else _empty(count_cols)
    del parts
    counts = counts.astype({"cases": "Int64", "deaths": "Int64", "row": "Int64", "implied": bool})
    counts["week"] = pd.to_datetime(counts["week"]).astype("datetime64[ns]")
    counts["received"] = pd.to_datetime(counts["received"]).astype("datetime64[ns]")
    # A handful of sources, files and sheets repeated on millions of rows: categories hold
    # them as small codes (at 50,000 units about 200 MB less than one string per row).
    counts = counts.astype({c: "category" for c in _LABEL_COLUMNS})
    counts = counts.sort_values(["unit_id", "week", "received"], kind="stable")
    counts = counts.reset_index(drop=True)
    rejects = [r[1] for r in results if len(r[1])]
    rejects = (pd.concat(rejects, ignore_index=True) if rejects else _empty(REJECT_COLUMNS)).loc[
        :, list(REJECT_COLUMNS)
    ]
    rejects["row"] = rejects["row"].astype("Int64")
    matches = [r[2] for r in results if len(r[2])]
    matches = pd.concat(matches, ignore_index=True) if matches else _empty(MATCH_COLUMNS)
    accounting = (
        pd.DataFrame([r[3] for r in results]).set_index("source")
        if results
        else (
            _empty(
                ["source", "country", "shape", "level", "files", "rows_in", "counted", "rejected"]
            ).set_index("source")
        )
    )
    unit, country = reporting_completeness(counts, units, specs)
    return Reports(
        counts=counts,
        rejects=rejects,
        matches=matches,
        completeness=unit,
        completeness_by_country=country,
        accounting=accounting,
    )
