"""Settings: command-line flags, then ``$SPECCAT_*`` variables, then the user's config file.

The config file is ``$XDG_CONFIG_HOME/speccat/config.toml`` (``~/.config`` when unset), a flat
table of the keys below, e.g.::

    archive = "/data/group/speccat.sqlite"
    jobs = 2
    detect_sigma = 5.0
    id_threshold = 0.05
    catalogue = "~/lines/extra.csv"
"""

from __future__ import annotations

import os
import tomllib
from dataclasses import dataclass, fields, replace
from pathlib import Path
from typing import Any

from speccat.errors import SpeccatError


@dataclass(frozen=True)
class Settings:
    """Everything a user may tune; defaults are what a fresh install uses."""

    archive: str = "speccat.sqlite"
    jobs: int = 0  # 0 = one worker per core
    detect_sigma: float = 5.3  # line-finding threshold (sigma of the filtered spectrum): <= 0.01 false lines per 8,192 channels
    id_threshold: float = 0.05  # below this score a detection stays unidentified
    vel_window_kms: float = 400.0  # Galactic velocity window for candidates, +/- km/s
    catalogue: str = ""  # extra catalogue file merged with the built-in one


def config_path() -> Path:
    base = os.environ.get("XDG_CONFIG_HOME") or str(Path.home() / ".config")
    return Path(base) / "speccat" / "config.toml"


def _coerce(name: str, value: Any, source: str) -> Any:
    kind = type(getattr(Settings(), name))
    try:
        return kind(value)
    except (TypeError, ValueError):
        raise SpeccatError(f"{source}: {name} must be a {kind.__name__}, got {value!r}") from None


def load_settings(overrides: dict[str, Any] | None = None) -> Settings:
    """Merge the config file, the environment and ``overrides`` (flags; None values ignored)."""
    values: dict[str, Any] = {}
    path = config_path()
    if path.is_file():
        try:
            data = tomllib.loads(path.read_text(encoding="utf-8"))
        except (OSError, UnicodeDecodeError, tomllib.TOMLDecodeError) as exc:
            raise SpeccatError(f"{path}: not a readable TOML file ({exc})") from None
        for key, value in data.items():
            if key not in {f.name for f in fields(Settings)}:
                raise SpeccatError(f"{path}: unknown setting {key!r}")
            values[key] = _coerce(key, value, str(path))
    for f in fields(Settings):
        env = os.environ.get(f"SPECCAT_{f.name.upper()}")
        if env is not None and env != "":
            values[f.name] = _coerce(f.name, env, f"$SPECCAT_{f.name.upper()}")
    for key, value in (overrides or {}).items():
        if value is not None:
            values[key] = _coerce(key, value, f"--{key.replace('_', '-')}")
    return replace(Settings(), **values)
