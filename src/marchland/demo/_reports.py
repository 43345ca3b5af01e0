"""The four countries' report files, derived from the true incidence, with deliberate dirt.

Every dirty row is recorded in ``truth/dirt.csv`` with the data row number a reader counts
(the first row after the header is row 1; workbooks count per sheet).
"""

from __future__ import annotations

import csv
import datetime as dt
import re
import unicodedata
import zipfile
from pathlib import Path

import numpy as np
import openpyxl
import pandas as pd

from ._outbreak import reporting_share

EXTRACT = pd.Timestamp("2026-11-03")  # the day the scenario's files were last sent
DEATH_REPORTING = 0.85
DIRT_COLUMNS = ["source_file", "row", "column", "reason", "sheet"]
AGE_GROUPS = ["0-4", "5-14", "15-29", "30-44", "45-64", "65+"]
AGE_P = [0.18, 0.2, 0.24, 0.18, 0.13, 0.07]
# Place names that belong to no district anywhere in the scenario.
UNKNOWN_PLACES = {"MRW": ["Threnmoor Flats", "Kaskelby Point"], "QLN": ["Vantorrin"]}
# Old names a person has confirmed (country, alias) -> used in that country's reports.
OLD_NAMES = {
    "MRW": ["Quennel Crossing", "Old Brannick"],
    "QLN": ["Sant'Ivora"],
    "OSK": ["Skyrthrun Vale"],
}


def _dirt(dirt, source, row, column, reason, sheet=""):
    dirt.append(
        {"source_file": source, "row": row, "column": column, "reason": reason, "sheet": sheet}
    )


def _record(dirt, source, rows, tags, sheet=""):
    """Add the tagged rows to the dirt list with their final row numbers (from 1)."""
    for k, r in enumerate(rows, start=1):
        if id(r) in tags:
            _dirt(dirt, source, k, *tags[id(r)], sheet)


def _write_csv(path: Path, header: list[str], rows: list[list]) -> None:
    path.parent.mkdir(parents=True, exist_ok=True)
    with open(path, "w", newline="", encoding="utf-8") as f:
        w = csv.writer(f, lineterminator="\n")
        w.writerow(header)
        w.writerows(rows)


def _write_report(folder: Path, dirt, name: str, header: list[str], rows: list[list], tags):
    """Write one report file to ``folder`` and list its tagged rows as ``reports/<name>``."""
    _record(dirt, f"reports/{name}", rows, tags)
    _write_csv(folder / name, header, rows)


def reported_counts(sc, rng):
    """Under-reported cases and deaths per district and week (binomial thinning)."""
    d = sc.districts
    share = d["country"].map(reporting_share).to_numpy()[:, None]
    cases = rng.binomial(sc.outbreak.cases, share)
    deaths = np.minimum(rng.binomial(sc.outbreak.deaths, DEATH_REPORTING), cases)
    return cases, deaths


def _month_end(p: pd.Period) -> pd.Timestamp:
    return p.to_timestamp(how="end").normalize()


def write_tvr(sc, cases, deaths, folder: Path, rng, dirt, *, country: str = "TVR") -> dict:
    """Tavrenne: one CSV per monthly transmission, explicit zeros, late rows, corrections.

    ``country`` writes another country's districts the same way (``<code>_weekly_*.csv``);
    the benchmark world (``benchmarks/world.py``) uses it for every country.
    """
    d = sc.districts
    weeks = sc.outbreak.weeks
    idx = np.flatnonzero(d["country"].to_numpy() == country)
    n_w = len(weeks)
    frame = pd.DataFrame(
        {
            "pos": np.repeat(idx, n_w),
            "t": np.tile(np.arange(n_w), len(idx)),
        }
    )
    frame["code"] = d.index.to_numpy()[frame["pos"]]
    frame["name"] = d["name"].to_numpy()[frame["pos"]]
    frame["week"] = weeks[frame["t"]]
    frame["cases"] = cases[frame["pos"], frame["t"]]
    frame["deaths"] = deaths[frame["pos"], frame["t"]]
    frame["month"] = frame["week"].dt.to_period("M")
    frame["received"] = frame["week"] + pd.Timedelta(days=8)
    months = pd.period_range(weeks[0], weeks[-1], freq="M")
    sent = {m: _month_end(m) + pd.Timedelta(days=9) for m in months}
    # Late rows: a few district-weeks at the end of each month come with the next file.
    last_week = frame.groupby("month")["week"].transform("max") == frame["week"]
    late = last_week & (rng.random(len(frame)) < 0.08)
    frame["file"] = frame["month"]
    frame.loc[late, "file"] = frame.loc[late, "month"] + 1
    frame.loc[late, "received"] = [
        sent[m] + pd.Timedelta(days=int(k))
        for m, k in zip(frame.loc[late, "month"], rng.integers(4, 18, late.sum()), strict=True)
    ]
    frame["kind"] = "report"
    # Corrections: later files repeat a district-week with new numbers and a later date.
    pool = frame[(frame["cases"] > 2) & (frame["month"] < months[-2]) & ~late]
    pick = pool.iloc[rng.choice(len(pool), 12, replace=False)].copy()
    pick["file"] = pick["month"] + rng.integers(1, 3, len(pick))
    pick["cases"] = np.maximum(pick["cases"] + rng.choice([-2, -1, 1, 2, 3, 5], len(pick)), 0)
    pick["deaths"] = np.minimum(pick["deaths"], pick["cases"])
    # One correction moves a district's first case earlier: a week first sent as zero.
    rep = frame[frame["cases"] > 0].groupby("code")["t"].min()
    cand = rep[(rep > 8) & (rep < n_w - 12)].index
    code = cand[0]
    t0 = rep[code] - 1
    row = frame[(frame["code"] == code) & (frame["t"] == t0)].copy()
    if int(row["cases"].iloc[0]) != 0:  # pragma: no cover - follows from how t0 is chosen
        raise RuntimeError("the week before the first reported case is not a zero")
    row["file"] = row["month"] + 2
    row["cases"], row["deaths"] = 2, 0
    pick = pd.concat([pick, row])
    pick["received"] = [sent[m] - pd.Timedelta(days=2) for m in pick["file"]]
    pick["kind"] = "correction"
    frame = pd.concat([frame, pick], ignore_index=True)
    frame = frame[frame["file"] <= months[-1]]
    frame["kord"] = (frame["kind"] == "correction").astype(int)
    frame = frame.sort_values(["file", "kord", "week", "code"], kind="stable")
    header = ["district_code", "district", "week_start", "cases", "deaths", "received"]
    for i, m in enumerate(months):
        part = frame[frame["file"] == m]
        # Column by column (a large world has millions of rows); rows stay lists to edit.
        rows = list(
            map(
                list,
                zip(
                    part["code"].tolist(),
                    part["name"].tolist(),
                    part["week"].dt.strftime("%Y-%m-%d").tolist(),
                    part["cases"].astype(int).tolist(),
                    part["deaths"].astype(int).tolist(),
                    part["received"].dt.strftime("%Y-%m-%d").tolist(),
                    strict=True,
                ),
            )
        )
        tags = {}
        if i == 6:  # a negative count in place of a real one
            k = next(
                j
                for j, r in enumerate(rows)
                if j > len(rows) // 3 and r[3] > 0 and r[4] == 0 and r[0] != code
            )
            rows[k][3] = -3
            tags[id(rows[k])] = ("cases", "negative")
        if i == 11:  # a blank row in the middle of the file
            k = len(rows) // 2
            rows.insert(k, [""] * 6)
            tags[id(rows[k])] = ("", "blank")
        if i == len(months) - 1:  # a week in the future
            rows.append(
                [
                    rows[0][0],
                    rows[0][1],
                    "2027-01-04",
                    2,
                    0,
                    (sent[m] - pd.Timedelta(days=1)).strftime("%Y-%m-%d"),
                ]
            )
            tags[id(rows[-1])] = ("week_start", "future-week")
        _write_report(folder, dirt, f"{country.lower()}_weekly_{m}.csv", header, rows, tags)
    return {"first_case_correction": (code, weeks[t0].strftime("%Y-%m-%d"))}


def write_osk(sc, cases, deaths, folder: Path, rng, dirt, aliases) -> None:
    """Oskeland: province totals in a workbook, one sheet per month, explicit zeros."""
    d = sc.districts
    weeks = sc.outbreak.weeks
    prov = sc.world.provinces
    prov = prov[prov["country"] == "OSK"]
    osk = d["country"].to_numpy() == "OSK"
    pcodes = d["province_id"].to_numpy()[osk]
    old_name = OLD_NAMES["OSK"][0]
    old_prov = prov.index[1]
    aliases.append(("OSK", old_name, old_prov))
    wb = openpyxl.Workbook()
    wb.remove(wb.active)
    months = pd.period_range(weeks[0], weeks[-1], freq="M")
    src = "reports/osk_provinces.xlsx"
    for i, m in enumerate(months):
        ws = wb.create_sheet(str(m))
        ws.append(["Province", "Epi week", "Cases", "Deaths", "Date received"])
        rows = []
        for t in np.flatnonzero(weeks.to_period("M") == m):
            iso = weeks[t].isocalendar()
            for p in prov.index:
                sel = pcodes == p
                name = prov.loc[p, "name"]
                if p == old_prov and m <= pd.Period("2025-09"):
                    name = old_name  # the province's name before its 2025 renaming
                u = rng.random()
                if u < 0.04:
                    name = name.lower()
                elif u < 0.07:
                    name = name.upper()
                elif u < 0.11:
                    name = f" {name}  "
                rows.append(
                    [
                        name,
                        f"{iso.year}-W{iso.week:02d}",
                        int(cases[osk][sel, t].sum()),
                        int(deaths[osk][sel, t].sum()),
                        (weeks[t] + pd.Timedelta(days=10)).date(),
                    ]
                )
        if i == 11:  # deaths above cases
            canonical = set(prov["name"])
            k = next(j for j, r in enumerate(rows) if r[2] > 0 and r[0] in canonical)
            rows[k][3] = rows[k][2] + 2
            _record(dirt, src, rows, {id(rows[k]): ("Deaths", "deaths-over-cases")}, str(m))
        for r in rows:
            ws.append(r)
        for cell in ws["E"][1:]:
            cell.number_format = "yyyy-mm-dd"
    fixed = dt.datetime(2026, 11, 3, 8, 0, 0)
    wb.properties.created = fixed
    wb.properties.modified = fixed
    wb.properties.creator = "Oskeland Ministry of Health (fictional)"
    wb.save(folder / "osk_provinces.xlsx")
    _pin_zip_times(folder / "osk_provinces.xlsx")


def _pin_zip_times(path: Path) -> None:
    """Rewrite a workbook's zip entries with a fixed time so regeneration is byte-identical."""
    with zipfile.ZipFile(path) as z:
        entries = [(i.filename, z.read(i.filename)) for i in z.infolist()]
    # openpyxl stamps the save time as "modified"; pin it to the creation time.
    entries = [
        (n, re.sub(rb"(<dcterms:modified[^>]*>)[^<]*", rb"\g<1>2026-11-03T08:00:00Z", d))
        if n == "docProps/core.xml"
        else (n, d)
        for n, d in entries
    ]
    with zipfile.ZipFile(path, "w", zipfile.ZIP_DEFLATED) as z:
        for name, data in entries:
            z.writestr(
                zipfile.ZipInfo(name, date_time=(2026, 11, 3, 8, 0, 0)),
                data,
                compress_type=zipfile.ZIP_DEFLATED,
            )


def _strip_accents(s: str) -> str:
    return "".join(c for c in unicodedata.normalize("NFKD", s) if not unicodedata.combining(c))


def _variant(name: str, rng) -> str:
    """Write the district's name the way a clerk might."""
    options = ["upper", "spaces", "district-of", "lower"]
    if _strip_accents(name) != name or "æ" in name:
        options += ["no-accents"] * 3
    if name.startswith("Saint "):
        options += ["saint"] * 3
    if name.startswith(("North ", "South ")):
        options += ["compass"] * 3
    pick = options[rng.integers(len(options))]
    if pick == "upper":
        return name.upper()
    if pick == "lower":
        return name.lower()
    if pick == "spaces":
        return f"  {name.replace(' ', '  ')} "
    if pick == "district-of":
        return f"District of {name}"
    if pick == "no-accents":
        return _strip_accents(name).replace("æ", "ae").replace("Æ", "Ae")
    if pick == "saint":
        return name.replace("Saint ", "St. ", 1)
    return name.replace("North ", "N. ", 1).replace("South ", "S. ", 1)


def write_mrw(sc, cases, deaths, folder: Path, rng, dirt, aliases) -> None:
    """Marrowen: a line list, one row per reported case, names written many ways."""
    d = sc.districts
    weeks = sc.outbreak.weeks
    idx = np.flatnonzero(d["country"].to_numpy() == "MRW")
    c = cases[idx]
    dd = deaths[idx]
    pos, t = np.nonzero(c)
    n = c[pos, t]
    case_pos = np.repeat(idx[pos], n)
    case_t = np.repeat(t, n)
    # Deaths are the first reported cases of each district-week.
    rank = np.arange(len(case_pos)) - np.repeat(np.cumsum(n) - n, n)
    died = rank < np.repeat(dd[pos, t], n)
    onset = weeks[case_t] + pd.to_timedelta(rng.integers(0, 7, len(case_pos)), unit="D")
    delay = 1 + rng.geometric(0.25, len(case_pos))
    report = onset + pd.to_timedelta(delay, unit="D")
    outcome = np.where(
        died, "died", np.where(rng.random(len(case_pos)) < 0.06, "unknown", "recovered")
    )
    age = rng.choice(AGE_GROUPS, len(case_pos), p=AGE_P)
    canon = d["name"].to_numpy()[case_pos]
    old = {d.index[idx[3]]: OLD_NAMES["MRW"][0], d.index[idx[17]]: OLD_NAMES["MRW"][1]}
    for uid, alias in old.items():
        aliases.append(("MRW", alias, uid))
    u = rng.random(len(case_pos))
    names = []
    for k in range(len(case_pos)):  # generator only; small
        uid = d.index[case_pos[k]]
        if uid in old and u[k] < 0.3:
            names.append(old[uid])
        elif u[k] > 0.7:
            names.append(_variant(canon[k], rng))
        else:
            names.append(canon[k])
    frame = pd.DataFrame(
        {"onset": onset, "report": report, "name": names, "age": age, "outcome": outcome}
    )
    frame = frame[frame["report"] <= EXTRACT].sort_values(["report", "onset"], kind="stable")
    rows = [
        [
            f"MRW-{k + 1:06d}",
            r.onset.strftime("%Y-%m-%d"),
            r.report.strftime("%Y-%m-%d"),
            r.name,
            r.age,
            r.outcome,
        ]
        for k, r in enumerate(frame.itertuples())
    ]
    tags = {}
    for j, place in enumerate(UNKNOWN_PLACES["MRW"]):
        k = len(rows) // 3 * (j + 1)
        base = rows[k]
        rows.insert(k + 1, [f"MRW-9{j:05d}", base[1], base[2], place, "15-29", "recovered"])
        tags[id(rows[k + 1])] = ("district_name", "unknown-place")
    canonical = set(d["name"].to_numpy()[idx])
    k = next(j for j in range(len(rows) // 2, len(rows)) if rows[j][3] in canonical)
    rows[k][1] = "2026-02-30"  # an impossible date
    tags[id(rows[k])] = ("onset_date", "unparseable")
    k = len(rows) * 3 // 4
    rows.insert(k, [""] * 6)
    tags[id(rows[k])] = ("", "blank")
    header = ["case_no", "onset_date", "report_date", "district_name", "age_group", "outcome"]
    _write_report(folder, dirt, "mrw_linelist.csv", header, rows, tags)


def mmwr_week(sunday: pd.Timestamp) -> tuple[int, int]:
    """MMWR (Sunday-start) epi year and week of the week starting on ``sunday``.

    Week 1 is the first Sunday-start week with at least four days in the calendar year, i.e.
    the week holding 4 January; a week belongs to the year of its Wednesday.

    Parameters
    ----------
    sunday : pandas.Timestamp
        A Sunday.

    Returns
    -------
    tuple of int
        (year, week)

    Examples
    --------
    >>> mmwr_week(pd.Timestamp("2026-01-04"))
    (2026, 1)
    >>> mmwr_week(pd.Timestamp("2025-12-28"))
    (2025, 53)
    """
    year = (sunday + pd.Timedelta(days=3)).year
    jan4 = pd.Timestamp(year=year, month=1, day=4)
    week1 = jan4 - pd.Timedelta(days=(jan4.day_of_week + 1) % 7)
    return year, (sunday - week1).days // 7 + 1


def write_qln(sc, cases, deaths, folder: Path, rng, dirt, aliases) -> list:
    """Quillany: Sunday-start weeks, cases-only rows, its own column names, a reporting gap."""
    d = sc.districts
    weeks = sc.outbreak.weeks
    idx = np.flatnonzero(d["country"].to_numpy() == "QLN")
    c, dd = cases[idx], deaths[idx]
    pos, t = np.nonzero(c)
    n = c[pos, t]
    case_pos = np.repeat(pos, n)
    day = weeks[np.repeat(t, n)] + pd.to_timedelta(rng.integers(0, 7, n.sum()), unit="D")
    rank = np.arange(len(case_pos)) - np.repeat(np.cumsum(n) - n, n)
    died = rank < np.repeat(dd[pos, t], n)
    sunday = day - pd.to_timedelta((day.day_of_week + 1) % 7, unit="D")
    agg = (
        pd.DataFrame({"pos": case_pos, "sunday": sunday, "died": died})
        .groupby(["sunday", "pos"])
        .agg(cases=("died", "size"), deaths=("died", "sum"))
        .reset_index()
    )
    # Drop the last, incomplete Sunday week, which had not been reported by the extract date.
    agg = agg[agg["sunday"] + pd.Timedelta(days=9) <= EXTRACT]
    # A reporting gap: three consecutive weeks with no file at all.
    sundays = np.sort(agg["sunday"].unique())
    gap = list(sundays[len(sundays) // 2 : len(sundays) // 2 + 3])
    agg = agg[~agg["sunday"].isin(gap)]
    old_uid = d.index[idx[5]]
    aliases.append(("QLN", OLD_NAMES["QLN"][0], old_uid))
    names = d["name"].to_numpy()[idx]
    rows = []
    for r in agg.itertuples():
        yr, wk = mmwr_week(r.sunday)
        name = names[r.pos]
        if d.index[idx[r.pos]] == old_uid and r.sunday < pd.Timestamp("2026-01-01"):
            name = OLD_NAMES["QLN"][0]
        rows.append(
            [
                name,
                yr,
                wk,
                int(r.cases),
                int(r.deaths),
                (r.sunday + pd.Timedelta(days=9)).strftime("%d/%m/%Y"),
            ]
        )
    tags = {}
    canonical = set(names)
    k = next(j for j in range(len(rows) // 4, len(rows)) if rows[j][0] in canonical)
    rows.insert(k + 1, list(rows[k]))  # an exact duplicate; the second copy is the dirt
    tags[id(rows[k + 1])] = ("", "duplicate")
    k = next(
        j for j in range(len(rows) // 3, len(rows)) if rows[j][3] > 1 and rows[j][0] in canonical
    )
    rows[k][4] = rows[k][3] + 1
    tags[id(rows[k])] = ("New deaths", "deaths-over-cases")
    k = len(rows) // 2
    rows.insert(k, [UNKNOWN_PLACES["QLN"][0], rows[k][1], rows[k][2], 3, 0, rows[k][5]])
    tags[id(rows[k])] = ("Region", "unknown-place")
    k = next(
        j
        for j in range(len(rows) * 2 // 3, len(rows))
        if id(rows[j]) not in tags and rows[j][0] in canonical
    )
    rows[k][3] = f"{rows[k][3]}a"  # a typing slip that is not a number
    tags[id(rows[k])] = ("New cases", "unparseable")
    header = ["Region", "Yr", "Wk", "New cases", "New deaths", "Reported on"]
    _write_report(folder, dirt, "qln_weekly.csv", header, rows, tags)
    return [pd.Timestamp(g) for g in gap]
