"""Group totals: composition table -> PIONA totals, carbon-number matrix, benzene, oxygen.

:func:`group_totals` returns a dict whose keys go into the JSON result as they are:
``totals``, ``by_carbon_number``, ``benzene``, ``aromatics_detail``, ``oxygenates``,
``oxygen_mass_pct``, and ``cyclic_olefins`` when ``[quantify] cyclic_olefins_separate`` is true.

Notes
-----
- Totals in mass, volume and mole %: one sum per group of the dha-result/1 schema; each basis sums to 100
  because the composition table does.
- Carbon-number buckets ``3, 4, ..., 12, "13+"``: C1 and C2 (methane, ethane: traces in a
  stabilised petrol) are counted in the lowest bucket 3, so that the matrix still sums to 100;
  C13 and heavier form ``"13+"``. Unidentified peaks are bucketed by their carbon number too.
  Every bucket × group cell is listed (zeros included), so the matrix always has 11 × 7 rows.
- Oxygen: ``w_O = Σ w_i·15.999·n_O,i/M_i`` with IUPAC standard atomic weights; n_O from the
  library's Hill formula.
- Aromatics: benzene, toluene, C8 aromatics (xylenes, ethylbenzene, ...), C9+ aromatics.
- Cyclic olefins (library ``subgroup`` ``cycloalkene`` or ``cyclodiene``) stay inside
  ``olefins``; with the setting on they are also given on their own.
"""
from __future__ import annotations

import logging
from typing import Any

import numpy as np
import pandas as pd

from dha.quantify import ATOMIC_WEIGHT, GROUPS, parse_formula

log = logging.getLogger("dha.groups")

BASES = ("mass_pct", "vol_pct", "mol_pct")
#: Carbon-number buckets of the matrix, lowest to heaviest.
BUCKETS: tuple[int | str, ...] = (3, 4, 5, 6, 7, 8, 9, 10, 11, 12, "13+")
CYCLIC_OLEFIN_SUBGROUPS = ("cycloalkene", "cyclodiene")


def carbon_bucket(n: int) -> int | str:
    """Bucket of a carbon number: C1–C3 -> 3, C13 and above -> "13+".

    >>> carbon_bucket(2), carbon_bucket(7), carbon_bucket(15)
    (3, 7, '13+')
    """
    n = int(n)
    if n >= 13:
        return "13+"
    return max(n, 3)


def _lib_column(comp: pd.DataFrame, library, column: str) -> pd.Series:
    """A library column for each row's ``model_component`` (None where absent); one lookup."""
    table = library.components
    if column not in table.columns:
        return pd.Series([None] * len(comp), index=comp.index, dtype=object)
    values = comp["model_component"].map(table[column]).astype(object)
    return values.where(values.notna(), None)


def _oxygen_atoms(formulas: pd.Series) -> pd.Series:
    """Oxygen atoms per formula (0 for None), each distinct formula parsed once."""
    counts = {f: (parse_formula(f) or {}).get("O", 0) for f in formulas.dropna().unique()}
    return formulas.map(counts).fillna(0)


def oxygen_mass_pct(comp: pd.DataFrame, library) -> float:
    """Oxygen content [% m/m] = Σ w_i·15.999·n_O,i/M_i.

    Unidentified rows count as hydrocarbons (no oxygen).
    """
    n_o = _oxygen_atoms(_lib_column(comp, library, "formula"))
    n_o = n_o.where(comp["group"] != "unidentified", 0)
    mw = comp["molar_mass_g_mol"].astype(float)
    return float((comp["mass_pct"] * ATOMIC_WEIGHT["O"] * n_o.astype(float) / mw).sum())


def _sums(frame: pd.DataFrame) -> dict[str, float]:
    return {b: float(frame[b].sum()) for b in BASES}


def group_totals(comp: pd.DataFrame, library, settings: dict) -> dict[str, Any]:
    """Totals, carbon-number matrix, benzene/aromatics detail, oxygenates and oxygen [%].

    Parameters
    ----------
    comp : composition table (DEVELOPERS.md) with ``mass_pct``, ``vol_pct``, ``mol_pct``
    library : ``dha.library.Library`` (formula and subgroup by ``model_component``)
    settings : full settings; reads ``[quantify] cyclic_olefins_separate``

    Returns
    -------
    dict with ``totals`` {basis: {group: %}}, ``by_carbon_number`` [{carbon_number, group,
    mass_pct, vol_pct, mol_pct}], ``benzene`` {mass_pct, vol_pct}, ``aromatics_detail``,
    ``oxygenates`` [{name, cas, mass_pct, vol_pct, mol_pct}], ``oxygen_mass_pct`` and
    optionally ``cyclic_olefins`` {mass_pct, vol_pct, mol_pct}.
    """
    unknown = set(comp["group"]) - set(GROUPS)
    if unknown:
        raise ValueError(f"composition table has unknown group(s) {sorted(unknown)}")
    group = comp["group"].to_numpy(dtype=object)
    values = {b: np.nan_to_num(comp[b].to_numpy(dtype=float), nan=0.0) for b in BASES}
    in_group = {g: group == g for g in GROUPS}
    totals = {b: {g: float(values[b][in_group[g]].sum()) for g in GROUPS} for b in BASES}

    n = pd.to_numeric(comp["carbon_number"]).to_numpy(dtype=float)
    bucket = np.where(n >= 13, len(BUCKETS) - 1, np.clip(n, 3, 12) - 3).astype(int)
    matrix = []
    for i, bk in enumerate(BUCKETS):
        in_bucket = bucket == i
        for g in GROUPS:
            mask = in_bucket & in_group[g]
            matrix.append({"carbon_number": bk, "group": g,
                           **{b: float(values[b][mask].sum()) for b in BASES}})

    component = comp["component"]
    arom = comp["group"] == "aromatics"
    benzene = comp[component == "benzene"]
    toluene = comp[component == "toluene"]
    c8 = comp[arom & (comp["carbon_number"] == 8)]
    c9 = comp[arom & (comp["carbon_number"] >= 9)]
    detail = {"benzene": _sums(benzene), "toluene": _sums(toluene),
              "c8_aromatics": _sums(c8), "c9plus_aromatics": _sums(c9)}

    oxy = comp[comp["group"] == "oxygenates"]
    oxygenates = [{"name": r["name"], "cas": r["cas"], "mass_pct": float(r["mass_pct"]),
                   "vol_pct": float(r["vol_pct"]), "mol_pct": float(r["mol_pct"])}
                  for _, r in oxy.iterrows()]

    out: dict[str, Any] = {
        "totals": totals,
        "by_carbon_number": matrix,
        "benzene": {"mass_pct": detail["benzene"]["mass_pct"],
                    "vol_pct": detail["benzene"]["vol_pct"]},
        "aromatics_detail": detail,
        "oxygen_mass_pct": oxygen_mass_pct(comp, library),
        "oxygenates": oxygenates,
    }
    if settings.get("quantify", {}).get("cyclic_olefins_separate", False):
        sub = _lib_column(comp, library, "subgroup")
        cyc = comp[(comp["group"] == "olefins") & sub.isin(CYCLIC_OLEFIN_SUBGROUPS)]
        out["cyclic_olefins"] = _sums(cyc)
    if (comp["carbon_number"] < 3).any():
        log.debug("C1/C2 entries counted in bucket 3")
    if not np.isclose(sum(totals["mass_pct"].values()), 100.0, atol=1e-6):
        log.warning("group totals sum to %.6f %% m/m, not 100", sum(totals["mass_pct"].values()))
    return out
