"""The README's Python tour runs as written on the bundled scenario."""

import pathlib
import re

README = pathlib.Path(__file__).resolve().parents[1] / "README.md"


def test_readme_python_tour_runs():
    blocks = re.findall(r"```python\n(.*?)```", README.read_text(), flags=re.S)
    assert blocks, "README has no python block"
    namespace: dict = {}
    exec(compile(blocks[0], str(README), "exec"), namespace)  # noqa: S102
    assert set(namespace["rates"].columns) >= {"cases", "population", "rate", "lower", "upper"}
    assert {"I", "p", "q", "quadrant", "label"} <= set(namespace["spots"].columns)
    assert namespace["risk"]["rank"].min() == 1


def test_readme_gives_exactly_the_two_setup_commands():
    text = README.read_text()
    setup = text.split("## Set up on a fresh machine", 1)[1].split("##", 1)[0]
    commands = re.findall(r"```\n(.*?)```", setup, flags=re.S)[0].split()
    assert commands == ["make", "demo", "make", "test"]
