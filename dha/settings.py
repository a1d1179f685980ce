"""Run settings: documented defaults (``defaults.toml``) overlaid by a lab's TOML file.

>>> s = load_settings()
>>> s["quantify"]["reference_temperature_c"]
15.0
"""
from __future__ import annotations

import copy
import tomllib
from functools import lru_cache
from pathlib import Path
from typing import Any

from dha.errors import SettingsError

DEFAULTS_FILE = Path(__file__).with_name("defaults.toml")


@lru_cache(maxsize=1)
def _defaults() -> dict[str, Any]:
    with DEFAULTS_FILE.open("rb") as fh:
        return tomllib.load(fh)


def default_settings() -> dict[str, Any]:
    """A fresh copy of the defaults (safe to modify)."""
    return copy.deepcopy(_defaults())


def merge_settings(base: dict[str, Any], changes: dict[str, Any], where: str = "settings") -> dict[str, Any]:
    """Return ``base`` with ``changes`` applied; unknown sections/keys or wrong types are errors."""
    out = copy.deepcopy(base)
    for section, values in changes.items():
        if section not in out:
            raise SettingsError(
                f"{where}: unknown section [{section}]; known: {', '.join(sorted(out))}")
        if not isinstance(values, dict):
            raise SettingsError(f"{where}: [{section}] must be a table of keys")
        for key, value in values.items():
            if key not in out[section]:
                raise SettingsError(
                    f"{where}: unknown key '{key}' in [{section}]; known: "
                    f"{', '.join(sorted(out[section]))}")
            default = out[section][key]
            if isinstance(default, bool) != isinstance(value, bool) or (
                isinstance(default, (int, float)) and not isinstance(value, (int, float))
            ) or (isinstance(default, (str, list, dict)) and not isinstance(value, type(default))):
                raise SettingsError(
                    f"{where}: [{section}] {key} = {value!r} has the wrong type; "
                    f"expected {type(default).__name__} like {default!r}")
            if isinstance(default, float) and isinstance(value, int):
                value = float(value)
            out[section][key] = value
    return out


def load_settings(path: str | Path | None = None) -> dict[str, Any]:
    """Defaults, overlaid by the TOML file at ``path`` when given."""
    settings = default_settings()
    if path is None:
        return settings
    path = Path(path)
    try:
        with path.open("rb") as fh:
            changes = tomllib.load(fh)
    except FileNotFoundError:
        raise SettingsError(f"{path}: settings file not found") from None
    except tomllib.TOMLDecodeError as err:
        raise SettingsError(f"{path}: not valid TOML ({err}); fix the file") from None
    return merge_settings(settings, changes, where=str(path.name))
