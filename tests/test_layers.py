"""The house follows the flow: a stage imports only from the stages before it (design.md).

The contracts live in ``pyproject.toml`` (``[tool.importlinter]``): a layers contract over the
stage packages and an acyclic-siblings contract (no import circles). import-linter is the
well-kept tool for this; these tests run it on the package and show, on a copy of the package
with one deliberately upward import, that the contract does break.
"""

from __future__ import annotations

import shutil
import tomllib
from pathlib import Path

import pytest
from importlinter.cli import lint_imports

ROOT = Path(__file__).resolve().parents[1]
SOURCE = ROOT / "src" / "marchland"


def _contracts() -> dict:
    return tomllib.loads((ROOT / "pyproject.toml").read_text())["tool"]["importlinter"]


def _write_config(path: Path, root: str) -> Path:
    cfg = _contracts()
    lines = ["[importlinter]", f"root_package = {root}", ""]
    for i, contract in enumerate(cfg["contracts"]):
        lines.append(f"[importlinter:contract:{i}]")
        lines.append(f"name = {contract['name']}")
        lines.append(f"type = {contract['type']}")
        for key in ("layers", "ancestors"):
            if key in contract:
                items = [item.replace("marchland", root, 1) for item in contract[key]]
                lines.append(f"{key} =\n" + "\n".join(f"    {item}" for item in items))
        lines.append("")
    path.write_text("\n".join(lines))
    return path


def test_every_stage_is_a_layer():
    layers = {name for c in _contracts()["contracts"] for name in c.get("layers", [])}
    stages = {f"marchland.{p.name}" for p in SOURCE.iterdir() if (p / "__init__.py").exists()}
    stages |= {"marchland.errors", "marchland.compute", "marchland.cli"}
    assert stages == layers


def test_the_package_keeps_its_contracts(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    config = _write_config(tmp_path / "contracts.ini", "marchland")
    assert lint_imports(config_filename=str(config), no_cache=True) == 0


@pytest.mark.parametrize(
    ("module", "line"),
    [
        # a statistic reaching up into the monthly run: a lower stage importing a higher one
        ("stats/rates.py", "from ..pack import monthly  # deliberately upward\n"),
        # an import circle inside one stage
        ("config/schema.py", "from . import load  # deliberately circular\n"),
    ],
)
def test_a_bad_import_breaks_the_contract(tmp_path, monkeypatch, module, line):
    copy = tmp_path / "marchland_copy"
    shutil.copytree(SOURCE, copy, ignore=shutil.ignore_patterns("__pycache__"))
    monkeypatch.syspath_prepend(str(tmp_path))
    monkeypatch.chdir(tmp_path)
    config = _write_config(tmp_path / "contracts.ini", "marchland_copy")
    # the untouched copy keeps the contracts, so a failure below is the bad line's doing
    assert lint_imports(config_filename=str(config), no_cache=True) == 0
    target = copy / module
    target.write_text(target.read_text() + "\n" + line)
    assert lint_imports(config_filename=str(config), no_cache=True) == 1
