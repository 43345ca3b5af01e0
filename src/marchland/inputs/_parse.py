"""Reading report tables and parsing their values, vectorised; helpers of ``reports``.

Every table comes back as text-like objects with its data rows numbered from 1 (per sheet
for workbooks), blank lines kept, so that each row can be accounted for. ``parse_table`` turns
one table into parsed rows (place, week, counts, received) each carrying the first problem
found in it (``reason``, ``column``, ``value``); the checks that need the whole source (place
matching, duplicates) follow in ``reports``.
"""

from __future__ import annotations

import fnmatch
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np
import pandas as pd

from ..errors import InputError
from .weeks import convert_weeks, from_year_week, parse_year_week, week_start

if TYPE_CHECKING:  # pragma: no cover
    from ..config.schema import ReportSpec

# Day-first forms tried after ISO 8601 when a source names no date_format (US month-first
# dates need date_format = "%m/%d/%Y").
_DAY_FIRST = ("%d/%m/%Y", "%d.%m.%Y", "%d-%m-%Y", "%d/%m/%y")


def read_tables(path: Path, sheets: str = "*") -> list[tuple[str, pd.DataFrame]]:
    """Read a CSV (one table) or a workbook (one table per sheet matching ``sheets``).

    Returns ``[(sheet_name_or_"", frame)]``; cells are objects, blanks are NaN or "".
    """
    suffix = path.suffix.lower()
    try:
        if suffix in (".xlsx", ".xlsm", ".xls"):
            book = pd.read_excel(path, sheet_name=None, dtype=object)
            out = [(str(k), v) for k, v in book.items() if fnmatch.fnmatchcase(str(k), sheets)]
            if not out:
                raise InputError(
                    f"no sheet matches {sheets!r}; the workbook has {list(book)}", file=path
                )
            return out
        try:
            frame = pd.read_csv(
                path, dtype=str, keep_default_na=False, skip_blank_lines=False, encoding="utf-8-sig"
            )
        except UnicodeDecodeError:
            frame = pd.read_csv(
                path, dtype=str, keep_default_na=False, skip_blank_lines=False, encoding="latin-1"
            )
        return [("", frame)]
    except InputError:
        raise
    except pd.errors.EmptyDataError:
        return [("", pd.DataFrame())]
    except Exception as exc:  # pandas, openpyxl and csv raise many types for unreadable files
        raise InputError(f"cannot read the report file: {exc}", file=path) from None


_NS_MIN, _NS_MAX = pd.Timestamp.min.ceil("D"), pd.Timestamp.max.floor("D")


def text(s: pd.Series) -> pd.Series:
    """Cells as stripped strings; blanks become <NA>."""
    out = s.astype("string").str.strip()
    return out.mask(out == "")


def dates(s: pd.Series, fmt: str | None = None) -> pd.Series:
    """Parse dates: ``fmt`` if given, else ISO 8601 then common day-first forms; NaT if not."""
    t = text(s)
    if fmt:
        out = pd.to_datetime(t, format=fmt, errors="coerce")
    else:
        out = pd.to_datetime(t, format="ISO8601", errors="coerce")
        for f in _DAY_FIRST:
            rest = out.isna() & t.notna()
            if not rest.any():
                break
            out = out.where(~rest, pd.to_datetime(t.where(rest), format=f, errors="coerce"))
    # pandas may parse a date outside the nanosecond range (year 0, 9999) at a coarser unit;
    # such a date cannot be a report's, so it is unparseable rather than a crash.
    inside = out.notna() & (out >= _NS_MIN) & (out <= _NS_MAX)
    return out.where(inside).dt.normalize().astype("datetime64[ns]")


def whole_numbers(s: pd.Series) -> tuple[pd.Series, np.ndarray, np.ndarray]:
    """Parse counts. Returns (Int64 values, blank mask, unparseable mask)."""
    t = text(s)
    blank = t.isna().to_numpy()
    num = pd.to_numeric(t.str.replace(r"[\s\u00a0]", "", regex=True), errors="coerce")
    num = num.astype("float64")
    bad = ~blank & ~(np.isfinite(num) & (num == np.round(num))).to_numpy()
    vals = num.where(~bad & ~blank).astype("Int64")
    return vals, blank, bad


def require_columns(
    frame: pd.DataFrame, wanted: dict[str, str], file: Path, sheet: str, key: str
) -> pd.DataFrame:
    """Check the configured columns exist (headers compared after stripping spaces)."""
    frame = frame.rename(columns=lambda c: str(c).strip())
    missing = [(f, c) for f, c in wanted.items() if c not in frame.columns]
    if missing:
        field, col = missing[0]
        where = f" (sheet {sheet!r})" if sheet else ""
        raise InputError(
            f"column {col!r} ({key}.columns.{field}) is not in the file{where}; it has "
            f"{list(frame.columns)}",
            file=file,
            column=col,
        )
    return frame


# --- one table into parsed rows, each with its first problem --------------------------------
def flag(df: pd.DataFrame, mask, reason: str, column: str | None, value=None) -> None:
    """Give ``reason`` to rows that match ``mask`` and have no reason yet (first one wins)."""
    m = np.asarray(mask, dtype=bool) & df["reason"].isna().to_numpy()
    if not m.any():
        return
    df.loc[m, "reason"] = reason
    df.loc[m, "column"] = column or ""
    if value is None:
        df.loc[m, "value"] = ""
    else:
        v = pd.Series(value, index=df.index) if np.ndim(value) else pd.Series(value, df.index)
        df.loc[m, "value"] = v[m].astype("string").fillna("").to_numpy()


def _get(frame: pd.DataFrame, col: str | None) -> pd.Series:
    """Return a column of the stripped table (all <NA> when the source has no such column)."""
    if col is None:
        return pd.Series(pd.NA, index=range(len(frame)), dtype="string")
    return frame[col]


def _dates_lenient(s: pd.Series, fmt: str | None) -> pd.Series:
    # A configured format first; ISO 8601 dates are unambiguous, so accept them too.
    out = dates(s, fmt)
    return out.where(out.notna(), dates(s)) if fmt else out


def parse_table(
    frame: pd.DataFrame,
    spec: ReportSpec,
    key: str,
    file: Path,
    sheet: str,
    calendar: str,
    today: pd.Timestamp,
) -> pd.DataFrame:
    """Parse one table of a report source; rows keep their first problem as ``reason``."""
    c = spec.columns
    fields = (
        "place",
        "code",
        "week",
        "year",
        "cases",
        "deaths",
        "received",
        "onset",
        "report_date",
        "outcome",
    )
    wanted = {f: getattr(c, f) for f in fields if getattr(c, f)}
    frame = require_columns(frame, wanted, file, sheet, key).reset_index(drop=True)
    # Every cell as stripped text once; blanks become <NA>.
    frame = frame.apply(text) if frame.shape[1] else frame
    n = len(frame)
    df = pd.DataFrame({"file": file.name, "sheet": sheet, "row": np.arange(1, n + 1)})
    df["reason"] = pd.Series([None] * n, dtype=object)
    df["column"] = ""
    df["value"] = ""
    df["place"] = _get(frame, c.place)
    df["code"] = _get(frame, c.code)
    empty = frame.isna().all(axis=1).to_numpy() if frame.shape[1] else np.ones(n, dtype=bool)
    flag(df, empty, "blank", "")
    flag(df, df["place"].isna() & df["code"].isna(), "missing-value", c.place or c.code)
    linelist = spec.shape == "linelist"
    if linelist:
        dcol = c.onset if spec.date_basis == "onset" else c.report_date
        raw = _get(frame, dcol)
        when = _dates_lenient(raw, spec.date_format)
        flag(df, raw.isna(), "missing-value", dcol)
        flag(df, when.isna(), "unparseable", dcol, raw)
        src = week_start(when, spec.calendar)
        wcol = dcol
    else:
        wcol = c.week
        raw = _get(frame, c.week)
        flag(df, raw.isna(), "missing-value", c.week)
        if spec.week_format == "date":
            when = _dates_lenient(raw, spec.date_format)
            src = week_start(when, spec.calendar)
        elif spec.week_format == "iso-week":
            src = parse_year_week(raw, spec.calendar)
        else:
            yr = _get(frame, c.year)
            flag(df, yr.isna(), "missing-value", c.year)
            src = from_year_week(yr, raw, spec.calendar)
            flag(
                df,
                src.isna() & pd.to_numeric(yr, errors="coerce").isna(),
                "unparseable",
                c.year,
                yr,
            )
        flag(df, src.isna(), "unparseable", c.week, raw)
        when = src
        cases, blank, bad = whole_numbers(_get(frame, c.cases))
        flag(df, blank, "missing-value", c.cases)
        flag(df, bad, "unparseable", c.cases, _get(frame, c.cases))
        df["cases"] = cases.to_numpy()
        df["_raw_cases"] = _get(frame, c.cases).to_numpy()
        if c.deaths:
            deaths, _, bad = whole_numbers(_get(frame, c.deaths))
            flag(df, bad, "unparseable", c.deaths, _get(frame, c.deaths))
            df["deaths"] = deaths.to_numpy()
            df["_raw_deaths"] = _get(frame, c.deaths).to_numpy()
        else:
            df["deaths"] = pd.array([pd.NA] * n, dtype="Int64")
    rcol = c.received or (c.report_date if linelist else None)
    if rcol:
        rraw = _get(frame, rcol)
        received = _dates_lenient(rraw, spec.date_format)
        flag(df, rraw.isna(), "missing-value", rcol)
        flag(df, received.isna(), "unparseable", rcol, rraw)
    else:
        received = pd.Series(pd.Timestamp(spec.received_date), index=df.index)
    df["received"] = received.to_numpy()
    df["week"] = convert_weeks(src, spec.calendar, calendar).to_numpy()
    # Future: a week that starts after the report was received, or after today.
    limit = np.minimum(received.fillna(today).to_numpy(), np.datetime64(today, "ns"))
    df["_future"] = (when.to_numpy() > limit) & when.notna().to_numpy()
    df["_future_col"] = wcol
    df["_future_val"] = raw.to_numpy()
    if linelist:
        if c.outcome:
            died = {v.casefold().strip() for v in spec.died_values}
            df["died"] = _get(frame, c.outcome).str.casefold().isin(died).fillna(False).to_numpy()
        df["_key"] = pd.util.hash_pandas_object(frame.fillna(""), index=False).to_numpy()
    return df
