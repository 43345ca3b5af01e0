"""HTML building blocks of the report page: escaping, number formats, tables, figures, sections."""

from __future__ import annotations

import base64
import html
import io
from collections.abc import Mapping
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd

if TYPE_CHECKING:  # pragma: no cover
    from .monthly import MonthResult

CAUTIONS = (
    (
        "Decision support, not a diagnosis.",
        "These figures help a team decide where to look and what to prepare. They do not say "
        "what is happening in any district.",
    ),
    (
        "Reporting is incomplete and delayed.",
        "The last weeks always look lower than they will once late reports arrive; districts "
        "that sent nothing are shown as not reported, never as zero.",
    ),
    (
        "Small numbers are unstable.",
        "A few cases in a small population give a high rate with a wide interval. Read the "
        "limits and the smoothed rates beside the raw ones.",
    ),
    (
        "Defer to national authorities and field epidemiologists.",
        "They know what these tables cannot: testing, access, local events and the quality of "
        "each report.",
    ),
)


def esc(value: Any) -> str:
    """Escape any value for HTML text or attribute context (quotes included)."""
    if value is None or value is pd.NA or value is pd.NaT:
        return ""
    if isinstance(value, float) and not np.isfinite(value):
        return ""
    return html.escape(str(value), quote=True)


def _fmt(value: Any, kind: str = "") -> str:
    """Format a number for a table cell (already safe text); strings are escaped."""
    if value is None or value is pd.NA or value is pd.NaT:
        return "&ndash;"
    if isinstance(value, (bool, np.bool_)):
        return "yes" if value else "no"
    if isinstance(value, pd.Timestamp):
        return esc(f"{value:%Y-%m-%d}")
    if isinstance(value, (int, np.integer)):
        return f"{int(value):,}"
    if isinstance(value, (float, np.floating)):
        if not np.isfinite(value):
            return "&ndash;"
        if kind == "pct":
            return f"{value:.1%}"
        if kind == "p":
            return f"{value:.3f}"
        if kind == "int":
            return f"{value:,.0f}"
        if abs(value) >= 100:
            return f"{value:,.0f}"
        if abs(value) >= 10:
            return f"{value:.1f}"
        return f"{value:.2f}" if abs(value) >= 1 or value == 0 else f"{value:.2g}"
    if isinstance(value, (list, tuple, set, np.ndarray)):
        return esc("; ".join(map(str, value)))
    return esc(value)


def table_html(
    df: pd.DataFrame | None,
    columns: Mapping[str, str] | None = None,
    *,
    kinds: Mapping[str, str] | None = None,
    index: str | None = None,
    limit: int | None = None,
    empty: str = "None.",
) -> str:
    """Render ``df`` as an HTML table with every cell escaped.

    Parameters
    ----------
    df : pandas.DataFrame
    columns : Mapping, optional
        Column -> header text, in display order (default: every column, as named).
    kinds : Mapping, optional
        Column -> number format ("pct", "p", "int").
    index : str, optional
        Header for the index, shown as the first column when given.
    limit : int, optional
        Show the first rows only (and say how many were left out).

    Returns
    -------
    str

    Examples
    --------
    >>> table_html(pd.DataFrame({"name": ["<script>"]}))
    '<table><thead><tr><th>name</th></tr></thead><tbody><tr><td>&lt;script&gt;</td></tr></tbody></table>'
    """
    if df is None or len(df) == 0:
        return f'<p class="note">{esc(empty)}</p>'
    columns = (
        dict(columns) if columns is not None else {c: str(c).replace("_", " ") for c in df.columns}
    )
    columns = {c: h for c, h in columns.items() if c in df.columns}
    kinds = kinds or {}
    shown = df if limit is None else df.head(limit)
    head = "".join(
        f"<th>{esc(h)}</th>" for h in ([index] if index else []) + list(columns.values())
    )
    rows = []
    for idx, row in shown.iterrows():
        cells = [f"<td>{esc(idx)}</td>"] if index else []
        for c in columns:
            v = row[c]
            num = isinstance(v, (int, float, np.integer, np.floating)) and not isinstance(
                v, (bool, np.bool_)
            )
            cls = ' class="n"' if num else ""
            cells.append(f"<td{cls}>{_fmt(v, kinds.get(c, ''))}</td>")
        rows.append("<tr>" + "".join(cells) + "</tr>")
    out = f"<table><thead><tr>{head}</tr></thead><tbody>{''.join(rows)}</tbody></table>"
    if limit is not None and len(df) > limit:
        out += f'<p class="note">First {limit} of {len(df):,} rows; all are in the CSV.</p>'
    return out


#: Rows of a per-unit table printed on the page (the rest are in its CSV): at 50,000 units the
#: full risk-candidate and priority tables were 5.4 MB of the page.
PAGE_ROWS = 300

#: Colours kept when a figure is re-encoded for the page. Our maps are flat class colours,
#: grey borders and text: 256 palette entries draw them without visible loss (common practice
#: for web maps), at a third of the size of the full-colour PNG.
PAGE_COLOURS = 256


def page_png(path: Path, pixels: Any = None) -> bytes:
    """Return the PNG at ``path`` re-encoded for the report page: a 256-colour palette PNG.

    The file on disk is not touched (``maps/*.png`` keep full colour for print and GIS use);
    only the copy embedded in report.html is smaller. Pillow's quantizer is used (it comes with
    matplotlib), with no dithering so flat class colours stay flat; transparency is laid on
    white, the page's figure background. zlib level 6: level 9 made the demo's copies 8 %
    smaller for seven times the time (measured: 1.50 against 1.63 MB, 2.75 against 0.41 s).

    Parameters
    ----------
    path : pathlib.Path
        A PNG file.
    pixels : array-like, optional
        The same picture as RGBA pixels (``figures.maps.save_figure`` returns them), which
        spares decoding the file.

    Returns
    -------
    bytes
        The palette PNG; the original bytes when re-encoding does not make it smaller.

    Examples
    --------
    >>> import io, tempfile
    >>> from PIL import Image
    >>> f = Path(tempfile.mkdtemp()) / "a.png"
    >>> Image.new("RGBA", (40, 20), (200, 30, 30, 255)).save(f)
    >>> Image.open(io.BytesIO(page_png(f))).mode in ("P", "RGBA")
    True
    """
    from PIL import Image

    path = Path(path)
    if pixels is None:
        with Image.open(path) as im:
            rgba = im.convert("RGBA")
    else:
        rgba = Image.fromarray(np.ascontiguousarray(pixels), "RGBA")
    if pixels is not None and np.asarray(pixels)[..., 3].min() == 255:
        # Opaque already (our figures are saved on white): laying them on white changes
        # nothing, and the composite was a fifth of this call's time.
        flat = rgba.convert("RGB")
    else:
        flat = Image.alpha_composite(Image.new("RGBA", rgba.size, "white"), rgba).convert("RGB")
    few = flat.getcolors(PAGE_COLOURS)
    if few is not None:
        # Few enough colours for an exact palette: every pixel keeps its colour.
        palette = Image.new("P", (1, 1))
        palette.putpalette([c for _, rgb in few for c in rgb])
        pal = flat.quantize(palette=palette, dither=Image.Dither.NONE)
    else:
        # Anti-aliased edges give thousands of near colours; the octree keeps the flat areas
        # (most pixels) within a few levels of their colour, the same for map and legend.
        pal = flat.quantize(
            PAGE_COLOURS, method=Image.Quantize.FASTOCTREE, dither=Image.Dither.NONE
        )
    buf = io.BytesIO()
    pal.save(buf, "PNG", compress_level=6)
    out = buf.getvalue()
    return out if len(out) < path.stat().st_size else path.read_bytes()


def _img(path: Path, alt: str, page: bytes | None = None) -> str:
    """Return an embedded image: ``page`` (a copy made when the figure was drawn) or the file's."""
    data = base64.b64encode(page if page is not None else page_png(path)).decode("ascii")
    return f'<img alt="{esc(alt)}" src="data:image/png;base64,{data}">'


def _figure(figures: Mapping[str, Any], name: str) -> str:
    f = figures.get(name)
    if f is None:
        return ""
    path = Path(f["path"])
    # The page carries a screen copy; the full-resolution file sits beside it in maps/.
    full = (
        f' <a href="maps/{esc(path.name)}">Full resolution: maps/{esc(path.name)}</a>'
        if path.parent.name == "maps"
        else ""
    )
    return (
        f'<figure id="fig-{esc(name)}">{_img(path, f["caption"], f.get("page"))}'
        f"<figcaption>{esc(f['caption'])}{full}</figcaption></figure>"
    )


def _tile(value: str, key: str, detail: str = "") -> str:
    d = f'<div class="d">{detail}</div>' if detail else ""
    return f'<div class="tile"><div class="v">{value}</div><div class="k">{esc(key)}</div>{d}</div>'


def _num(v: Any, kind: str = "") -> str:
    return "not computed" if v is None else _fmt(v, kind)


def _section(title: str, body: str, ident: str) -> str:
    return f'<section id="{esc(ident)}"><h2>{esc(title)}</h2>{body}</section>'


def _absent(result: MonthResult, *steps: str) -> str:
    msgs = [
        f'<p class="absent">Not computed: {esc(s)} ({esc(result.absent[s])}).</p>'
        for s in steps
        if s in result.absent
    ]
    return "".join(msgs)


def _by_country_label(result: MonthResult, df: pd.DataFrame) -> pd.DataFrame:
    """Index a country table by "Name (CODE)" where the config names the country."""
    return df.rename(index=lambda c: result.config.country_label(c))


def _names(result: MonthResult, df: pd.DataFrame) -> pd.DataFrame:
    add = [c for c in ("name", "country") if c not in df.columns]
    if not add:
        return df
    return df.join(result.units[add], how="left")
