"""Drawing the month's figures into its bundle: the PNGs, their report copies and the atlas.

Every figure is drawn once and written three ways: ``maps/NAME.png`` (full colour, 200 dpi),
a 256-colour copy for report.html (made from the PNG's pixels while they are in memory) and
one atlas page. When a second CPU is free the figures are shared between this process and a
forked copy of it (:func:`marchland.compute.share_tasks`): each takes the next figure nobody
has taken, so a slow multi-panel figure does not hold the others up. Every atlas page is
written as its own one-page PDF and the pages are joined in atlas order (pypdf), so the atlas
is the same file however many processes drew it.
"""

from __future__ import annotations

import io
import shutil
from collections.abc import Callable
from pathlib import Path
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:  # pragma: no cover
    from .monthly import MonthResult

#: Scratch folder inside the bundle's temporary folder (removed before the bundle is renamed
#: into place; a failed run removes it with the rest).
_PAGES = ".pages"


def figure_workers(result: MonthResult) -> int:
    """Return how many processes draw the figures.

    ``[compute] workers`` (default: the CPUs this process may use), never more than those
    CPUs, and always on this machine: the files are written here even when a Dask cluster
    does the analysis.
    """
    from ..compute import default_workers

    n = getattr(getattr(result.config, "compute", None), "workers", None)
    cpus = default_workers()
    return max(1, min(cpus, cpus if n is None else int(n)))


def write_figures(
    result: MonthResult,
    root: Path,
    *,
    workers: int = 1,
    progress: Callable[[str, int, int], None] | None = None,
) -> dict[str, dict[str, Any]]:
    """Draw every figure into ``root`` (``maps/``, ``atlas.pdf``); return them for the report.

    Parameters
    ----------
    result : MonthResult
    root : pathlib.Path
        The bundle's (temporary) folder.
    workers : int
        Processes drawing, this one included.
    progress : callable, optional
        ``progress(task, done, total)`` as figures are finished.

    Returns
    -------
    dict
        ``name -> {"path": PNG path, "caption": str, "page": report copy (bytes)}`` in atlas
        order.
    """
    from ..compute import share_tasks
    from ._figures import cover_page, figure_plans

    plans = figure_plans(result)
    captions = [caption for _, _, caption in plans]
    paper = getattr(result.config.output, "paper", "a4")
    mdir = root / "maps"
    mdir.mkdir()
    work = root / _PAGES
    work.mkdir()

    def task(i: int) -> None:
        if i == 0:
            _atlas_page(cover_page(result, captions), work / "000.pdf", paper)
            return
        name, build, _ = plans[i - 1]
        _draw_one(result, name, build(), mdir / f"{name}.png", work / f"{i:03d}", paper)

    def done(k: int, n: int) -> None:
        if progress is not None:
            progress("maps and atlas pages", k, n)

    # The cover page is drawn here before any copy is forked: it loads the PDF writer and its
    # font subsetter (fontTools, about a second), which every copy would otherwise load again.
    n = len(plans) + 1
    task(0)
    done(1, n)
    # The rest is taken from the end of the atlas: the multi-panel epi curves and fan charts
    # come last in it and cost most, so drawing them first leaves the quick maps to even out
    # the finish.
    share_tasks(lambda k: task(n - 1 - k), n - 1, workers=workers, done=lambda k, _: done(k + 1, n))
    _join_pages(
        [work / f"{i:03d}.pdf" for i in range(n)],
        root / "atlas.pdf",
        title=f"marchland atlas {result.month}",
    )
    figures = {
        name: {
            "path": mdir / f"{name}.png",
            "caption": caption,
            "page": (work / f"{i:03d}.png").read_bytes(),
        }
        for i, (name, _, caption) in enumerate(plans, 1)
    }
    shutil.rmtree(work)
    return figures


def _draw_one(result: MonthResult, name: str, fig: Any, png: Path, stem: Path, paper: str) -> None:
    """Write one figure: its PNG, its report copy (``stem.png``) and its atlas page."""
    from ..figures.maps import save_figure
    from ._figures import for_atlas
    from ._html import page_png

    pixels = save_figure(fig, png)
    stem.with_suffix(".png").write_bytes(page_png(png, pixels))
    _atlas_page(for_atlas(name, fig, result), stem.with_suffix(".pdf"), paper)
    # Emptied once written, so a process holds one figure's drawing at a time.
    fig.clear()


def _atlas_page(fig: Any, path: Path, paper: str) -> None:
    from matplotlib.backends.backend_pdf import PdfPages

    from ._figures import atlas_page

    with PdfPages(path, metadata={"CreationDate": None}) as pdf:
        atlas_page(pdf, fig, paper)


def _join_pages(pages: list[Path], out: Path, *, title: str) -> None:
    """Join one-page PDFs into ``out`` in the given order (identical fonts stored once)."""
    from pypdf import PdfReader, PdfWriter

    writer = PdfWriter()
    for page in pages:
        writer.append(PdfReader(io.BytesIO(page.read_bytes())))
    writer.add_metadata({"/Title": title, "/Creator": "marchland"})
    writer.compress_identical_objects()
    with open(out, "wb") as f:
        writer.write(f)
