"""Duplicate injections: several results of one sample averaged into one, with a repeatability check.

Which results belong together (:func:`group_injections`): results whose export gives the
same sample id (two files of one sample), and the runs of one workbook (one sheet per
injection) whose export gives no sample id. A result alone in its group is left as it is.

The averaged result (:func:`average_results`) has the same keys as a single one:

- numbers are the mean over the injections (``totals``, ``by_carbon_number``, ``benzene``,
  ``oxygen_mass_pct``, ``properties``, ``uncertainty``, ``mass_balance``, ...); lists of records
  are aligned by their identity (``name``; ``group`` + ``carbon_number``; ``spec`` +
  ``property``), a component missing from one injection counts as 0 in its ``*_pct`` values;
  texts and flags come from the first injection (flags: true only if true in all);
- the specification checks are run again on the averaged values; a run-quality check keeps
  the worst verdict of the injections;
- ``replicates``: the number of injections, each injection's id/file/sheet, the spread
  (largest minus smallest value) of every property with a limit, the limits, and each
  injection's own result (without ``settings``, which are the same) under ``injections``;
- ``checks`` gains one entry per limited property: ``{"spec": "repeatability", "property",
  "limit", "kind": "max", "value": spread, "verdict": "pass"|"fail"}``; a failed one is also a
  warning (repeat the injection), and counts for ``--strict``.

Limits: ``[injections] repeatability`` (property key -> largest allowed spread, in the unit of
the value): keys of ``properties`` (``ron``, ``dvpe_kpa``...), ``benzene_vol_pct``,
``oxygen_mass_pct`` and ``<group>_<basis>`` (``aromatics_vol_pct``). The shipped limits are
placeholders (common practice, no source): a lab puts its method's repeatability there.
"""
from __future__ import annotations

import copy
import math
from pathlib import Path
from typing import Any, Callable

from dha.errors import SettingsError

VERDICT_ORDER = {"pass": 0, "marginal": 1, "fail": 2}
_GROUP_KEYS = ("n_paraffins", "isoparaffins", "olefins", "naphthenes", "aromatics",
               "oxygenates", "unidentified")
_BASES = ("mass_pct", "vol_pct", "mol_pct")
#: identity of a record in a list, tried in order
_RECORD_KEYS = (("spec", "property"), ("group", "carbon_number"), ("name",), ("class",),
                ("carbon_number", "group"))
#: result keys not averaged (taken from the first injection or rebuilt)
_FIRST = ("schema", "tool", "library", "settings", "generated_at")


def _limits(settings: dict) -> dict[str, float]:
    limits = (settings.get("injections", {}) or {}).get("repeatability") or {}
    if not isinstance(limits, dict):
        raise SettingsError("[injections] repeatability must be a table like "
                            "{ benzene_vol_pct = 0.05, ron = 0.3 }")
    out = {}
    for key, value in limits.items():
        if isinstance(value, bool) or not isinstance(value, (int, float)) or value < 0:
            raise SettingsError(f"[injections] repeatability.{key} = {value!r}: give the largest "
                                "allowed difference between injections (a number >= 0)")
        out[str(key)] = float(value)
    return out


def value_of(result: dict, key: str) -> float | None:
    """A reported value by its plain key (see the module docstring), or None.

    >>> value_of({"benzene": {"vol_pct": 0.8}}, "benzene_vol_pct")
    0.8
    >>> value_of({"totals": {"vol_pct": {"aromatics": 31.0}}}, "aromatics_vol_pct")
    31.0
    """
    if key in (result.get("properties") or {}):
        return result["properties"][key]
    if key == "oxygen_mass_pct":
        return result.get("oxygen_mass_pct")
    if key.startswith("benzene_"):
        return (result.get("benzene") or {}).get(key[len("benzene_"):])
    for basis in _BASES:
        if key.endswith("_" + basis):
            group = key[: -len(basis) - 1]
            if group in _GROUP_KEYS:
                return ((result.get("totals") or {}).get(basis) or {}).get(group)
    return None


def group_injections(items: list[tuple[str, dict]]) -> list[list[tuple[str, dict]]]:
    """Groups of (stem, result) that are injections of one sample, in first-seen order.

    Key: the export's sample id when it gives one, else the source file (the sheets of one
    workbook); a result with neither stays alone.
    """
    groups: dict[Any, list[tuple[str, dict]]] = {}
    for i, (stem, result) in enumerate(items):
        sample = result.get("sample") or {}
        stem_of_file = Path(str(sample.get("source_file") or "")).stem
        # the reader's and the result's stand-in ids when the export gives none
        fallback = {stem_of_file} | ({f"{stem_of_file}-{sample['injection']}",
                                      f"{stem_of_file} {sample['injection']}"}
                                     if sample.get("injection") else set())
        key: Any = ("id", sample["id"]) if sample.get("id") and sample["id"] not in fallback \
            else None
        if key is None and sample.get("injection") and sample.get("source_file"):
            key = ("file", sample.get("source_sha256") or sample["source_file"])
        groups.setdefault(key if key is not None else ("alone", i), []).append((stem, result))
    return list(groups.values())


def _is_num(v: Any) -> bool:
    return isinstance(v, (int, float)) and not isinstance(v, bool)


def _record_key(rec: dict) -> tuple | None:
    for keys in _RECORD_KEYS:
        if all(k in rec for k in keys):
            return tuple((k, rec[k]) for k in keys)
    return None


def _mean(values: list[Any], name: str = "") -> Any:
    present = [v for v in values if v is not None]
    if not present:
        return None
    first = present[0]
    if all(_is_num(v) for v in present):
        if name.endswith("_pct") or name in _GROUP_KEYS:
            # an amount absent from one injection is 0 there
            vals = [float(v) if v is not None else 0.0 for v in values]
        else:
            vals = [float(v) for v in present]
        finite = [v for v in vals if math.isfinite(v)]
        return sum(finite) / len(finite) if finite else None
    if all(isinstance(v, bool) for v in present):
        return all(present)
    if isinstance(first, dict):
        keys = list(dict.fromkeys(k for v in present if isinstance(v, dict) for k in v))
        return {k: _mean([v.get(k) if isinstance(v, dict) else None for v in values], k)
                for k in keys}
    if isinstance(first, list) and all(isinstance(v, list) for v in present) \
            and all(isinstance(r, dict) for v in present for r in v):
        keyed = [{_record_key(r): r for r in v} for v in values if v is not None]
        if all(None not in k for k in keyed):
            order = list(dict.fromkeys(k for d in keyed for k in d))
            out = []
            for k in order:
                recs = [d.get(k) for d in keyed]
                merged = _mean(recs, name)
                if isinstance(merged, dict):
                    merged.update(dict(k))
                out.append(merged)
            return out
    return copy.deepcopy(first)


def average_results(group: list[tuple[str, dict]], settings: dict, library,
                    spec: str | None) -> dict:
    """One result from the injections of one sample (see the module docstring)."""
    results = [r for _, r in group]
    first = results[0]
    out: dict[str, Any] = {}
    for key in first:
        if key in _FIRST:
            out[key] = copy.deepcopy(first[key])
        elif key == "sample":
            sample = copy.deepcopy(first["sample"])
            sample["injection"] = None
            out[key] = sample
        elif key == "warnings":
            out[key] = list(dict.fromkeys(w for r in results for w in r.get("warnings", [])))
        elif key == "import_log":
            out[key] = [dict(e, reason=f"[{_label(r)}] {e.get('reason', '')}")
                        for r in results for e in r.get("import_log", [])]
        elif key == "checks":
            out[key] = []
        elif key == "identification":
            out[key] = _worst_identification(results)
        else:
            out[key] = _mean([r.get(key) for r in results], key)
    # checks: the run-quality entries keep the worst verdict; specification checks anew
    out["checks"] = _quality_checks(results)
    if spec is None:
        spec = settings.get("report", {}).get("spec", "")
    if spec:
        from dha import specs
        checks, spec_warnings = specs.check(out, specs.load_profile(spec), library)
        from dha.result import jsonable
        out["checks"] += [c for c in jsonable(checks) if c.get("spec") != "run quality"]
        out["warnings"] += [w for w in spec_warnings if w not in out["warnings"]]
    limits = _limits(settings)
    spread: dict[str, float | None] = {}
    for prop, limit in limits.items():
        vals = [value_of(r, prop) for r in results]
        if any(v is None for v in vals):
            spread[prop] = None
            continue
        d = max(vals) - min(vals)
        spread[prop] = d
        ok = d <= limit + 1e-12
        entry = {"spec": "repeatability", "property": prop, "limit": limit, "kind": "max",
                 "value": d, "verdict": "pass" if ok else "fail",
                 "reasons": [] if ok else [
                     f"the {len(results)} injections differ by {d:.4g} (limit {limit:g})"]}
        out["checks"].append(entry)
        if not ok:
            out["warnings"].append(
                f"repeatability: the injections of sample {out['sample'].get('id')} differ by "
                f"{d:.4g} in {prop} (limit {limit:g}, [injections] repeatability); inject the "
                "sample again before reporting")
    out["warnings"].append(
        f"result averaged over {len(results)} injections: "
        + ", ".join(_label(r) for r in results))
    out["replicates"] = {
        "count": len(results),
        "injections": [{"stem": stem, "id": (r.get("sample") or {}).get("id"),
                        "source_file": (r.get("sample") or {}).get("source_file"),
                        "injection": (r.get("sample") or {}).get("injection")}
                       for stem, r in group],
        "limits": limits,
        "spread": spread,
        "results": [{k: v for k, v in r.items() if k != "settings"} for r in results],
    }
    return out


def _label(result: dict) -> str:
    s = result.get("sample") or {}
    return " ".join(str(x) for x in (s.get("source_file"), s.get("injection")) if x)


def _quality_checks(results: list[dict]) -> list[dict]:
    worst: dict[tuple, dict] = {}
    for r in results:
        for c in r.get("checks", []):
            if c.get("spec") != "run quality":
                continue
            key = (c.get("spec"), c.get("property"))
            if key not in worst or VERDICT_ORDER.get(c.get("verdict"), 0) > \
                    VERDICT_ORDER.get(worst[key].get("verdict"), 0):
                worst[key] = copy.deepcopy(c)
    return list(worst.values())


def _worst_identification(results: list[dict]) -> Any:
    """The identification block of the injection with the worst run-quality verdict."""
    def rank(r: dict) -> int:
        return max([VERDICT_ORDER.get(c.get("verdict"), 0) for c in r.get("checks", [])
                    if c.get("spec") == "run quality"] or [0])
    return copy.deepcopy(max(results, key=rank).get("identification"))


def combine_injections(items: list[tuple[str, dict]], settings: dict, library,
                       spec: str | None) -> list[tuple[str, dict]]:
    """(stem, result) list with the injections of each sample replaced by their average.

    The averaged result's stem is the common stem of its injections' files (the workbook's
    stem, or the sample id for several files).
    """
    out = []
    for group in group_injections(items):
        if len(group) == 1:
            out.append(group[0])
            continue
        result = average_results(group, settings, library, spec)
        files = {Path(str((r.get("sample") or {}).get("source_file") or "")).stem
                 for _, r in group}
        ids = {(r.get("sample") or {}).get("id") for _, r in group}
        if len(files) == 1 and len(ids) > 1:
            # sheets of one workbook without a sample id: the sample is the file
            result["sample"]["id"] = next(iter(files))
        stem = files.pop() if len(files) == 1 else str(result["sample"].get("id") or group[0][0])
        stem = "".join(ch if ch.isalnum() or ch in "-_." else "_" for ch in stem) + "__average"
        result["sample"]["output_stem"] = stem
        out.append((stem, result))
    return out


def report_averaged(inputs, settings: dict, library, spec: str | None,
                    process: Callable[[Any], list[tuple[str, dict]]]) -> list[tuple[str, dict]]:
    """Process every input with ``process(path)`` and average the injections of each sample."""
    items: list[tuple[str, dict]] = []
    for path in inputs:
        items += process(path)
    return combine_injections(items, settings, library, spec)
