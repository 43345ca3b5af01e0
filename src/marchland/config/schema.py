"""The TOML configuration as frozen dataclasses, checked once when loaded.

Every key of ``demo_data/scenario.toml`` has a field here. Unknown keys and values of the wrong
type are rejected by name (``reports[2].columns.cases``) with a
:class:`~marchland.errors.ConfigError` that names the file; relative paths are resolved
against the config file's folder and must exist. Every optional key has a default, so a small
config is enough to start with.
"""

from __future__ import annotations

import datetime as _dt
from dataclasses import dataclass, field
from pathlib import Path

CALENDARS = ("iso", "sunday")
SHAPES = ("weekly", "workbook", "linelist")
ZEROS = ("explicit", "cases-only")
WEEK_FORMATS = ("date", "iso-week", "year-week")
DATE_BASES = ("onset", "report")
DEATHS_OVER_CASES = ("reject", "cap")
SAME_DAY_CONFLICTS = ("reject", "last-row")
THOUSANDS = (",", ".", " ", "'", "\u00a0")
WEIGHTINGS = ("binary", "shared")
LEVELS = (1, 2)

SECTIONS = (
    "region",
    "boundaries",
    "population",
    "reports",
    "matching",
    "checks",
    "graph",
    "analysis",
    "risk",
    "supplies",
    "output",
    "compute",
)


# --- the dataclasses ---------------------------------------------------------------------
@dataclass(frozen=True)
class RegionConfig:
    """``[region]``: name, working CRS, analysis calendar, seed, default as-of lag."""

    name: str = "region"
    crs: str | None = None
    calendar: str = "iso"
    seed: int = 0
    as_of_lag_days: int = 3


@dataclass(frozen=True)
class BoundarySource:
    """One ``[[boundaries]]`` table: a boundary file and how its columns map to ours.

    ``country`` is a fixed code or ``country_column`` names a column; likewise ``level`` or
    ``level_column``. ``parent`` names the column with the parent unit's id. ``country_name``
    is the country's name for maps and the report (with a fixed ``country`` only).
    """

    path: Path
    id: str
    name: str
    layer: str | None = None
    country: str | None = None
    country_column: str | None = None
    level: int | None = None
    level_column: str | None = None
    parent: str | None = None
    country_name: str | None = None


@dataclass(frozen=True)
class PopulationConfig:
    """``[population]``: a raster (zonal sums) or a table (``id_column``, ``value_column``)."""

    raster: Path | None = None
    table: Path | None = None
    id_column: str = "unit_id"
    value_column: str = "population"


@dataclass(frozen=True)
class ReportColumns:
    """``[reports.columns]``: our field = the source's column name (``None``: not present)."""

    place: str | None = None
    code: str | None = None
    week: str | None = None
    year: str | None = None
    cases: str | None = None
    deaths: str | None = None
    received: str | None = None
    onset: str | None = None
    report_date: str | None = None
    outcome: str | None = None


@dataclass(frozen=True)
class ReportSpec:
    """One ``[[reports]]`` table: a report source (a file or a glob of files).

    ``files`` are the matched files, sorted (each file is one transmission); ``path`` is the
    pattern as resolved. ``received_date`` is a fixed received date for sources without a
    received column. ``date_format`` is a ``strftime`` format for dates (``None``: ISO dates,
    and day-first for ``dd/mm/yyyy`` style text).
    """

    name: str
    path: str
    files: tuple[Path, ...]
    country: str
    shape: str = "weekly"
    level: int = 2
    zeros: str = "cases-only"
    calendar: str = "iso"
    week_format: str = "date"
    sheets: str = "*"
    date_basis: str = "onset"
    date_format: str | None = None
    received_date: _dt.date | None = None
    died_values: tuple[str, ...] = ("died",)
    # The source's thousands separator in counts ("1,204"); None: counts are plain digits.
    thousands: str | None = None
    columns: ReportColumns = field(default_factory=ReportColumns)


@dataclass(frozen=True)
class MatchingConfig:
    """``[matching]``: alias table and the fuzzy-match thresholds (rapidfuzz WRatio, 0-100)."""

    aliases: Path | None = None
    fuzzy_score: float = 88.0
    fuzzy_margin: float = 5.0
    strip_words: tuple[str, ...] = ("district of", "province of", "district", "province")


@dataclass(frozen=True)
class ChecksConfig:
    """``[checks]``: how doubtful rows are treated.

    ``deaths_over_cases``: "reject" the row or "cap" deaths at cases. ``same_day_conflict``:
    two rows for one unit-week received the same day with different counts are both rejected
    ("reject") or the later row wins ("last-row"). ``earliest_date``/``latest_date``: dates
    outside are rejected as implausible (default: 10 years before the run's date, and a year
    after it). ``max_rejected_share``: ``check`` fails for a source rejecting more than this
    share of its rows (a source with every row rejected always fails).
    """

    deaths_over_cases: str = "reject"
    same_day_conflict: str = "reject"
    earliest_date: _dt.date | None = None
    latest_date: _dt.date | None = None
    max_rejected_share: float = 0.5


@dataclass(frozen=True)
class GraphConfig:
    """``[graph]``: gap tolerance, corner rule (``min_shared_m``, 0: any), links, weighting."""

    tolerance_m: float = 300.0
    min_shared_m: float = 0.0
    links: Path | None = None
    weighting: str = "shared"


@dataclass(frozen=True)
class AnalysisConfig:
    """``[analysis]``: permutation count, FDR level, windows, reporting delay, CFR minimum."""

    permutations: int = 999
    fdr: float = 0.05
    windows_weeks: tuple[int, ...] = (4,)
    reporting_delay_weeks: int = 2
    min_cases_cfr: int = 10


@dataclass(frozen=True)
class RiskCovariate:
    """One ``[[risk.covariates]]`` table: an extra unit-level feature of the border-risk model.

    ``name`` becomes the model feature and its ``part_<name>`` column. The value comes from a
    ``raster`` (the area-weighted zonal mean over each analysis unit, nodata left out) or a
    ``table`` (``id_column``, ``value_column``; district rows of a country analysed by
    province are averaged to the province, weighted by population).
    """

    name: str
    raster: Path | None = None
    table: Path | None = None
    id_column: str = "unit_id"
    value_column: str = "value"


@dataclass(frozen=True)
class RiskConfig:
    """``[risk]``: horizon, silence threshold, top-k for hits, and the model's options.

    ``recent_weeks``, ``reintroduction_weeks`` and ``penalty`` are the keyword options of
    :func:`marchland.risk.score.border_risk` of the same names, with the same defaults.
    ``reintroduction_weeks`` is ``None`` (TOML: 0 or absent) for "off": only never-affected units
    are candidates. ``covariates`` are the ``[[risk.covariates]]`` tables, in order.
    """

    horizon_weeks: int = 4
    silent_weeks: int = 3
    top_k: int = 10
    min_events: int = 10
    # Weeks of incidence behind the pressure features (and each half of growth).
    recent_weeks: int = 3
    # Reported case-free weeks after which an affected unit is a candidate again (spread's
    # re-introduction rule); None: off.
    reintroduction_weeks: int | None = None
    # Ridge penalty on the standardised coefficients; 0 is the plain maximum-likelihood fit.
    penalty: float = 1.0
    # Extra features from rasters or tables; none by default.
    covariates: tuple[RiskCovariate, ...] = ()


#: Share of cases planned as severe when the config gives none. An assumed planning value
#: (common practice for cholera planning, recalled from memory), not taken from a source; set
#: what your national guideline says. The one definition: the supplies stage uses it too.
#: The border-risk model's built-in features, in order (``part_<name>`` columns follow it). They
#: live here because the config reserves them: a ``[[risk.covariates]]`` name may not repeat one.
FEATURES = (
    "near_pressure",
    "far_pressure",
    "cross_share",
    "growth",
    "distance_km",
    "log_population",
)
#: Features computed for the baselines only.
EXTRA_FEATURES = ("affected_neighbours",)

DEFAULT_SEVERE_SHARE = 0.2
#: Quantile of the 4-week forecast case total that supply quantities for affected districts are
#: sized to: 0.9 plans for a load exceeded in about 1 of 10 simulated futures (a planning
#: choice, common practice for an upper planning figure; set your own).
DEFAULT_FORECAST_QUANTILE = 0.9


@dataclass(frozen=True)
class PlanningRates:
    """Planning attack rates (share of population) for the low / mid / high scenarios."""

    low: float = 0.001
    mid: float = 0.003
    high: float = 0.008


@dataclass(frozen=True)
class SuppliesConfig:
    """``[supplies]``: item table, depot candidates, number of depots, reach, planning rates.

    ``severe_share`` is the share of cases planned as severe (may also be given inside
    ``planning_attack_rate``). ``forecast_quantile`` is the quantile of the forecast 4-week
    case total that quantities for districts already affected are sized to (0.5 to below 1).
    """

    items: Path | None = None
    depots: Path | None = None
    k: int = 3
    reach_km: float = 120.0
    planning_attack_rate: PlanningRates = field(default_factory=PlanningRates)
    severe_share: float = DEFAULT_SEVERE_SHARE
    forecast_quantile: float = DEFAULT_FORECAST_QUANTILE


@dataclass(frozen=True)
class OutputConfig:
    """``[output]``: the folder monthly bundles go to (``DIR/YYYY-MM/``), the atlas paper."""

    dir: Path = Path("out")
    paper: str = "a4"  # every atlas page this size, landscape: one of PAPER_SIZES


# Landscape page sizes in inches (ISO 216 A4: 297 x 210 mm; US Letter: 11 x 8.5 in).
PAPER_SIZES = {"a4": (297 / 25.4, 210 / 25.4), "letter": (11.0, 8.5)}


@dataclass(frozen=True)
class ComputeConfig:
    """``[compute]``: where parallel steps run (see :mod:`marchland.compute`).

    ``scheduler`` is the address of a running Dask scheduler (``tcp://host:8786``); ``None``
    runs on this machine with ``workers`` processes (``None``: one per CPU this process may use).
    """

    scheduler: str | None = None
    workers: int | None = None


@dataclass(frozen=True)
class Config:
    """A whole validated configuration; ``path`` is the TOML file it came from."""

    path: Path | None
    region: RegionConfig
    boundaries: tuple[BoundarySource, ...]
    population: PopulationConfig
    reports: tuple[ReportSpec, ...]
    matching: MatchingConfig
    checks: ChecksConfig
    graph: GraphConfig
    analysis: AnalysisConfig
    risk: RiskConfig
    supplies: SuppliesConfig
    output: OutputConfig
    compute: ComputeConfig = field(default_factory=ComputeConfig)

    @property
    def base_dir(self) -> Path:
        """The folder relative paths are resolved against."""
        return self.path.parent if self.path is not None else Path.cwd()

    @property
    def country_names(self) -> dict[str, str]:
        """Country code -> name, from the ``country_name`` of the ``[[boundaries]]`` tables."""
        return {
            b.country: b.country_name
            for b in self.boundaries
            if b.country is not None and b.country_name is not None
        }

    def country_label(self, code: str) -> str:
        """Return ``"Name (CODE)"`` for a country with a name in the config, else the code.

        Examples
        --------
        >>> from marchland.demo import scenario_path
        >>> from marchland.config import load_config
        >>> cfg = load_config(scenario_path())
        >>> cfg.country_label("TVR"), cfg.country_label("XYZ")
        ('Tavrenne (TVR)', 'XYZ')
        """
        name = self.country_names.get(str(code))
        return f"{name} ({code})" if name else str(code)
