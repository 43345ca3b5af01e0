"""Execute notebooks/spread_corridor.ipynb top to bottom with nbclient, as `make test` does.

The kernel runs in the repository root (the notebook opens the bundled scenario from there).
A failing cell fails the test with the cell's error. The notebook is committed without outputs.
"""

from __future__ import annotations

from pathlib import Path

import nbformat
from nbclient import NotebookClient

ROOT = Path(__file__).resolve().parents[1]
NOTEBOOK = ROOT / "notebooks" / "spread_corridor.ipynb"


def test_spread_corridor_notebook_runs_top_to_bottom():
    nb = nbformat.read(NOTEBOOK, as_version=4)
    assert all(c.get("outputs", []) == [] for c in nb.cells if c.cell_type == "code"), (
        "commit the notebook without outputs"
    )
    client = NotebookClient(
        nb, timeout=120, kernel_name="python3", resources={"metadata": {"path": str(ROOT)}}
    )
    client.execute()
    outputs = [o for c in nb.cells if c.cell_type == "code" for o in c.outputs]
    assert not [o for o in outputs if o.output_type == "error"]
    text = "".join(o.get("text", "") for o in outputs if o.output_type == "stream")
    assert "corridor from" in text
    assert "km/week" in text
    assert "close pairs observed" in text
    # Every figure rendered (two maps).
    images = [o for o in outputs if "image/png" in o.get("data", {})]
    assert len(images) >= 2


def test_notebook_carries_the_cautions():
    nb = nbformat.read(NOTEBOOK, as_version=4)
    text = " ".join(c.source for c in nb.cells if c.cell_type == "markdown").lower()
    for phrase in (
        "decision support, not a diagnosis",
        "incomplete and delayed",
        "small numbers",
        "national authorities",
    ):
        assert phrase in text
