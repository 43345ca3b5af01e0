"""Reading report tables and parsing their values, vectorised; helpers of ``reports``.

Every table comes back as text-like objects with its data rows numbered from 1 (per sheet
for workbooks), blank lines kept, so that each row can be accounted for.
"""

from __future__ import annotations

import fnmatch
from pathlib import Path

import numpy as np
import pandas as pd

from .errors import InputError

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
    return out.dt.normalize().astype("datetime64[ns]")


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
