"""What differs between two results: for contract labs re-running archives with a newer library.

``compare_results(a, b)`` returns a table (DataFrame) with one row per difference:
``section`` (library, settings, totals, properties, components, ...), ``item``, ``a``, ``b``,
``delta`` (b − a for numbers) and ``note``. Numbers closer than ``tolerance`` (absolute, in the
value's own unit) are taken as equal, so that rounding in the JSON is not reported.
"""
from __future__ import annotations

import json
from pathlib import Path
from typing import Any

import pandas as pd

from dha.errors import InputError

COLUMNS = ["pair", "section", "item", "a", "b", "delta", "note"]


def load_result(path: Path) -> dict[str, Any]:
    """Read one result JSON; InputError if it is not a dha result."""
    try:
        data = json.loads(Path(path).read_text(encoding="utf-8"))
    except (OSError, UnicodeDecodeError, json.JSONDecodeError) as err:
        raise InputError(f"{path}: not a readable JSON result ({err.__class__.__name__}); "
                         "give result files written by `dha report`") from None
    if not isinstance(data, dict) or not str(data.get("schema", "")).startswith("dha-result/"):
        raise InputError(f"{path}: no 'schema: dha-result/...' key; this is not a dha result")
    return data


def _num(x: Any) -> float | None:
    return float(x) if isinstance(x, (int, float)) and not isinstance(x, bool) else None


def _flatten(obj: Any, prefix: str = "") -> dict[str, Any]:
    if isinstance(obj, dict):
        out: dict[str, Any] = {}
        for k, v in obj.items():
            out.update(_flatten(v, f"{prefix}.{k}" if prefix else str(k)))
        return out
    return {prefix: obj}


def _diff_values(section: str, a: dict[str, Any], b: dict[str, Any], tolerance: float) -> list[dict]:
    rows = []
    for key in sorted(set(a) | set(b)):
        va, vb = a.get(key), b.get(key)
        na, nb = _num(va), _num(vb)
        if na is not None and nb is not None:
            if abs(nb - na) > tolerance:
                rows.append({"section": section, "item": key, "a": na, "b": nb,
                             "delta": nb - na, "note": ""})
        elif va != vb:
            note = "only in B" if key not in a else "only in A" if key not in b else ""
            rows.append({"section": section, "item": key, "a": va, "b": vb,
                         "delta": None, "note": note})
    return rows


def compare_results(a: dict[str, Any], b: dict[str, Any], tolerance: float = 0.005) -> pd.DataFrame:
    """Differences between results ``a`` and ``b`` (see module docstring).

    >>> ra = {"library": {"version": "1"}, "properties": {"ron": 95.0}, "components": []}
    >>> rb = {"library": {"version": "2"}, "properties": {"ron": 95.4}, "components": []}
    >>> t = compare_results(ra, rb)
    >>> list(t["item"]), round(float(t["delta"].iloc[1]), 3)
    (['version', 'ron'], 0.4)
    """
    rows: list[dict] = []
    rows += _diff_values("library", a.get("library") or {}, b.get("library") or {}, 0.0)
    rows += _diff_values("settings", _flatten(a.get("settings") or {}),
                         _flatten(b.get("settings") or {}), 0.0)
    for basis in ("mass_pct", "vol_pct", "mol_pct"):
        rows += _diff_values(f"totals {basis}", (a.get("totals") or {}).get(basis) or {},
                             (b.get("totals") or {}).get(basis) or {}, tolerance)
    rows += _diff_values("benzene", a.get("benzene") or {}, b.get("benzene") or {}, tolerance)
    rows += _diff_values("oxygen", {"oxygen_mass_pct": a.get("oxygen_mass_pct")},
                         {"oxygen_mass_pct": b.get("oxygen_mass_pct")}, tolerance)
    rows += _diff_values("properties", a.get("properties") or {}, b.get("properties") or {}, tolerance)
    rows += _diff_values("checks", {f"{c['spec']}:{c['property']}:{c['kind']}": c.get("verdict")
                                    for c in a.get("checks") or []},
                         {f"{c['spec']}:{c['property']}:{c['kind']}": c.get("verdict")
                          for c in b.get("checks") or []}, 0.0)
    rows += _component_diff(a.get("components") or [], b.get("components") or [], tolerance)
    table = pd.DataFrame(rows, columns=COLUMNS[1:])
    return table


def _peak_key(c: dict[str, Any]) -> tuple:
    return (c.get("rt_min"), c.get("area"))


def _component_diff(a: list[dict], b: list[dict], tolerance: float) -> list[dict]:
    """Per peak (same retention time and area): identification changes; per name: mass % changes."""
    rows = []
    peaks_a = {_peak_key(c): c for c in a if c.get("rt_min") is not None}
    peaks_b = {_peak_key(c): c for c in b if c.get("rt_min") is not None}
    for key in sorted(set(peaks_a) & set(peaks_b), key=lambda k: (k[0] or 0.0)):
        ca, cb = peaks_a[key], peaks_b[key]
        if ca.get("name") != cb.get("name"):
            rows.append({"section": "identification", "item": f"peak at {key[0]} min",
                         "a": ca.get("name"), "b": cb.get("name"), "delta": None,
                         "note": f"match {ca.get('match')} -> {cb.get('match')}"})
    mass_a: dict[str, float] = {}
    mass_b: dict[str, float] = {}
    for src, dst in ((a, mass_a), (b, mass_b)):
        for c in src:
            name = c.get("name") or "unidentified"
            dst[name] = dst.get(name, 0.0) + (_num(c.get("mass_pct")) or 0.0)
    rows += _diff_values("components mass_pct", mass_a, mass_b, tolerance)
    return rows


#: JSON files an output folder holds that are not results (batch record, summaries).
_NOT_RESULTS = {"summary.json", "dha-batch.json"}


def _is_result_file(path: Path) -> bool:
    if path.name in _NOT_RESULTS or path.name.startswith("."):
        return False
    try:
        with path.open("r", encoding="utf-8") as fh:
            head = fh.read(4096)
    except (OSError, UnicodeDecodeError):
        return False
    return '"dha-result/' in head


def _result_files(path: Path) -> dict[str, Path]:
    """Result JSON files under a folder (any depth: batch output mirrors the input folders),
    keyed by their path relative to it; a file is keyed by its name."""
    if path.is_dir():
        return {p.relative_to(path).as_posix(): p for p in sorted(path.rglob("*.json"))
                if _is_result_file(p)}
    return {path.name: path}


def compare_paths(a: Path, b: Path, tolerance: float = 0.005) -> pd.DataFrame:
    """Compare two result files, or two folders of results paired by relative path.

    The table's ``attrs`` hold the counts: ``pairs`` (result pairs compared), ``pairs_differing``,
    ``only_in_a`` and ``only_in_b`` (files without a partner).
    """
    a, b = Path(a), Path(b)
    for p in (a, b):
        if not p.exists():
            raise InputError(f"{p}: no such file or folder")
    if a.is_file() and b.is_file():
        pairs = [(a.name if a.name == b.name else f"{a.name} vs {b.name}", a, b)]
        only: list[tuple[str, str]] = []
    else:
        if a.is_file() != b.is_file():
            raise InputError(f"{a} and {b}: give two result files or two folders")
        files_a, files_b = _result_files(a), _result_files(b)
        common = sorted(set(files_a) & set(files_b))
        pairs = [(n, files_a[n], files_b[n]) for n in common]
        only = [(n, "only in A") for n in sorted(set(files_a) - set(files_b))]
        only += [(n, "only in B") for n in sorted(set(files_b) - set(files_a))]
        if not pairs and not only:
            raise InputError(f"{a} and {b}: no result JSON files found to compare")
    frames = []
    differing = 0
    for name, pa, pb in pairs:
        t = compare_results(load_result(pa), load_result(pb), tolerance)
        if not t.empty:
            differing += 1
            t.insert(0, "pair", name)
            frames.append(t)
    if only:
        frames.append(pd.DataFrame([{"pair": n, "section": "files", "item": n, "a": None,
                                     "b": None, "delta": None, "note": note} for n, note in only]))
    table = (pd.concat(frames, ignore_index=True) if frames
             else pd.DataFrame(columns=COLUMNS))
    table.attrs.update(pairs=len(pairs), pairs_differing=differing,
                       only_in_a=sum(1 for _n, note in only if note == "only in A"),
                       only_in_b=sum(1 for _n, note in only if note == "only in B"))
    return table


def _cell(value: Any, note: str = "", side: str = "") -> str:
    """Screen text of a value: numbers to 6 significant digits, absent values in words."""
    if value is None or (isinstance(value, float) and value != value):
        if side == "delta":
            return ""
        if note == f"only in {'B' if side == 'a' else 'A'}":
            return "(absent)"
        if note == f"only in {side.upper()}":
            return "present"
        return "(none)"
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, (int, float)):
        text = f"{value:+.6g}" if side == "delta" else f"{value:.6g}"
        return text
    return str(value)


def screen_rows(table: pd.DataFrame) -> list[list[str]]:
    """The difference table as text cells for the terminal: no "NaN" or "None" anywhere."""
    rows = []
    for rec in table.to_dict("records"):
        note = rec.get("note") or ""
        note = "" if (isinstance(note, float) and note != note) else str(note)
        rows.append([str(rec.get("pair") or ""), str(rec.get("section") or ""),
                     str(rec.get("item") or ""), _cell(rec.get("a"), note, "a"),
                     _cell(rec.get("b"), note, "b"), _cell(rec.get("delta"), note, "delta"),
                     note])
    return rows
