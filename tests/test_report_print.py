"""Printing report.html gives every table whole: each column header is on the printed pages.

Headless Chromium prints the report to PDF (``--print-to-pdf``, the browser's own print path
and so its print stylesheet); ``pdftotext -raw`` (poppler-utils) reads the text back in the
order it was drawn, so a header wrapped over two lines of its cell stays in one piece. A column
cut off at the page edge or hidden in a scroll box is not drawn and its header goes missing. A
control page with a wide table in a clipping box shows the check can fail.

Without Chromium or pdftotext the tests skip with a reason on a user's machine; under
``CI=true`` a missing tool is a failure.
"""

from __future__ import annotations

import html
import re
import shutil
import subprocess

import pytest
from system_tools import need
from test_report_browser import _chromium


def _pdftotext() -> str:
    return need(("pdftotext",), "pdftotext", "poppler-utils", "print not checked")


def _printed_text(page, tmp_path) -> str:
    exe, totext = _chromium(), _pdftotext()
    pdf = tmp_path / "printed.pdf"
    cmd = [
        exe,
        "--headless",
        "--no-sandbox",
        "--disable-gpu",
        "--no-first-run",
        "--proxy-server=127.0.0.1:9",
        f"--user-data-dir={tmp_path / 'ud'}",
        "--no-pdf-header-footer",
        f"--print-to-pdf={pdf}",
        page.as_uri(),
    ]
    res = subprocess.run(cmd, capture_output=True, text=True, timeout=180)
    assert pdf.exists(), f"chromium printed nothing: {res.stderr[-2000:]}"
    out = subprocess.run([totext, "-raw", str(pdf), "-"], capture_output=True, text=True)
    return " ".join(out.stdout.split())


def _headers(text: str) -> set[str]:
    cells = re.findall(r"<th>(.*?)</th>", text, flags=re.S)
    return {" ".join(html.unescape(re.sub(r"<[^>]+>", "", c)).split()) for c in cells} - {""}


def _missing(page, tmp_path) -> list[str]:
    printed = _printed_text(page, tmp_path)
    return sorted(h for h in _headers(page.read_text(encoding="utf-8")) if h not in printed)


@pytest.fixture(scope="module")
def report(grid_month):
    return grid_month[1] / "report.html"


def test_printed_report_shows_every_table_column(report, tmp_path):
    headers = _headers(report.read_text(encoding="utf-8"))
    # The wide tables are there to be checked: risk parts and supply items with their units.
    assert any(h.startswith("part: ") for h in headers)
    assert "expected cases" in headers and "covered" in headers
    assert _missing(report, tmp_path) == []


def test_the_print_check_catches_a_clipped_column(tmp_path):
    cols = "".join(f"<th>column number {i}</th>" for i in range(60))
    cells = "".join(f"<td>{'x' * 12}{i}</td>" for i in range(60))
    page = tmp_path / "wide.html"
    page.write_text(
        "<!DOCTYPE html><html><body><div style='width:600px;overflow:hidden'>"
        f"<table style='white-space:nowrap'><thead><tr>{cols}</tr></thead>"
        f"<tbody><tr>{cells}</tr></tbody></table></div></body></html>",
        encoding="utf-8",
    )
    missing = _missing(page, tmp_path)
    assert "column number 0" not in missing and "column number 59" in missing


@pytest.mark.parametrize(
    ("ci", "outcome"), [("true", pytest.fail.Exception), ("", pytest.skip.Exception)]
)
def test_missing_pdftotext_fails_under_ci_and_skips_elsewhere(monkeypatch, ci, outcome):
    monkeypatch.setattr(shutil, "which", lambda name: None)
    monkeypatch.setenv("CI", ci)
    with pytest.raises(outcome, match="pdftotext is not installed"):
        _pdftotext()
