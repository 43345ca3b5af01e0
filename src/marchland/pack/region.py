"""A region's inputs, read once: analysis units, counts, rejects and the border graph.

:func:`open_region` is the one call a notebook makes to get everything the analyses need;
:func:`check` reads the same inputs source by source and says what was read, used and
rejected, without stopping at the first source that cannot be read.
"""

from __future__ import annotations

import os
import warnings
from dataclasses import dataclass
from functools import cached_property
from typing import TYPE_CHECKING, Any

import pandas as pd

from ..config.load import load_config
from ..config.schema import Config
from ..errors import DataWarning, InputError
from ..inputs.reports import REASONS, Reports, read_reports, reporting_completeness

if TYPE_CHECKING:  # pragma: no cover
    import geopandas as gpd

    from ..graph.border import BorderGraph


@dataclass(frozen=True, eq=False)
class Region:
    """Everything read from a config's inputs.

    Attributes
    ----------
    config : Config
    units : geopandas.GeoDataFrame
        Analysis units (per country the level it reports at) with ``population``, in the
        working equal-area CRS; indexed by ``unit_id``.
    all_units : geopandas.GeoDataFrame
        Every unit of every boundary file (both levels), with ``population``.
    counts : pandas.DataFrame
        Counts on analysis-unit ids, every version received (use
        :func:`marchland.inputs.reports.as_of` for the data as known on a date).
    rejects, matches, completeness, completeness_by_country, accounting : pandas.DataFrame
        As in :class:`marchland.inputs.reports.Reports` (place ids at each source's own level).
    reports : Reports
        The reports as read, on each source's own unit ids.
    graph : BorderGraph
        The cross-border contiguity graph over ``units``, built on first use.
    """

    config: Config
    units: gpd.GeoDataFrame
    all_units: gpd.GeoDataFrame
    counts: pd.DataFrame
    rejects: pd.DataFrame
    matches: pd.DataFrame
    completeness: pd.DataFrame
    completeness_by_country: pd.DataFrame
    accounting: pd.DataFrame
    reports: Reports

    @cached_property
    def graph(self) -> BorderGraph:
        """The border graph of the analysis units (links lifted to analysis units)."""
        from ..graph.build import border_graph

        g = self.config.graph
        return border_graph(
            self.units,
            tolerance=g.tolerance_m,
            links=g.links,
            min_shared_m=g.min_shared_m,
            parents=self.all_units["parent_id"],
        )

    @cached_property
    def _risk_covariates(self) -> pd.DataFrame | None:
        from ._steps import risk_covariates

        return risk_covariates(self.config, self)

    def as_of(self, month: str | pd.Period) -> pd.Timestamp:
        """Return the date the monthly run reads a month's data as received by.

        The month's last day plus the config's ``region.as_of_lag_days`` (what ``marchland
        run`` uses without ``--as-of``).

        Parameters
        ----------
        month : str or pandas.Period
            ``YYYY-MM``.

        Returns
        -------
        pandas.Timestamp

        Examples
        --------
        >>> import warnings
        >>> from marchland.demo import scenario_path
        >>> with warnings.catch_warnings():
        ...     warnings.simplefilter("ignore")
        ...     region = open_region(scenario_path())
        >>> region.as_of("2026-10")
        Timestamp('2026-11-03 00:00:00')
        """
        from .monthly import default_as_of

        return default_as_of(self.config, month)

    def settings(self, function: str) -> dict[str, Any]:
        """Return the config's keyword settings for an API function, as the monthly run uses them.

        Spread them into the call (``ml.hotspots(cases, pop, region.graph,
        **region.settings("hotspots"))``) and a notebook gets the report's numbers exactly:
        same permutations, seed, false discovery rate, graph weighting, risk options and
        covariates. The config is the one source of these settings.

        Parameters
        ----------
        function : str
            One of :data:`SETTINGS_FOR`.

        Returns
        -------
        dict
            Keyword arguments (a new dict each call).

        Raises
        ------
        ValueError
            An unknown function name (the message lists the known ones).

        Examples
        --------
        >>> import warnings
        >>> from marchland.demo import scenario_path
        >>> with warnings.catch_warnings():
        ...     warnings.simplefilter("ignore")
        ...     region = open_region(scenario_path())
        >>> sorted(region.settings("hotspots"))
        ['fdr', 'permutations', 'seed', 'weighting']
        """
        from ._steps import risk_options

        cfg = self.config
        a = cfg.analysis
        seed = cfg.region.seed
        if function not in SETTINGS_FOR:
            raise ValueError(
                f"'function' needs to be one of {sorted(SETTINGS_FOR)}; {function!r} was given "
                "instead."
            )
        if function in ("hotspots", "global_moran_rate", "local_moran"):
            return {
                "permutations": a.permutations,
                "seed": seed,
                "fdr": a.fdr,
                "weighting": cfg.graph.weighting,
            }
        if function == "getis_ord":
            return {"permutations": a.permutations, "seed": seed, "fdr": a.fdr}
        if function == "window_counts":
            return {"windows_weeks": tuple(a.windows_weeks), "units": self.units.index}
        if function == "spread_velocity":
            return {"seed": seed}
        if function == "border_risk":
            return {
                "silent_weeks": cfg.risk.silent_weeks,
                "covariates": self._risk_covariates,
                **risk_options(cfg.risk),
            }
        # choose_depots
        return {"k": cfg.supplies.k, "reach_km": cfg.supplies.reach_km, "units": self.units}


# The API functions whose settings come from the config (Region.settings).
SETTINGS_FOR = (
    "border_risk",
    "choose_depots",
    "getis_ord",
    "global_moran_rate",
    "hotspots",
    "local_moran",
    "spread_velocity",
    "window_counts",
)


def _population(cfg: Config, units: gpd.GeoDataFrame) -> pd.Series:
    from ..inputs.population import population_from_table, zonal_population

    p = cfg.population
    if p.raster is not None:
        return zonal_population(units, p.raster)
    if p.table is not None:
        return population_from_table(
            units, p.table, id_column=p.id_column, value_column=p.value_column
        )
    raise InputError(
        "the config gives no population: set [population] raster or table",
        file=cfg.path,
        column="population",
    )


def open_region(config: Config | str | os.PathLike[str], *, today: object = None) -> Region:
    """Read a region: boundaries, population, reports; choose analysis units; move counts.

    Parameters
    ----------
    config : Config or path
        A loaded config or the path of its TOML file.
    today : date-like, optional
        Report weeks after this date are rejected as "future-week" (see
        :func:`marchland.read_reports`); default today's date.

    Returns
    -------
    Region
        ``.units`` (analysis units), ``.counts`` (on analysis units, every version),
        ``.rejects``, ``.matches``, ``.completeness``, ``.accounting`` and ``.graph``.

    Raises
    ------
    InputError
        Any input that cannot be used (the message names file, row and column); a unit with
        cases but zero or missing population.

    Examples
    --------
    >>> import warnings
    >>> from marchland.demo import scenario_path
    >>> with warnings.catch_warnings():
    ...     warnings.simplefilter("ignore")
    ...     region = open_region(scenario_path())
    >>> region.units.groupby("country")["level"].first().to_dict()
    {'MRW': 2, 'OSK': 1, 'QLN': 2, 'TVR': 2}
    """
    from ..inputs.population import require_population
    from ..inputs.units import analysis_units, counts_to_analysis, units_from_config

    cfg = load_config(config)
    units = units_from_config(cfg)
    units = units.assign(population=_population(cfg, units))
    rep = read_reports(cfg, units, today=today)
    acc = rep.accounting
    dropped = acc.index[(acc["rows_in"] > 0) & (acc["counted"] == 0)]
    if len(dropped):
        # A country must never drop out of the analysis silently (e.g. shifted columns).
        name = dropped[0]
        why = rep.rejects.loc[rep.rejects["source"] == name, "reason"].value_counts()
        spec = next(s for s in cfg.reports if s.name == name)
        raise InputError(
            f"every row of report source {name!r} was rejected (most common: "
            f"{why.index[0]} {int(why.iloc[0])}); run 'marchland check' for the rows",
            file=spec.path,
        )
    analysis = analysis_units(units, rep.counts)
    counts = counts_to_analysis(rep.counts, units, analysis)
    require_population(analysis["population"], counts)
    return Region(
        config=cfg,
        units=analysis,
        all_units=units,
        counts=counts,
        rejects=rep.rejects,
        matches=rep.matches,
        completeness=rep.completeness,
        completeness_by_country=rep.completeness_by_country,
        accounting=rep.accounting,
        reports=rep,
    )


# --- check ---------------------------------------------------------------------------------
@dataclass(frozen=True, eq=False)
class CheckReport:
    """What ``marchland check`` found, source by source.

    Attributes
    ----------
    sources : pandas.DataFrame
        One row per input source (index ``source``): ``kind`` (boundaries, population,
        reports), ``path``, ``status`` ("ok" or "error"), ``message``, and for report sources
        ``country level shape rows_in used rejected fuzzy_matches first_week last_week
        weeks`` and one column per reject reason (``REASONS``).
    rejected_by_reason : pandas.DataFrame
        Rejected rows per source (rows) and reason (columns).
    fuzzy : pandas.DataFrame
        Fuzzy matches accepted (``source country place unit_id score rows``), for a person to
        confirm into the alias table.
    completeness : pandas.DataFrame
        Per country: share of expected unit-weeks reported, gap weeks, last report received.
    units : pandas.DataFrame
        Per country: units per level, the analysis level and population total.
    rejects : pandas.DataFrame
        Every rejected row (``source file sheet row column value reason candidates``).
    notes : tuple of str
        Warnings worth a person's attention that did not stop the reading (geometries
        repaired, units only partly covered by the population raster).
    ok : bool
        False if any source could not be read at all.
    border_left_out : pandas.DataFrame or None
        Pairs of analysis units from different boundary files or countries that come within
        the gap tolerance but that the border graph did not join (``BorderGraph.left_out``);
        None when the graph could not be built. Add a real one to the links table.
    border_short_joins : pandas.DataFrame or None
        Pairs joined across a gap that face each other along less than the gap tolerance
        (``BorderGraph.short_joins``): corners where a border meets a country missing from the
        data can look like this. Raise ``[graph] min_shared_m`` above a false one's facing
        length to leave it out.
    """

    sources: pd.DataFrame
    rejected_by_reason: pd.DataFrame
    fuzzy: pd.DataFrame
    completeness: pd.DataFrame
    units: pd.DataFrame
    rejects: pd.DataFrame
    notes: tuple[str, ...]
    ok: bool
    border_left_out: pd.DataFrame | None = None
    border_short_joins: pd.DataFrame | None = None

    def to_text(self) -> str:
        """Summarise the check as plain text for the terminal, one block per kind of input."""
        lines: list[str] = []
        for name, r in self.sources.iterrows():  # a handful of sources, not data rows
            flag = "ok " if r["status"] == "ok" else "ERR"
            if r["kind"] != "reports" or r["status"] != "ok":
                msg = r["message"] or os.path.basename(str(r["path"]))
                lines.append(f"[{flag}] {r['kind']:<10} {name}: {msg}")
                continue
            lines.append(
                f"[{flag}] reports    {name} ({r['country']}, {r['shape']}, level "
                f"{int(r['level'])}): {int(r['rows_in'])} rows read, {int(r['used'])} used, "
                f"{int(r['rejected'])} rejected; weeks {r['first_week']} to {r['last_week']} "
                f"({int(r['weeks'])} weeks); {int(r['fuzzy_matches'])} fuzzy matches"
            )
            why = [f"{k} {int(r[k])}" for k in REASONS if r.get(k, 0)]
            if why:
                lines.append(f"           rejected: {', '.join(why)}")
        src = self.sources[self.sources["kind"] == "reports"]
        if len(src):
            lines.append(
                f"All report sources: {int(src['rows_in'].sum())} rows read = "
                f"{int(src['used'].sum())} used + {int(src['rejected'].sum())} rejected."
            )
        if len(self.rejects):
            shown = self.rejects.head(_SHOW_REJECTS)
            lines.append("Rejected rows:")
            for r in shown.itertuples():  # at most _SHOW_REJECTS lines
                where = f"{r.file}" + (f" sheet {r.sheet}" if r.sheet else "")
                col = f", column {r.column!r}" if r.column else ""
                val = f", value {r.value!r}" if r.value else ""
                cand = f" (nearest: {r.candidates})" if r.candidates else ""
                lines.append(f"  {where}, row {r.row}{col}{val}: {r.reason}{cand}")
            if len(self.rejects) > len(shown):
                lines.append(f"  ... and {len(self.rejects) - len(shown)} more")
        for n in self.notes:
            lines.append(f"Note: {n}")
        if len(self.fuzzy):
            lines.append("Fuzzy matches accepted (confirm them into the alias table):")
            for _, f in self.fuzzy.iterrows():
                lines.append(
                    f"  {f['source']}: {f['place']!r} -> {f['unit_id']} (score {f['score']:.0f}, "
                    f"{int(f['rows'])} rows)"
                )
        if len(self.units):
            lines.append("Units per country:")
            for c, u in self.units.iterrows():
                pop = "" if pd.isna(u["population"]) else f", population {u['population']:,.0f}"
                lines.append(
                    f"  {c}: {int(u['level_1'])} provinces, {int(u['level_2'])} districts; "
                    f"analysed at level {int(u['analysis_level'])}{pop}"
                )
        if len(self.completeness):
            lines.append("Reporting completeness (share of expected unit-weeks reported):")
            for c, k in self.completeness.iterrows():
                last = "never" if pd.isna(k["last_received"]) else k["last_received"].date()
                lines.append(
                    f"  {c}: {k['share']:.0%} of {int(k['expected_weeks'])} unit-weeks; "
                    f"{int(k['gap_weeks'])} weeks with no report; last received {last}"
                )
        from ._checkgraph import pair_lines

        lines += pair_lines(self.border_left_out, self.border_short_joins, _SHOW_REJECTS)
        lines.append(
            "All sources read." if self.ok else "Some sources could not be read (see ERR above)."
        )
        lines.append(
            "Decision support, not a diagnosis: reporting is incomplete and delayed; small "
            "numbers are unstable."
        )
        return "\n".join(lines)


_SHOW_REJECTS = 30

_SOURCE_COLUMNS = [
    "kind",
    "path",
    "status",
    "message",
    "country",
    "level",
    "shape",
    "rows_in",
    "used",
    "rejected",
    "fuzzy_matches",
    "first_week",
    "last_week",
    "weeks",
    *REASONS,
]


def _row(kind: str, path: object, status: str = "ok", message: str = "", **kw) -> dict:
    return {"kind": kind, "path": str(path), "status": status, "message": message, **kw}


def check(config: Config | str | os.PathLike[str], *, run_date: object = None) -> CheckReport:
    """Read every input of a config, source by source, and account for each row.

    A source that cannot be read is reported (``status="error"`` with the one-line reason)
    and the others are still read; ``.ok`` is then False.

    Parameters
    ----------
    config : Config or path
    run_date : date-like, optional
        Report weeks starting after this date are rejected as "future-week" (as in a run);
        default today's date. Give the run's date to check a past month as it was run.

    Returns
    -------
    CheckReport

    Examples
    --------
    >>> from marchland.demo import scenario_path
    >>> report = check(scenario_path())
    >>> report.ok, int(report.sources["rows_in"].sum()) == int(
    ...     (report.sources["used"] + report.sources["rejected"]).sum())
    (True, True)
    """
    from ..inputs.units import analysis_levels, units_from_config

    cfg = load_config(config)
    rows: dict[str, dict] = {}
    units = None
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", DataWarning)
        try:
            units = units_from_config(cfg)
            for b in cfg.boundaries:
                n = int((units["source"] == str(b.path)).sum())
                rows[os.path.basename(b.path)] = _row("boundaries", b.path, message=f"{n} units")
        except InputError as exc:
            rows["boundaries"] = _row("boundaries", exc.file or "", "error", str(exc))
        if units is not None and (cfg.population.raster or cfg.population.table):
            path = cfg.population.raster or cfg.population.table
            try:
                pop = _population(cfg, units)
                units = units.assign(population=pop)
                msg = f"population of the districts {pop[units['level'] == 2].sum():,.0f}"
                rows["population"] = _row("population", path, message=msg)
            except InputError as exc:
                rows["population"] = _row("population", path, "error", str(exc))
    notes = [str(w.message) for w in caught if issubclass(w.category, DataWarning)]
    parts: list[Reports] = []
    if units is not None:
        for spec in cfg.reports:
            try:
                rep = read_reports(
                    [spec],
                    units,
                    aliases=cfg.matching.aliases,
                    calendar=cfg.region.calendar,
                    matching=cfg.matching,
                    checks=cfg.checks,
                    today=run_date,
                )
            except InputError as exc:
                rows[spec.name] = _row(
                    "reports",
                    spec.path,
                    "error",
                    str(exc),
                    country=spec.country,
                    level=spec.level,
                    shape=spec.shape,
                )
                continue
            parts.append(rep)
            a = rep.accounting.loc[spec.name]
            weeks = rep.counts["week"]
            reasons = rep.rejects["reason"].value_counts()
            status, message = _rejected_status(a, reasons, cfg.checks.max_rejected_share)
            rows[spec.name] = _row(
                "reports",
                spec.path,
                status,
                message,
                country=spec.country,
                level=spec.level,
                shape=spec.shape,
                rows_in=int(a["rows_in"]),
                used=int(a["counted"]),
                rejected=int(a["rejected"]),
                fuzzy_matches=int((rep.matches["method"] == "fuzzy").sum()),
                first_week=weeks.min().date() if len(weeks) else None,
                last_week=weeks.max().date() if len(weeks) else None,
                weeks=int(weeks.nunique()),
                **{k: int(reasons.get(k, 0)) for k in REASONS},
            )
    if units is not None and cfg.risk.covariates:
        rows.update(_covariate_rows(cfg, units, parts))
    sources = pd.DataFrame.from_dict(rows, orient="index").reindex(columns=_SOURCE_COLUMNS)
    sources.index.name = "source"
    for c in ["rows_in", "used", "rejected", "fuzzy_matches", "weeks", *REASONS]:
        sources[c] = sources[c].fillna(0).astype(int)
    rep_sources = sources[sources["kind"] == "reports"]
    by_reason = rep_sources.loc[:, list(REASONS)]
    if parts:
        matches = pd.concat([p.matches for p in parts], ignore_index=True)
        rejects = pd.concat([p.rejects for p in parts], ignore_index=True)
        counts = pd.concat([p.counts for p in parts], ignore_index=True)
        read = [s for s in cfg.reports if s.name in set(counts["source"])]
        completeness = reporting_completeness(counts, units, read)[1]
    else:
        matches = pd.DataFrame(columns=["source", "method"])
        rejects = pd.DataFrame()
        counts = pd.DataFrame(columns=["unit_id"])
        completeness = pd.DataFrame()
    fuzzy = matches.loc[matches["method"] == "fuzzy"]
    fuzzy = fuzzy.reindex(columns=["source", "country", "place", "unit_id", "score", "rows"])
    unit_table = pd.DataFrame()
    if units is not None:
        lev = analysis_levels(units, counts)
        unit_table = pd.DataFrame(
            {
                "level_1": (units["level"] == 1).groupby(units["country"]).sum(),
                "level_2": (units["level"] == 2).groupby(units["country"]).sum(),
                "analysis_level": lev,
                "population": units.loc[units["level"] == 2, "population"]
                .groupby(units["country"])
                .sum(min_count=1),
            }
        )
    left_out = short_joins = None
    if units is not None:
        from ._checkgraph import border_pairs

        left_out, short_joins = border_pairs(cfg, units, counts, rows, notes)
        sources = pd.concat(
            [sources, pd.DataFrame.from_dict({"graph": rows["graph"]}, orient="index")]
        ).reindex(columns=_SOURCE_COLUMNS)
        sources.index.name = "source"
        for c in ["rows_in", "used", "rejected", "fuzzy_matches", "weeks", *REASONS]:
            sources[c] = sources[c].fillna(0).astype(int)
    ok = bool((sources["status"] == "ok").all()) and units is not None
    return CheckReport(
        sources=sources,
        rejected_by_reason=by_reason,
        fuzzy=fuzzy,
        completeness=completeness,
        units=unit_table,
        rejects=rejects,
        notes=tuple(notes),
        ok=ok,
        border_left_out=left_out,
        border_short_joins=short_joins,
    )


def _rejected_status(acct: pd.Series, reasons: pd.Series, max_share: float) -> tuple[str, str]:
    """Give a source's check status: one rejecting every row (or > ``max_share``) fails."""
    n, rejected = int(acct["rows_in"]), int(acct["rejected"])
    if n == 0 or rejected <= max_share * n and int(acct["counted"]) > 0:
        return "ok", ""
    top = ", ".join(f"{k} {int(v)}" for k, v in reasons.head(3).items())
    what = "every row" if rejected == n else f"{rejected} of {n} rows ({rejected / n:.0%})"
    return "error", (
        f"{what} rejected (more than checks.max_rejected_share = {max_share:g}); most common: {top}"
    )


def _covariate_rows(cfg: Config, units: pd.DataFrame, parts: list[Reports]) -> dict[str, dict]:
    """Open each border-risk covariate on the analysis units, as the monthly run will."""
    from ..inputs.population import covariate_values
    from ..inputs.units import analysis_units

    counts = pd.concat([p.counts for p in parts], ignore_index=True) if parts else None
    rows: dict[str, dict] = {}
    try:
        analysis = analysis_units(
            units, counts if counts is not None else pd.DataFrame({"unit_id": []})
        )
    except InputError as exc:
        return {"covariates": _row("covariate", exc.file or "", "error", str(exc))}
    for cv in cfg.risk.covariates:
        path = cv.raster if cv.raster is not None else cv.table
        try:
            v = covariate_values(cv, analysis, units)
        except InputError as exc:
            rows[f"covariate {cv.name}"] = _row("covariate", path, "error", str(exc))
            continue
        msg = f"{int(v.notna().sum())} units, values {v.min():.3g} to {v.max():.3g}"
        rows[f"covariate {cv.name}"] = _row("covariate", path, message=msg)
    return rows
