"""The system programs some tests need (Chromium, pdftotext, Node.js): found, or skipped.

On a user's machine a missing program skips the test with a reason that says how to install
it; under ``CI=true`` (``.ci/run`` installs all of them) it fails the test instead, so CI never
passes by skipping.
"""

from __future__ import annotations

import os
import shutil

import pytest


def need(names: tuple[str, ...], label: str, package: str, skipped: str) -> str:
    """Return the path of the first program of ``names`` found, else skip (fail under CI).

    ``label`` names the program in the message, ``package`` is Debian's package for it and
    ``skipped`` says what goes unchecked.
    """
    for name in names:
        path = shutil.which(name)
        if path:
            return path
    msg = f"{label} is not installed (Debian: apt-get install {package}); {skipped}"
    if os.environ.get("CI", "").lower() == "true":
        pytest.fail(msg + " - required under CI=true")
    pytest.skip(msg)
