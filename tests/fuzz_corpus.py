"""A seeded mutator of the demo's report files, shared by the fuzz test and its benchmark.

Each case takes one of the demo's report sources (a weekly CSV, the Sunday-calendar table, the
line list, the workbook), cut to a few dozen rows, and applies one or two mutations: other
encodings, truncation, byte flips, column swaps, hostile strings, extreme numbers and dates,
malformed rows, same-day conflicts, workbook oddities. :func:`run_case` reads the mutated
source in-process as ``marchland check`` does and returns what went wrong, if anything: an
unexpected exception, broken row accounting, a reject without file/row/column, or a CSV cell
a spreadsheet would run as a formula.
"""

from __future__ import annotations

import csv
import dataclasses
import io
import warnings
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from marchland.config.load import load_config
from marchland.demo import scenario_path
from marchland.errors import DataWarning, InputError

TODAY = pd.Timestamp("2026-11-03")
ROWS = 30

HOSTILE = (
    '=HYPERLINK("http://x","y")',
    "+1+1",
    "-2+3",
    "@SUM(A1:A2)",
    "\t=1",
    "[bold]x[/bold]",
    "[/]",
    "'; DROP TABLE x;--",
    "\u202eevil",
    "x" * 5000,
    "\U0001f600",
    '"',
    "a\nb",
    "NaN",
    "None",
)
NUMBERS = (
    "9223372036854775808",
    "1e308",
    "-1",
    "1e3",
    "12.5",
    "3 cases",
    "1,204",
    "inf",
    "-0",
    "0x10",
    "99999999999999999999999",
    "١٢",
)
DATES = (
    "0001-01-01",
    "9999-12-31",
    "1500",
    "-1",
    "1677-09-22",
    "2262-04-10",
    "2262-04-11",
    "10/05/2026",
    "05/10/2026",
    "2026-02-30",
    "2026-W99",
    "2026-W1000000000000",
    "99999-W10",
    "2263",
    "1e308",
)
MUTATIONS = (
    "encoding",
    "truncate",
    "flip",
    "swap",
    "hostile",
    "number",
    "date",
    "extra-field",
    "missing-field",
    "trailing-delimiter",
    "first-row-extra",
    "conflict",
    "blank-lines",
    "header-only",
)
BOOK_MUTATIONS = ("readme-sheet", "empty-sheet", "corrupt", "empty-file", "cells")


@dataclass(frozen=True)
class Case:
    """One fuzz case: the source it mutates and the mutations, from a seed."""

    seed: int
    source: str
    mutations: tuple[str, ...]


def _base(cfg) -> dict:
    """Source name -> (spec, first rows of its first file as a table)."""
    out = {}
    for spec in cfg.reports:
        f = spec.files[0]
        if f.suffix == ".xlsx":
            book = pd.read_excel(f, sheet_name=None, dtype=object)
            book = {k: v.head(ROWS // 3) for k, v in list(book.items())[-3:]}
            out[spec.name] = (spec, book)
        else:
            out[spec.name] = (spec, pd.read_csv(f, dtype=str, keep_default_na=False).head(ROWS))
    return out


class Corpus:
    """The demo's sources, read once; :meth:`case` and :meth:`run` build and read mutants."""

    def __init__(self) -> None:
        from marchland.inputs.units import units_from_config

        self.cfg = load_config(scenario_path())
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", DataWarning)
            self.units = units_from_config(self.cfg)
        self.base = _base(self.cfg)

    def cases(self, n: int, seed: int = 0) -> list[Case]:
        """``n`` cases from ``seed``: each source in turn, one or two mutations each."""
        rng = np.random.default_rng(seed)
        names = sorted(self.base)
        out = []
        for i in range(n):
            name = names[i % len(names)]
            pool = MUTATIONS + (BOOK_MUTATIONS if name.startswith("osk") else ())
            k = 1 + int(rng.random() < 0.3)
            muts = tuple(str(m) for m in rng.choice(pool, size=k, replace=False))
            out.append(Case(int(rng.integers(2**31)), name, muts))
        return out

    # --- making a mutant file ------------------------------------------------------------
    def write(self, case: Case, folder: Path) -> Path:
        """Write the mutated source file for ``case`` into ``folder``."""
        rng = np.random.default_rng(case.seed)
        spec, base = self.base[case.source]
        if isinstance(base, dict):
            return self._write_book(case, rng, base, folder / f"{case.source}.xlsx")
        table = base.copy()
        rows = [list(table.columns), *table.to_numpy().tolist()]
        enc = "utf-8"
        data_bytes = None
        for m in case.mutations:
            rows, enc = _mutate_rows(m, rows, rng, enc)
        text = _to_csv(rows, rng, case.mutations)
        data_bytes = _encode(text, enc, rng)
        for m in case.mutations:
            data_bytes = _mutate_bytes(m, data_bytes, rng)
        path = folder / f"{case.source}.csv"
        path.write_bytes(data_bytes)
        return path

    def _write_book(self, case: Case, rng, book: dict, path: Path) -> Path:
        book = {k: v.copy() for k, v in book.items()}
        muts = set(case.mutations)
        if muts & {"hostile", "number", "date", "cells", "swap"}:
            for v in book.values():
                for _ in range(3):
                    r, c = int(rng.integers(len(v))), int(rng.integers(v.shape[1]))
                    pool = HOSTILE + NUMBERS + DATES + (2**63, 1e308, -1.5, float("nan"))
                    v.iat[r, c] = pool[int(rng.integers(len(pool)))]
        if "readme-sheet" in muts:
            book["README"] = pd.DataFrame({"About": ["These are the weekly totals", "=1+1"]})
        if "empty-sheet" in muts:
            book["Summary"] = pd.DataFrame()
        with pd.ExcelWriter(path) as w:
            for k, v in book.items():
                v.to_excel(w, sheet_name=k, index=False)
        raw = path.read_bytes()
        if "corrupt" in muts:
            cut = int(rng.integers(1, len(raw)))
            raw = raw[:cut]
        if "empty-file" in muts:
            raw = b""
        if muts & {"flip", "truncate"}:
            raw = _mutate_bytes("flip" if "flip" in muts else "truncate", raw, rng)
        path.write_bytes(raw)
        return path

    # --- reading it as check does ------------------------------------------------------------
    def run(self, case: Case, folder: Path) -> list[str]:
        """Read the mutant; return the problems found (empty: the case passed)."""
        from marchland.inputs.reports import read_reports
        from marchland.pack.bundle import _csv

        spec, _ = self.base[case.source]
        path = self.write(case, folder)
        spec = dataclasses.replace(spec, files=(path,), path=str(path))
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore", DataWarning)
                rep = read_reports(
                    [spec],
                    self.units,
                    aliases=self.cfg.matching.aliases,
                    calendar=self.cfg.region.calendar,
                    matching=self.cfg.matching,
                    checks=self.cfg.checks,
                    today=TODAY,
                )
        except InputError as exc:
            if path.name not in str(exc):
                return [f"{case}: refusal does not name the file: {exc}"]
            return []
        except Exception as exc:  # what the fuzz corpus is for
            return [f"{case}: unexpected {type(exc).__name__}: {exc}"[:500]]
        problems = []
        a = rep.accounting.loc[spec.name]
        expect = _rows_in_oracle(path, spec.columns.cases or spec.columns.place)
        if a["rows_in"] != a["counted"] + a["rejected"] or a["rows_in"] != expect:
            problems.append(f"{case}: accounting {a.to_dict()} vs {expect} rows in the file")
        rj = rep.rejects
        nameless = rj["file"].eq("") | rj["row"].isna() | (rj["row"] < 2)
        no_column = rj["column"].eq("") & ~rj["reason"].isin(
            ["blank", "duplicate", "wrong-field-count"]
        )
        if (nameless | no_column).any():
            problems.append(f"{case}: reject without file/row/column: {rj[nameless | no_column]}")
        for name, table in (("rejects", rj), ("matches", rep.matches)):
            out = folder / f"{name}.csv"
            _csv(table, out, index=False)
            bad = formula_cells(out)
            if bad:
                problems.append(f"{case}: {name}.csv formula-leading cells {bad[:3]}")
        return problems


def formula_cells(path: Path) -> list[str]:
    """Cells of a CSV a spreadsheet would read as a formula."""
    with open(path, newline="", encoding="utf-8") as f:
        return [
            c for row in csv.reader(f) for c in row if c[:1] in ("=", "+", "-", "@", "\t", "\r")
        ]


def _rows_in_oracle(path: Path, column: str) -> int:
    """Data rows: CSV records after the header (standard library), or rows of the sheets
    holding ``column`` (pandas' reading of the workbook)."""
    if path.suffix == ".xlsx":
        book = pd.read_excel(path, sheet_name=None, dtype=object)
        return sum(len(v) for v in book.values() if column in v.columns.astype(str).str.strip())
    raw = path.read_bytes()
    for bom, enc in ((b"\xff\xfe\x00\x00", "utf-32"), (b"\x00\x00\xfe\xff", "utf-32"),
                     (b"\xef\xbb\xbf", "utf-8-sig"), (b"\xff\xfe", "utf-16"),
                     (b"\xfe\xff", "utf-16")):  # fmt: skip
        if raw.startswith(bom):
            text = raw.decode(enc)
            break
    else:
        text = raw.decode("utf-8")
    return max(len(list(csv.reader(io.StringIO(text, newline="")))) - 1, 0)


def _pick(rng, pool):
    return pool[int(rng.integers(len(pool)))]


def _mutate_rows(m: str, rows: list[list], rng, enc: str) -> tuple[list[list], str]:
    rows = [list(r) for r in rows]
    n, w = len(rows), len(rows[0])
    r = int(rng.integers(1, n)) if n > 1 else 0
    c = int(rng.integers(w))
    if m == "encoding":
        enc = _pick(rng, ("utf-8-sig", "utf-16", "utf-32", "utf-16-le", "cp1252", "utf-8"))
        rows[r][c] = "Saint-Éloi"
    elif m == "swap":
        a, b = rng.choice(w, size=2, replace=False)
        for row in rows[1:]:
            row[a], row[b] = row[b], row[a]
    elif m == "hostile":
        _scatter(rows, HOSTILE, rng)
    elif m == "number":
        _scatter(rows, NUMBERS, rng)
    elif m == "date":
        _scatter(rows, DATES, rng)
    elif m == "extra-field":
        rows[r] = rows[r] + ["extra"]
    elif m == "missing-field":
        rows[r] = rows[r][:-1]
    elif m == "first-row-extra" and n > 1:
        rows[1] = rows[1] + ["7"]
    elif m == "conflict" and n > 1:
        twin = list(rows[r])
        twin = [str(int(v) + 1) if str(v).isdigit() and i != 0 else v for i, v in enumerate(twin)]
        rows.insert(r + 1, twin)
    elif m == "blank-lines":
        rows.insert(r, [])
        rows.insert(r, [""] * w)
    elif m == "header-only":
        rows = rows[:1]
    return rows, enc


def _scatter(rows: list[list], pool: tuple, rng) -> None:
    """Put three values of ``pool`` into random cells of the data rows."""
    for _ in range(3 if len(rows) > 1 else 0):
        row = rows[int(rng.integers(1, len(rows)))]
        if row:
            row[int(rng.integers(len(row)))] = _pick(rng, pool)


def _to_csv(rows: list[list], rng, muts: tuple[str, ...]) -> str:
    buf = io.StringIO()
    wr = csv.writer(buf, lineterminator=_pick(rng, ("\n", "\r\n")))
    for i, row in enumerate(rows):
        if "trailing-delimiter" in muts and i > 0 and row:
            row = [*row, ""]
        wr.writerow(row)
    return buf.getvalue()


def _encode(text: str, enc: str, rng) -> bytes:
    try:
        return text.encode(enc)
    except UnicodeEncodeError:
        return text.encode(enc, errors="replace")


def _mutate_bytes(m: str, raw: bytes, rng) -> bytes:
    if not raw:
        return raw
    if m == "truncate":
        return raw[: int(rng.integers(0, len(raw)))]
    if m == "flip":
        b = bytearray(raw)
        for _ in range(int(rng.integers(1, 6))):
            b[int(rng.integers(len(b)))] = int(rng.integers(256))
        return bytes(b)
    return raw
