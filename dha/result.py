"""The JSON result (``schema: "dha-result/1"``, the dha-result/1 schema): build it and write it.

Determinism: the same input, library and settings give byte-identical JSON apart from
``generated_at`` (UTC time of the run). Keys come in a fixed order (the dha-result/1 schema's order, then
the extra keys ``mass_balance``, ``aromatics_detail``, ``identification``, ``cyclic_olefins`` (when asked for),
``property_details``, ``generated_at``); every float is rounded to 9 significant digits (more
than any input carries, few enough that summation-order noise in the last bits never shows);
NaN and infinities become ``null``; numpy scalars become plain numbers; dates become ISO text.
"""
from __future__ import annotations

import copy
import datetime as _dt
import hashlib
import json
import math
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from dha import __version__
from dha.properties import PROPERTY_KEYS, PropertyResult

SCHEMA = "dha-result/1"
#: Significant digits kept for every float in the JSON.
FLOAT_DIGITS = 9
#: Per-component keys of ``components`` (the dha-result/1 schema), then extras.
COMPONENT_KEYS = ("name", "cas", "group", "carbon_number", "rt_min", "retention_index", "area",
                  "mass_pct", "vol_pct", "mol_pct", "match", "ri_source")
COMPONENT_EXTRAS = ("rrf", "model_component")


def _round_float(x: float) -> float | None:
    if x != x or x in (math.inf, -math.inf):
        return None
    return float(f"{x:.{FLOAT_DIGITS}g}") if x != 0.0 else 0.0


def jsonable(value: Any) -> Any:
    """A JSON-safe copy: rounded floats, NaN -> None, numpy/pandas/dates -> plain types.

    >>> jsonable({"a": float("nan"), "b": np.float64(1/3), "c": [np.int64(2)]})
    {'a': None, 'b': 0.333333333, 'c': [2]}
    """
    # fast paths for the plain Python types a result is mostly made of (same output as the
    # general branches below, which handle subclasses, numpy and pandas values)
    kind = type(value)
    if kind is float:
        return _round_float(value)
    if kind is str or value is None or kind is bool or kind is int:
        return value
    if kind is dict:
        return {(k if type(k) is str else str(k)): jsonable(v) for k, v in value.items()}
    if kind is list:
        return [jsonable(v) for v in value]
    return _jsonable_other(value)


def _jsonable_other(value: Any) -> Any:
    if value is None or isinstance(value, (bool, str)):
        return value
    if isinstance(value, (np.bool_,)):
        return bool(value)
    if isinstance(value, (int, np.integer)):
        return int(value)
    if isinstance(value, (float, np.floating)):
        x = float(value)
        if not math.isfinite(x):
            return None
        return float(f"{x:.{FLOAT_DIGITS}g}") if x != 0.0 else 0.0
    if value is pd.NA or value is pd.NaT:
        return None
    if isinstance(value, dict):
        return {str(k): jsonable(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [jsonable(v) for v in value]
    if isinstance(value, np.ndarray):
        return [jsonable(v) for v in value.tolist()]
    if isinstance(value, pd.DataFrame):
        return [jsonable(r) for r in value.to_dict(orient="records")]
    if isinstance(value, pd.Series):
        return {str(k): jsonable(v) for k, v in value.items()}
    if isinstance(value, (_dt.datetime, _dt.date, _dt.time, pd.Timestamp)):
        return value.isoformat()
    if isinstance(value, Path):
        return str(value)
    return str(value)


def file_sha256(path: str | Path) -> str | None:
    """SHA-256 of a file's bytes (None if it cannot be read)."""
    try:
        return hashlib.sha256(Path(path).read_bytes()).hexdigest()
    except OSError:
        return None


def merge_properties(properties) -> tuple[dict, dict, list[str], dict]:
    """Merge property results into (values, uncertainty, warnings, details).

    ``properties`` is a list of ``PropertyResult`` or of (module name, ``PropertyResult``). A
    later model does not overwrite a value an earlier one computed. Every key of
    ``PROPERTY_KEYS`` is present; one no model filled is None with a warning saying so.
    """
    values: dict[str, Any] = {k: None for k in PROPERTY_KEYS}
    unc: dict[str, Any] = {k: None for k in PROPERTY_KEYS}
    warnings: list[str] = []
    details: dict[str, Any] = {}
    offered: set[str] = set()
    for i, item in enumerate(properties or []):
        name, res = item if isinstance(item, tuple) else (f"model_{i + 1}", item)
        if not isinstance(res, PropertyResult):
            raise TypeError(f"property model {name} returned {type(res).__name__}, "
                            "not PropertyResult")
        for k, v in res.values.items():
            offered.add(k)
            if values.get(k) is None:
                values[k] = v
                unc[k] = res.uncertainty.get(k)
        for k, v in res.uncertainty.items():
            unc.setdefault(k, v)
        warnings += [str(w) for w in res.warnings]
        if res.details:
            details[name] = res.details
    for k in PROPERTY_KEYS:
        if values[k] is None and k not in offered:
            warnings.append(f"property {k} not computed: no property model provides it yet")
    return values, unc, warnings, details


def _sample(run) -> dict[str, Any]:
    sample = dict(getattr(run, "sample", None) or {})
    source = getattr(run, "source_file", None)
    stem = Path(str(source)).stem if source else "sample"
    injection = getattr(run, "injection", None)
    out: dict[str, Any] = {
        "id": sample.pop("id", None) or (f"{stem} {injection}" if injection else stem),
        "source_file": Path(str(source)).name if source else None,
    }
    out["injection"] = injection
    out["source_sha256"] = file_sha256(source) if source else None
    out.update(sample)
    return out


def components_records(comp: pd.DataFrame) -> list[dict[str, Any]]:
    """Rows of the composition table as CONTRACT ``components`` records."""
    keys = COMPONENT_KEYS + tuple(k for k in COMPONENT_EXTRAS if k in comp.columns)
    n = len(comp)
    # column by column (tolist gives plain Python values), then one dict per row
    columns = [comp[k].tolist() if k in comp.columns else [None] * n for k in keys]
    return [dict(zip(keys, row)) for row in zip(*columns)] if n else []


def build_result(run, composition, groups: dict, properties, library, settings: dict, *,
                 checks: list[dict] | None = None, extra_warnings: list[str] | None = None,
                 identification: dict | None = None,
                 generated_at: str | None = None) -> dict[str, Any]:
    """Every the dha-result/1 schema key of one run's result, JSON-safe and in a fixed order.

    Parameters
    ----------
    run : ``dha.reader.Run`` (``source_file``, ``injection``, ``sample``, ``import_log``)
    composition : ``dha.quantify.Quantified`` (or a bare composition table)
    groups : output of ``dha.groups.group_totals``
    properties : list of ``PropertyResult`` or (module name, ``PropertyResult``)
    library : ``dha.library.Library`` (``version``, ``sha256``)
    settings : the full settings used (echoed)
    checks : specification checks (``dha.specs.check``); [] when none
    extra_warnings : more warnings (identification, specs)
    identification : what the identifier reports besides warnings (markers used, names not
        in the library); the result's ``identification`` key (null for composition input)
    generated_at : ISO time; default now (UTC)

    Returns
    -------
    dict ready for ``json.dump``
    """
    table = getattr(composition, "table", composition)
    mass_balance = getattr(composition, "mass_balance", None)
    quant_warnings = list(getattr(composition, "warnings", []) or [])
    values, unc, prop_warnings, details = merge_properties(properties)
    if generated_at is None:
        generated_at = _dt.datetime.now(_dt.timezone.utc).replace(microsecond=0).isoformat()
    result: dict[str, Any] = {
        "schema": SCHEMA,
        "tool": {"version": __version__},
        "sample": _sample(run),
        "library": {"version": getattr(library, "version", None),
                    "sha256": getattr(library, "sha256", None)},
        "settings": copy.deepcopy(settings),
        "totals": groups["totals"],
        "by_carbon_number": groups["by_carbon_number"],
        "benzene": groups["benzene"],
        "oxygen_mass_pct": groups["oxygen_mass_pct"],
        "oxygenates": [{k: o[k] for k in ("name", "cas", "mass_pct", "vol_pct", "mol_pct")
                        if k in o} for o in groups["oxygenates"]],
        "properties": values,
        "uncertainty": unc,
        "checks": list(checks or []),
        "components": components_records(table),
        "import_log": [dict(e) for e in (getattr(run, "import_log", None) or [])]
        + [dict(e) for e in (getattr(composition, "import_log", None) or [])],
        "warnings": quant_warnings + prop_warnings + list(extra_warnings or []),
        "mass_balance": mass_balance,
        "aromatics_detail": groups.get("aromatics_detail"),
        "identification": identification,
    }
    if "cyclic_olefins" in groups:
        result["cyclic_olefins"] = groups["cyclic_olefins"]
    result["property_details"] = details
    result["generated_at"] = generated_at
    return jsonable(result)


def dumps(result: dict[str, Any]) -> str:
    """The JSON text of a result (UTF-8, 2-space indent, key order kept, no NaN).

    The text of ``json.dumps(jsonable(result), indent=2, ensure_ascii=False)``, made in one
    pass (values made JSON-safe as they are written; tests/test_result.py checks the two
    agree byte for byte).
    """
    out: list[str] = []
    _write(result, "\n", out)
    out.append("\n")
    return "".join(out)


def _float_text(x: float) -> str:
    """JSON text of ``jsonable(x)`` for a float: ``repr`` of ``x`` rounded to FLOAT_DIGITS
    significant digits, written from the rounded digits directly (no parse and re-print).

    >>> [_float_text(v) for v in (1/3, 100.0, 1234567890.4, 2.5e-7, -0.0, float("nan"))]
    ['0.333333333', '100.0', '1234567890.0', '2.5e-07', '0.0', 'null']
    """
    if x != x or x in (math.inf, -math.inf):
        return "null"
    if x == 0.0:
        return "0.0"
    text = f"{x:.{FLOAT_DIGITS}g}"
    if "e" not in text:                       # positional in both notations
        return text if "." in text else text + ".0"
    mantissa, _, exponent = text.partition("e")
    e = int(exponent)
    if e < -300:                              # subnormal: digits need not round-trip
        return float.__repr__(float(text))
    if e < FLOAT_DIGITS or e >= 16:           # repr keeps the exponent here as well
        return text
    # 10**9 <= |x| < 10**16: repr writes it positionally, e.g. 1.23456789e+09 -> 1234567890.0
    sign = "-" if mantissa.startswith("-") else ""
    digits = mantissa.lstrip("-").replace(".", "")
    return sign + digits + "0" * (e + 1 - len(digits)) + ".0"


_encode_str = json.encoder.encode_basestring   # the C version when available, as json uses


def _write(value: Any, newline: str, out: list[str]) -> None:
    """Append the indented JSON text of ``jsonable(value)``; ``newline`` = "\n" plus the
    current indentation."""
    kind = type(value)
    if kind is str:
        out.append(_encode_str(value))
    elif kind is float:
        out.append(_float_text(value))
    elif value is None:
        out.append("null")
    elif kind is bool:
        out.append("true" if value else "false")
    elif kind is int:
        out.append(int.__repr__(value))
    elif kind is dict:
        if not value:
            out.append("{}")
            return
        inner = newline + "  "
        sep = "{" + inner
        for k, v in value.items():
            out.append(sep)
            out.append(_encode_str(k if type(k) is str else str(k)))
            out.append(": ")
            _write(v, inner, out)
            sep = "," + inner
        out.append(newline + "}")
    elif kind is list:
        if not value:
            out.append("[]")
            return
        inner = newline + "  "
        sep = "[" + inner
        for v in value:
            out.append(sep)
            _write(v, inner, out)
            sep = "," + inner
        out.append(newline + "]")
    else:
        plain = jsonable(value)             # numpy, pandas, dates, paths, subclasses
        if isinstance(plain, str):
            out.append(_encode_str(plain))
        elif isinstance(plain, (dict, list)) or type(plain) in (float, int, bool) \
                or plain is None:
            _write(plain, newline, out)
        else:
            raise TypeError(f"cannot write {type(value).__name__} as JSON")


def write_json(result: dict[str, Any], path: str | Path) -> Path:
    """Write a result as JSON to ``path``; returns the path."""
    from dha.safety import atomic_write_text
    return atomic_write_text(path, dumps(result))
