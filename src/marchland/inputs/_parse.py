"""Reading report tables and parsing their values, vectorised; helpers of ``reports``.

Every table comes back as text-like objects with its data rows numbered from 1 (per sheet
for workbooks), blank lines kept, so that each row can be accounted for. ``parse_table`` turns
one table into parsed rows (place, week, counts, received) each carrying the first problem
found in it (``reason``, ``column``, ``value``); the checks that need the whole source (place
matching, duplicates) follow in ``reports``.
"""

from __future__ import annotations

import csv
import fnmatch
import io
import re
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np
import pandas as pd

from ..errors import InputError
from .weeks import convert_weeks, from_year_week, parse_year_week, week_start

if TYPE_CHECKING:  # pragma: no cover
    from ..config.schema import ReportSpec

# Date forms a source may declare that an ISO date is not; a date in one of them but not in
# the declared format is ambiguous (day-first or month-first) and is rejected, never guessed.
_OTHER_FORMS = ("%d/%m/%Y", "%m/%d/%Y", "%d.%m.%Y", "%d-%m-%Y", "%d/%m/%y", "%m/%d/%y")
# ISO 8601 calendar date, optionally with a time (workbook date cells come as "... 00:00:00").
_ISO_DATE = r"^(\d{4}-\d{2}-\d{2})(?:[ T]\d{2}:\d{2}(?::\d{2}(?:\.\d+)?)?)?$"
# A count: digits only (at most 9: more cases than that is no district's weekly report).
_COUNT = r"^\d{1,9}$"
_BOMS = (
    (b"\xff\xfe\x00\x00", "utf-32"),
    (b"\x00\x00\xfe\xff", "utf-32"),
    (b"\xef\xbb\xbf", "utf-8-sig"),
    (b"\xff\xfe", "utf-16"),
    (b"\xfe\xff", "utf-16"),
)
#: Name of the ``DataFrame.attrs`` entry holding rows with the wrong number of fields.
BAD_FIELDS = "bad_fields"


def _decode(path: Path, raw: bytes) -> str:
    """Decode UTF-8 (with or without BOM) or BOM-marked UTF-16/32; refuse anything else."""
    for bom, enc in _BOMS:
        if raw.startswith(bom):
            try:
                return raw.decode(enc)
            except UnicodeDecodeError as exc:
                raise InputError(
                    f"the file starts with a {enc.upper()} byte-order mark but is not valid "
                    f"{enc.upper()} (byte {exc.start})",
                    file=path,
                ) from None
    try:
        return raw.decode("utf-8")
    except UnicodeDecodeError as exc:
        bad = raw[exc.start : exc.start + 1].hex()
        hint = (
            "UTF-16/32 without a byte-order mark"
            if raw[:200].count(0) > 10
            else "a single-byte code page such as Windows-1252 or Latin-1"
        )
        raise InputError(
            f"the file is not UTF-8 (byte 0x{bad} at offset {exc.start}); it looks like {hint}. "
            "Save it as UTF-8 (or UTF-16/32 with a byte-order mark)",
            file=path,
        ) from None


def _csv_table(path: Path) -> pd.DataFrame:
    """Read a CSV with the standard library so that a malformed row stays one row.

    pandas' tokenizer stops at the first row with too many fields (and shifts every column
    when the first data row has one field more than the header); here such a row is kept as
    all-blank, with its field count in ``attrs[BAD_FIELDS]`` for the parser to reject it.
    A trailing delimiter on every non-blank data row (and not on the header) is dropped.
    """
    text_ = _decode(path, path.read_bytes())
    if "\x00" in text_:
        raise InputError("the file holds NUL bytes; it is not a text table", file=path)
    try:
        records = list(csv.reader(io.StringIO(text_, newline="")))
    except csv.Error as exc:
        raise InputError(f"not a readable CSV table: {exc}", file=path) from None
    if not records:
        return pd.DataFrame()
    header = [h.strip() for h in records[0]]
    rows = records[1:]
    n = len(header)
    lengths = np.fromiter(map(len, rows), dtype=np.int64, count=len(rows))
    if (lengths == n + 1).any():  # only then can every filled row end in a delimiter
        filled = [r for r in rows if any(c.strip() for c in r)]
        if filled and all(len(r) == n + 1 and not r[-1].strip() for r in filled):
            rows = [r[:n] if len(r) == n + 1 else r for r in rows]
            lengths = np.fromiter(map(len, rows), dtype=np.int64, count=len(rows))
    seen: dict[str, int] = {}
    names = []
    for h in header:  # repeated headers get ".1", ".2" as pandas names them
        k = seen.get(h, 0)
        names.append(h if k == 0 else f"{h}.{k}")
        seen[h] = k + 1
    bad: dict[int, int] = {}
    cells = rows
    if (lengths != n).any():  # rows of the right length go in as they are (most files)
        cells = []
        for i, r in enumerate(rows):
            if len(r) == n or not any(c.strip() for c in r):
                cells.append((r + [""] * n)[:n])
            else:
                bad[i] = len(r)
                cells.append([""] * n)
    frame = (
        pd.DataFrame(cells, columns=names, dtype=object)
        if n
        else pd.DataFrame(index=range(len(rows)))
    )
    frame.attrs[BAD_FIELDS] = {"rows": bad, "expected": n}
    return frame


def _cell(v: object) -> object:
    # Excel stores every number as a float: a whole number cell reads as 3.0, shown as 3.
    if isinstance(v, float) and v.is_integer() and abs(v) < 1e15:
        return int(v)
    return v


def read_tables(path: Path, sheets: str = "*") -> list[tuple[str, pd.DataFrame]]:
    """Read a CSV (one table) or a workbook (one table per sheet matching ``sheets``).

    Returns ``[(sheet_name_or_"", frame)]``; cells are objects, blanks are NaN or "".
    Empty sheets are left out.
    """
    suffix = path.suffix.lower()
    if suffix not in (".xlsx", ".xlsm", ".xls"):
        try:
            return [("", _csv_table(path))]
        except OSError as exc:
            raise InputError(f"cannot read the report file: {exc.strerror}", file=path) from None
    try:
        book = pd.read_excel(path, sheet_name=None, dtype=object)
    except OSError as exc:
        raise InputError(f"cannot read the report file: {exc.strerror}", file=path) from None
    except Exception:  # openpyxl, zipfile and xlrd raise many types for a broken workbook
        raise InputError(
            "cannot read the workbook: empty, truncated or not really an Excel file", file=path
        ) from None
    out = [
        (str(k), pd.DataFrame({c: pd.array([_cell(x) for x in v[c]], dtype=object) for c in v}))
        for k, v in book.items()
        if fnmatch.fnmatchcase(str(k), sheets) and v.shape[1]
    ]
    if not out:
        raise InputError(
            f"no non-empty sheet matches {sheets!r}; the workbook has {list(book)}", file=path
        )
    return out


_NS_MIN, _NS_MAX = pd.Timestamp.min.ceil("D"), pd.Timestamp.max.floor("D")


def text(s: pd.Series) -> pd.Series:
    """Cells as stripped strings; blanks become <NA>."""
    fast = _text_cells(s.to_numpy(dtype=object))
    if fast is not None:
        return pd.Series(fast, index=s.index, name=s.name, copy=False)
    out = s.astype("string").str.strip()
    return out.mask(out == "")


def text_frame(frame: pd.DataFrame) -> pd.DataFrame:
    """:func:`text` on every column, in one pass where every cell is text or missing."""
    n = len(frame)
    fast = _text_cells(frame.to_numpy(dtype=object).ravel(order="F")) if frame.shape[1] else None
    if fast is None:
        return frame.apply(text) if frame.shape[1] else frame
    cols = {i: fast[i * n : (i + 1) * n] for i in range(frame.shape[1])}
    out = pd.DataFrame(cols, index=frame.index, copy=False)
    out.columns = frame.columns
    return out


def _text_cells(cells: np.ndarray) -> pd.api.extensions.ExtensionArray | None:
    """Strip text cells with pyarrow in one call; None if any cell is not text or missing.

    The same as ``astype("string").str.strip()`` then blanks to <NA> (pandas' string dtype
    strips with this pyarrow kernel too), without pandas' per-call overhead, which dominated
    the reading of small report tables. Numbers and dates (from workbooks) take the pandas
    path, which writes them as pandas does.
    """
    import pyarrow as pa
    import pyarrow.compute as pc

    try:
        arr = pa.array(cells, from_pandas=True)
    except (pa.ArrowInvalid, pa.ArrowTypeError, OverflowError):  # e.g. a 2**63 in a workbook
        return None
    if arr.type == pa.null():
        arr = arr.cast(pa.string())
    if arr.type != pa.string():  # numbers, dates, bytes, mixtures
        return None
    t = pc.utf8_trim_whitespace(arr)
    t = pc.if_else(pc.equal(t, ""), pa.scalar(None, pa.string()), t)
    return pd.array(t, dtype="string")


def _strict(t: pd.Series, fmt: str) -> pd.Series:
    out = pd.to_datetime(t, format=fmt, errors="coerce")
    # Outside pandas' nanosecond range (year 1, 9999): no report's date; NaT, not a crash.
    inside = out.notna() & (out >= _NS_MIN) & (out <= _NS_MAX)
    return out.where(inside).astype("datetime64[ns]")


def parse_dates(s: pd.Series, fmt: str | None = None) -> tuple[pd.Series, np.ndarray]:
    """Parse dates in the declared format (ISO 8601 always accepted besides it).

    Returns (dates, ambiguous): NaT where a cell is not a date in those forms; ``ambiguous``
    marks cells that would be a date in another common form (e.g. 10/05/2026 in an ISO
    source), which are rejected rather than guessed.
    """
    t = text(s)
    # Report files repeat a few dates over thousands of rows: parse each distinct cell once.
    codes, uniq = pd.factorize(t)
    if len(uniq) < len(t):
        u, amb_u = parse_dates(pd.Series(uniq, name=t.name), fmt)
        # A blank cell's code is -1: the value appended last (NaT, not ambiguous).
        out = np.append(u.to_numpy("datetime64[ns]"), np.datetime64("NaT", "ns"))[codes]
        amb = np.append(amb_u, False)[codes]
        return pd.Series(out, index=t.index, name=u.name), amb
    iso = t.str.extract(_ISO_DATE, expand=False)
    out = _strict(iso, "%Y-%m-%d")
    if fmt:
        rest = out.isna() & t.notna()
        if rest.any():
            out = out.where(~rest, _strict(t.where(rest), fmt))
    amb = np.zeros(len(t), dtype=bool)
    rest = (out.isna() & t.notna()).to_numpy()
    if rest.any():
        for f in _OTHER_FORMS:
            if f != fmt:
                amb |= rest & _strict(t.where(rest), f).notna().to_numpy()
    return out.dt.normalize(), amb


def dates(s: pd.Series, fmt: str | None = None) -> pd.Series:
    """Parse dates (see :func:`parse_dates`); NaT where not a date in the declared forms."""
    return parse_dates(s, fmt)[0]


def whole_numbers(
    s: pd.Series, thousands: str | None = None
) -> tuple[pd.Series, np.ndarray, np.ndarray]:
    """Parse counts: plain digits (grouped by ``thousands`` if the source declares one).

    Returns (Int64 values, blank mask, unparseable mask). ``1e3``, ``12.5``, ``3 cases`` and
    numbers of more than nine digits are unparseable; ``-4`` parses (and is rejected later as
    negative).
    """
    t = text(s)
    # Counts repeat (mostly small numbers): parse each distinct cell once.
    codes, uniq = pd.factorize(t)
    if len(uniq) < len(t):
        u, _blank_u, bad_u = whole_numbers(pd.Series(uniq, name=t.name), thousands)
        vals = pd.Series(u.array.take(codes, allow_fill=True), index=t.index, name=u.name)
        return vals, codes < 0, np.append(bad_u, False)[codes]
    blank = t.isna().to_numpy()
    if thousands:
        grouped = t.str.fullmatch(r"-?\d{1,3}(?:" + re.escape(thousands) + r"\d{3})+")
        t = t.where(~grouped.fillna(False), t.str.replace(thousands, "", regex=False))
    neg = t.str.startswith("-").fillna(False)
    digits = t.str.removeprefix("-")
    good = digits.str.fullmatch(_COUNT).fillna(False).to_numpy()
    bad = ~blank & ~good
    vals = pd.Series(pd.NA, index=t.index, dtype="Int64")
    if good.any():
        v = digits[good].astype("int64")
        vals[good] = v.where(~neg[good], -v).to_numpy()
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
        if len(missing) == len(wanted):
            # None of the configured columns: most likely not this report table at all (a
            # wrong path or a stray file matched by a pattern). Its first line is not echoed:
            # it may be any text, and messages end up in logs.
            raise InputError(
                f"the configured columns ({key}.columns) are not in the file{where}; it does "
                f"not look like this report table ({len(frame.columns)} column(s) in its first "
                "line)",
                file=file,
                column=col,
            )
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


def _dates_checked(
    df: pd.DataFrame, raw: pd.Series, fmt: str | None, col: str, window: tuple
) -> pd.Series:
    """Parse a date column, flag missing, ambiguous, unparseable and implausible dates.

    Dates outside ``window`` come back NaT, so no week arithmetic runs near pandas' limits.
    """
    when, amb = parse_dates(raw, fmt)
    flag(df, raw.isna(), "missing-value", col)
    flag(df, amb, "ambiguous-date", col, raw)
    flag(df, when.isna(), "unparseable", col, raw)
    lo, hi = window
    out = when.notna() & ((when < lo) | (when > hi))
    flag(df, out, "implausible-date", col, raw)
    return when.where(~out)


def parse_table(
    frame: pd.DataFrame,
    spec: ReportSpec,
    key: str,
    file: Path,
    sheet: str,
    calendar: str,
    today: pd.Timestamp,
    window: tuple[pd.Timestamp, pd.Timestamp] | None = None,
) -> pd.DataFrame:
    """Parse one table of a report source; rows keep their first problem as ``reason``.

    ``row`` is the row as a spreadsheet numbers it (the header is row 1). ``window`` is the
    plausible range of dates (default: 10 years before ``today`` to a year after).
    """
    if window is None:
        window = (today - pd.DateOffset(years=10), today + pd.DateOffset(years=1))
    bad_fields = frame.attrs.get(BAD_FIELDS, {"rows": {}, "expected": frame.shape[1]})
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
    frame = text_frame(frame)
    n = len(frame)
    df = pd.DataFrame({"file": file.name, "sheet": sheet, "row": np.arange(2, n + 2)})
    df["reason"] = pd.Series([None] * n, dtype=object)
    df["column"] = ""
    df["value"] = ""
    if bad_fields["rows"]:
        pos = np.fromiter(bad_fields["rows"], dtype=int)
        got = pd.Series(bad_fields["rows"]).astype(str)
        mask = np.zeros(n, dtype=bool)
        mask[pos] = True
        shown = pd.Series("", index=df.index, dtype=object)
        shown.iloc[pos] = (got + f" fields, header has {bad_fields['expected']}").to_numpy()
        flag(df, mask, "wrong-field-count", "", shown)
    df["place"] = _get(frame, c.place)
    df["code"] = _get(frame, c.code)
    empty = frame.isna().all(axis=1).to_numpy() if frame.shape[1] else np.ones(n, dtype=bool)
    flag(df, empty, "blank", "")
    flag(df, df["place"].isna() & df["code"].isna(), "missing-value", c.place or c.code)
    linelist = spec.shape == "linelist"
    if linelist:
        dcol = c.onset if spec.date_basis == "onset" else c.report_date
        raw = _get(frame, dcol)
        when = _dates_checked(df, raw, spec.date_format, dcol, window)
        src = week_start(when, spec.calendar)
        wcol = dcol
    else:
        wcol = c.week
        raw = _get(frame, c.week)
        flag(df, raw.isna(), "missing-value", c.week)
        if spec.week_format == "date":
            when = _dates_checked(df, raw, spec.date_format, c.week, window)
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
        if spec.week_format != "date":
            out = src.notna() & ((src < window[0]) | (src > window[1]))
            flag(df, out, "implausible-date", c.week, raw)
            src = src.where(~out)
        when = src
        thousands = getattr(spec, "thousands", None)
        cases, blank, bad = whole_numbers(_get(frame, c.cases), thousands)
        flag(df, blank, "missing-value", c.cases)
        flag(df, bad, "unparseable", c.cases, _get(frame, c.cases))
        df["cases"] = cases.to_numpy()
        df["_raw_cases"] = _get(frame, c.cases).to_numpy()
        if c.deaths:
            deaths, _, bad = whole_numbers(_get(frame, c.deaths), thousands)
            flag(df, bad, "unparseable", c.deaths, _get(frame, c.deaths))
            df["deaths"] = deaths.to_numpy()
            df["_raw_deaths"] = _get(frame, c.deaths).to_numpy()
        else:
            df["deaths"] = pd.array([pd.NA] * n, dtype="Int64")
    rcol = c.received or (c.report_date if linelist else None)
    if rcol:
        rraw = _get(frame, rcol)
        received = _dates_checked(df, rraw, spec.date_format, rcol, window)
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
