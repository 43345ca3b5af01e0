"""Reading a configuration: TOML file or dict -> validated :class:`Config`."""

from __future__ import annotations

import os
import tomllib
from pathlib import Path

from ..errors import ConfigError
from ._read import from_dict
from .schema import Config


def load_config(path: str | os.PathLike[str] | Config) -> Config:
    r"""Read and validate a TOML configuration.

    Parameters
    ----------
    path : path-like or Config
        The TOML file; an already-loaded :class:`Config` is returned unchanged.

    Returns
    -------
    Config
        Frozen dataclasses, one per section; paths resolved against the file's folder.

    Raises
    ------
    ConfigError
        The file is missing or not TOML, a key is unknown, a value has the wrong type or is
        not one of the allowed values, or a file it names does not exist. The message names the
        file and the key path (e.g. ``reports[2].columns.cases``).

    Examples
    --------
    >>> import tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> _ = (d / "a.gpkg").write_bytes(b"")
    >>> _ = (d / "c.toml").write_text('[[boundaries]]\npath = "a.gpkg"\nid = "code"\n'
    ...                               'name = "name"\ncountry = "TVR"\nlevel = 2\n')
    >>> cfg = load_config(d / "c.toml")
    >>> cfg.boundaries[0].country, cfg.region.calendar, cfg.graph.tolerance_m
    ('TVR', 'iso', 300.0)
    >>> _ = (d / "bad.toml").write_text('[region]\ncalendar = "lunar"\n')
    >>> load_config(d / "bad.toml")  # doctest: +ELLIPSIS
    Traceback (most recent call last):
    marchland.errors.ConfigError: ...bad.toml: region.calendar: 'calendar' needs to be one of ...
    """
    if isinstance(path, Config):
        return path
    p = Path(path).expanduser().resolve()
    try:
        text = p.read_bytes()
    except OSError as exc:
        raise ConfigError(f"cannot read the config file: {exc.strerror}", file=p) from None
    try:
        raw = tomllib.loads(text.decode("utf-8"))
    except (tomllib.TOMLDecodeError, UnicodeDecodeError) as exc:
        raise ConfigError(f"not valid TOML: {exc}", file=p) from None
    return from_dict(raw, p, p.parent)


def config_from_dict(raw: dict, base_dir: str | os.PathLike[str] = ".") -> Config:
    """Validate a configuration given as a dict (as ``tomllib`` would return it).

    Relative paths resolve against ``base_dir``. Useful in notebooks and tests.

    Examples
    --------
    >>> from marchland.demo import scenario_path
    >>> import tomllib
    >>> raw = tomllib.loads(scenario_path().read_text())
    >>> config_from_dict(raw, scenario_path().parent).reports[0].country
    'TVR'
    """
    return from_dict(raw, None, Path(base_dir).resolve())
