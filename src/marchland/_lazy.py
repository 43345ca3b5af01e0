"""Lazy re-exports for the package front and each stage's ``__init__``.

A stage's public names load on first use, so importing a stage (or the command line) does not
pull in the statistics stack until it is needed (PEP 562 module ``__getattr__``).
"""

from __future__ import annotations

import importlib
from collections.abc import Callable, Mapping
from typing import Any


def exports(package: str, names: Mapping[str, str]) -> tuple[Callable, Callable]:
    """Make a module ``__getattr__`` and ``__dir__`` that load each name on first use.

    Parameters
    ----------
    package : str
        The package's ``__name__``.
    names : mapping
        Public name -> module path relative to ``package`` (e.g. ``"rates"``).

    Returns
    -------
    (getattr, dir) : tuple of callables
        Assign them to the package's ``__getattr__`` and ``__dir__``.

    Examples
    --------
    >>> get, _ = exports("marchland.inputs", {"week_start": "weeks"})
    >>> get("week_start").__name__
    'week_start'
    """

    def __getattr__(name: str) -> Any:
        if name in names:
            module = importlib.import_module(f"{package}.{names[name]}")
            return getattr(module, name)
        raise AttributeError(f"module {package!r} has no attribute {name!r}")

    def __dir__() -> list[str]:
        return sorted(names)

    return __getattr__, __dir__
