"""Specification checks: a result's values against a profile's limits.

A profile is a TOML file in ``dha/spec_profiles/`` (format in its README.md) or any path.
Each limit names a *quantity* (``QUANTITIES``), a kind (``min``/``max``) and a value.

Verdicts follow the idea of EN ISO 4259 (use of precision data in specification checks): a
value closer to the limit than its expanded uncertainty cannot be called pass or fail.

    U = 2·u  (coverage factor k = 2, about 95 % for a normal distribution; GUM convention)
    pass      value on the right side of the limit by more than U
    fail      value on the wrong side of the limit by more than U
    marginal  |value − limit| ≤ U  ("within uncertainty of the limit")

``u`` is the result's standard uncertainty of that quantity (``result["uncertainty"]``); where
the result has none (composition quantities, for now) ``U = 0`` and the verdict is plain
pass/fail, which the check records as ``"uncertainty": null``.

>>> verdict(94.8, 95.0, "min", 0.4)
'marginal'
>>> verdict(96.0, 95.0, "min", 0.4)
'pass'
>>> verdict(1.2, 1.0, "max", None)
'fail'
"""
from __future__ import annotations

import math
from functools import lru_cache
from pathlib import Path
from typing import Any

from dha.errors import SpecError

PROFILE_DIR = Path(__file__).with_name("spec_profiles")

#: Checkable quantities and their units.
QUANTITIES: dict[str, str] = {
    "ron": "-", "mon": "-", "aki": "-", "sensitivity": "-",
    "density_kg_m3": "kg/m3", "dvpe_kpa": "kPa", "rvp_psi": "psi", "vli": "-",
    "e70_vol_pct": "% v/v", "e100_vol_pct": "% v/v", "e150_vol_pct": "% v/v",
    "t10_c": "degC", "t50_c": "degC", "t90_c": "degC", "fbp_c": "degC",
    "net_heat_mj_kg": "MJ/kg",
    "benzene_vol_pct": "% v/v", "benzene_mass_pct": "% m/m",
    "aromatics_vol_pct": "% v/v", "olefins_vol_pct": "% v/v",
    "oxygen_mass_pct": "% m/m",
    "ethanol_vol_pct": "% v/v", "methanol_vol_pct": "% v/v",
    "ethers_c5plus_vol_pct": "% v/v",
    "unidentified_mass_pct": "% m/m",
}

_ETHANOL_CAS, _METHANOL_CAS = "64-17-5", "67-56-1"
COVERAGE_FACTOR = 2.0


def verdict(value: float, limit: float, kind: str, u: float | None) -> str:
    """Pass / fail / marginal for one value against one limit (see module notes)."""
    margin = COVERAGE_FACTOR * u if u else 0.0
    distance = value - limit if kind == "min" else limit - value  # > 0 means inside
    if margin > 0 and abs(distance) <= margin:
        return "marginal"
    return "pass" if distance >= 0 else "fail"


def list_profiles() -> list[tuple[str, str]]:
    """(name, description) of the shipped profiles, sorted by name."""
    out = []
    for path in sorted(PROFILE_DIR.glob("*.toml")):
        out.append((path.stem, load_profile(path.stem)["description"]))
    return out


@lru_cache(maxsize=None)
def _read_profile(path: Path) -> dict[str, Any]:
    from dha.settings import read_toml
    data = read_toml(path, "specification profile", SpecError,
                     "profile, see dha/spec_profiles/README.md")
    limits = data.get("limit")
    if not isinstance(limits, list) or not limits or not all(isinstance(x, dict) for x in limits):
        raise SpecError(f"specification profile {path.name}: key 'limit' must be [[limit]] "
                        "tables (quantity, kind, value), not "
                        f"{'missing' if limits is None else repr(limits)[:60]}; see "
                        "dha/spec_profiles/README.md")
    bounds: dict[str, dict[str, float]] = {}
    for i, lim in enumerate(limits, start=1):
        where = f"specification profile {path.name}, limit {i}"
        if lim.get("quantity") not in QUANTITIES:
            raise SpecError(f"{where}: unknown quantity {lim.get('quantity')!r}; "
                            f"known: {', '.join(QUANTITIES)}")
        if lim.get("kind") not in ("min", "max"):
            raise SpecError(f"{where}: kind must be 'min' or 'max', not {lim.get('kind')!r}")
        if not isinstance(lim.get("value"), (int, float)) or isinstance(lim.get("value"), bool):
            raise SpecError(f"{where}: value must be a number, not {lim.get('value')!r}")
        if not math.isfinite(lim["value"]):
            raise SpecError(f"{where}: value must be a finite number, not {lim['value']!r}")
        kinds = bounds.setdefault(lim["quantity"], {})
        # the tightest limit of each kind decides whether the range is empty
        pick = max if lim["kind"] == "min" else min
        kinds[lim["kind"]] = pick(kinds.get(lim["kind"], lim["value"]), lim["value"])
        if "min" in kinds and "max" in kinds and kinds["min"] > kinds["max"]:
            raise SpecError(f"{where}: {lim['quantity']} min {kinds['min']:g} is above max "
                            f"{kinds['max']:g}; no value could pass; fix the limits")
    return {"name": path.stem, "description": str(data.get("description", "")),
            "source": str(data.get("source", "")), "limits": limits}


def load_profile(name_or_path: str | Path) -> dict[str, Any]:
    """A profile by shipped name (``en228-e10-summer``) or by path to a TOML file."""
    path = Path(name_or_path)
    if path.suffix != ".toml":
        path = PROFILE_DIR / f"{name_or_path}.toml"
    if not path.is_file():
        known = ", ".join(p.stem for p in sorted(PROFILE_DIR.glob("*.toml")))
        raise SpecError(f"specification profile {name_or_path!r} not found; shipped: {known} "
                        "(or give a path to a .toml file)")
    return _read_profile(path.resolve())


def quantities(result: dict[str, Any], library=None) -> dict[str, tuple[float | None, float | None]]:
    """Checkable quantities of a result as {key: (value, standard uncertainty)}.

    ``library`` (a ``dha.library.Library``) is needed for ``ethers_c5plus_vol_pct``: it tells
    ethers from alcohols through its ``subgroup`` column.
    """
    props = result.get("properties") or {}
    unc = result.get("uncertainty") or {}
    out: dict[str, tuple[float | None, float | None]] = {}
    for key in QUANTITIES:
        if key in props:
            out[key] = (props.get(key), unc.get(key))
    totals_vol = (result.get("totals") or {}).get("vol_pct") or {}
    totals_mass = (result.get("totals") or {}).get("mass_pct") or {}
    benzene = result.get("benzene") or {}
    out["benzene_vol_pct"] = (benzene.get("vol_pct"), None)
    out["benzene_mass_pct"] = (benzene.get("mass_pct"), None)
    out["aromatics_vol_pct"] = (totals_vol.get("aromatics"), None)
    out["olefins_vol_pct"] = (totals_vol.get("olefins"), None)
    out["unidentified_mass_pct"] = (totals_mass.get("unidentified"), None)
    out["oxygen_mass_pct"] = (result.get("oxygen_mass_pct"), None)
    oxy = result.get("oxygenates") or []
    out["ethanol_vol_pct"] = (sum(o.get("vol_pct") or 0.0 for o in oxy if o.get("cas") == _ETHANOL_CAS), None)
    out["methanol_vol_pct"] = (sum(o.get("vol_pct") or 0.0 for o in oxy if o.get("cas") == _METHANOL_CAS), None)
    ethers = None
    if library is not None:
        table = library.components
        ethers = 0.0
        for comp in result.get("components") or []:
            name = comp.get("name")
            if comp.get("group") == "oxygenates" and name in table.index:
                # scalar lookups (.at), not a row Series per component
                if table.at[name, "subgroup"] == "ether" and \
                        int(table.at[name, "carbon_number"]) >= 5:
                    ethers += comp.get("vol_pct") or 0.0
    out["ethers_c5plus_vol_pct"] = (ethers, None)
    return out


def check(result: dict[str, Any], profile: dict[str, Any], library=None) -> tuple[list[dict], list[str]]:
    """Checks of ``result`` against ``profile``: (checks, warnings).

    A limit whose quantity is null in the result is not checked; a warning says so.
    """
    values = quantities(result, library)
    checks, warnings = [], []
    for lim in profile["limits"]:
        key = lim["quantity"]
        value, u = values.get(key, (None, None))
        if value is None or (isinstance(value, float) and math.isnan(value)):
            warnings.append(f"spec {profile['name']}: {key} {lim['kind']} {lim['value']} "
                            f"not checked: no value for {key}")
            continue
        checks.append({
            "spec": profile["name"], "property": key, "limit": float(lim["value"]),
            "kind": lim["kind"], "value": value, "unit": QUANTITIES[key],
            "uncertainty": u, "verdict": verdict(value, float(lim["value"]), lim["kind"], u),
        })
    return checks, warnings
