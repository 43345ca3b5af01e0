"""Errors for user mistakes: each names the file, row, column and value it is about.

A bad input file is a user mistake, not a bug: it becomes an :class:`InputError`, which the
command line prints as one line and turns into exit code 2, with no traceback.
"""

from __future__ import annotations

import os
from dataclasses import dataclass


@dataclass(frozen=True)
class Location:
    """Where in the inputs a problem was found; every part is optional."""

    file: str | os.PathLike[str] | None = None
    row: int | None = None
    column: str | None = None
    value: object = None

    def __str__(self) -> str:
        parts = []
        if self.file is not None:
            parts.append(os.fspath(self.file))
        if self.row is not None:
            parts.append(f"row {self.row}")
        if self.column is not None:
            parts.append(f"column {self.column!r}")
        if self.value is not None:
            parts.append(f"value {self.value!r}")
        return ", ".join(parts)


class InputError(ValueError):
    """A problem with the user's input (file, config or argument), described in one line.

    Parameters
    ----------
    reason : str
        What was expected, then what came.
    file, row, column, value : optional
        Where the problem is. ``row`` counts data rows from 1, as a spreadsheet user reads them.

    Examples
    --------
    >>> err = InputError("cases must be a whole number >= 0", file="week12.csv", row=4,
    ...                  column="cases", value="-3")
    >>> str(err)
    "week12.csv, row 4, column 'cases', value '-3': cases must be a whole number >= 0"
    """

    def __init__(
        self,
        reason: str,
        *,
        file: str | os.PathLike[str] | None = None,
        row: int | None = None,
        column: str | None = None,
        value: object = None,
    ) -> None:
        self.reason = reason
        self.location = Location(file, row, column, value)
        super().__init__(str(self))

    @property
    def file(self) -> str | None:
        """The file the problem is in, if known."""
        return None if self.location.file is None else os.fspath(self.location.file)

    @property
    def row(self) -> int | None:
        """The data row (from 1), if known."""
        return self.location.row

    @property
    def column(self) -> str | None:
        """The column, if known."""
        return self.location.column

    @property
    def value(self) -> object:
        """The offending value, if known."""
        return self.location.value

    def __str__(self) -> str:
        where = str(self.location)
        return f"{where}: {self.reason}" if where else self.reason


class ConfigError(InputError):
    """A problem in the TOML configuration (unknown key, wrong type, missing file)."""


class DataWarning(UserWarning):
    """Something in the inputs worth a person's attention that does not stop the run."""
