"""Run settings: documented defaults (``defaults.toml``) overlaid by a lab's TOML file.

>>> s = load_settings()
>>> s["quantify"]["reference_temperature_c"]
15.0
"""
from __future__ import annotations

import copy
import math
import tomllib
from functools import lru_cache
from pathlib import Path
from typing import Any

from dha.errors import SettingsError

DEFAULTS_FILE = Path(__file__).with_name("defaults.toml")

#: Documented ranges of numeric settings, (section, key) -> (lowest, highest); None = open.
#: Every number must also be finite (``nan``/``inf`` are refused: a run must be repeatable
#: from its echoed settings, and JSON has no such values).
RANGES: dict[tuple[str, str], tuple[float | None, float | None]] = {
    ("identify", "ri_tolerance"): (0.01, 200.0),
    ("identify", "ri_sigma"): (0.0, 200.0),
    ("identify", "isothermal_until_min"): (0.0, 1000.0),
    ("identify", "holdup_time_min"): (0.0, 1000.0),
    ("identify", "learnt_prior"): (0.0, 100.0),
    ("identify", "group_prior"): (0.0, 100.0),
    ("identify", "other_oxygenate_odds"): (0.0, 1000.0),
    ("quantify", "reference_temperature_c"): (0.0, 40.0),
    ("quantify", "primary_alcohol_oxygen_ecn"): (-5.0, 5.0),
    ("quantify", "oxygenates_other_method_mass_pct"): (None, 100.0),
    ("volatility", "distillation_step_vol_pct"): (0.1, 5.0),
    ("batch", "unidentified_flag_mass_pct"): (0.0, 100.0),
    ("limits", "max_file_mb"): (0.001, 100000.0),
    ("limits", "max_workbook_mb"): (0.001, 100000.0),
    ("limits", "max_rows"): (1, 100000000),
    ("limits", "max_text_chars"): (1, 10000000),
}
#: Output formats a settings file may list.
FORMATS = ("json", "xlsx", "pdf")


def _check_value(where: str, section: str, key: str, value: Any) -> None:
    """Finite numbers in their documented range; non-empty, known output formats."""
    name = f"[{section}] {key}"
    numbers: list[tuple[str, Any]] = []
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        numbers.append((name, value))
    elif isinstance(value, dict):
        numbers += [(f"{name}.{k}", v) for k, v in value.items()
                    if isinstance(v, (int, float)) and not isinstance(v, bool)]
    elif isinstance(value, list):
        numbers += [(f"{name}[{i}]", v) for i, v in enumerate(value)
                    if isinstance(v, (int, float)) and not isinstance(v, bool)]
    for label, v in numbers:
        if not math.isfinite(v):
            raise SettingsError(f"{where}: {label} = {v!r} is not a finite number; give a "
                                "number (nan and inf are not allowed)")
    lo, hi = RANGES.get((section, key), (None, None))
    if numbers and len(numbers) == 1 and numbers[0][0] == name and (
            (lo is not None and value < lo) or (hi is not None and value > hi)):
        span = (f"{lo:g} to {hi:g}" if lo is not None and hi is not None
                else f"at least {lo:g}" if lo is not None else f"at most {hi:g}")
        raise SettingsError(f"{where}: {name} = {value!r} is outside its range ({span}); see "
                            "the comment above it in dha/defaults.toml")
    if isinstance(value, dict) and (section, key) in (("identify", "markers"),
                                                      ("quantify", "response_factors")):
        for k, v in value.items():
            if isinstance(v, bool) or not isinstance(v, (int, float)) or v <= 0:
                raise SettingsError(f"{where}: {name}.{k} = {v!r}; must be a positive number")
    if (section, key) == ("report", "formats"):
        bad = [f for f in value if f not in FORMATS]
        if not value or bad:
            raise SettingsError(f"{where}: {name} = {value!r}; list one or more of "
                                f"{', '.join(FORMATS)}")


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
            _check_value(where, section, key, value)
            out[section][key] = value
    return out


def load_settings(path: str | Path | None = None) -> dict[str, Any]:
    """Defaults, overlaid by the TOML file at ``path`` when given."""
    settings = default_settings()
    if path is None:
        return settings
    path = Path(path)
    if not path.exists():
        raise SettingsError(f"{path}: settings file not found")
    changes = read_toml(path, "settings file", SettingsError, "settings file")
    return merge_settings(settings, changes, where=f"settings file {path}")


def read_toml(path: Path, what: str, error: type[Exception], kind_hint: str) -> dict[str, Any]:
    """The TOML file at ``path`` as a dict; any failure is ``error`` in one line.

    ``what`` names the file in the message ("settings file"), ``kind_hint`` says what to give
    instead when the file is not text ("settings file" -> "give a .toml settings file").
    """
    try:
        with path.open("rb") as fh:
            return tomllib.load(fh)
    except tomllib.TOMLDecodeError as err:
        raise error(f"{what} {path}: not valid TOML ({err}); fix the file") from None
    except UnicodeDecodeError:
        raise error(f"{what} {path}: not a text (TOML) file; give a .toml {kind_hint}") from None
    except OSError as err:
        raise error(f"{what} {path}: cannot be read ({err.strerror or err}); check the path "
                    "and its permissions") from None
