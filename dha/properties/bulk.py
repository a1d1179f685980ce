r"""Bulk properties from a composition: density, heats of combustion, elements, CO2.

All values are mixing rules over the composition table's rows, each row taking the library
values of its ``model_component`` (an unidentified peak takes those of its stand-in
isoparaffin; the spread of the library's components of the same carbon number enters the
uncertainty).

- Density at 15 °C by volume additivity (the DHA convention, common trade practice):
  :math:`1/\rho = \sum_i w_i/\rho_i` with mass fractions w and the library's 15 °C densities.
- Gross and net heat of combustion (liquid, 25 °C), mass-weighted:
  :math:`H = \sum_i w_i H_i` (heats of mixing neglected).
- Carbon, hydrogen (and oxygen) mass % from the formulas with IUPAC conventional atomic weights
  (C 12.011, H 1.008, O 15.999); H/C molar ratio; mean molar mass
  :math:`\bar M = 1/\sum_i (w_i/M_i)`.
- CO2 per MJ (net basis): :math:`w_C\cdot(44.009/12.011)\cdot 1000 / H_{net}` [g/MJ], all
  carbon burnt to CO2.
"""
from __future__ import annotations

import logging
import re
from typing import Any

import numpy as np
import pandas as pd

from dha.errors import LibraryError
from dha.memo import ObjectMemo
from dha.properties import PropertyResult

log = logging.getLogger("dha.bulk")

#: IUPAC conventional atomic weights [g/mol] (IUPAC 2021 abridged table).
ATOMIC_WEIGHT = {"C": 12.011, "H": 1.008, "O": 15.999}
#: Molar mass of CO2 [g/mol] from the weights above.
M_CO2 = ATOMIC_WEIGHT["C"] + 2 * ATOMIC_WEIGHT["O"]

#: Relative standard uncertainty of volume additivity at 15 °C [-]. Basis: the RMS deviation
#: of volume-additive densities from measured ones, 0.40 % (max 0.65 %), over the six binary
#: mixtures at 298.15 K in the NIST ThermoML archive (openff-sage compilation) whose pure
#: densities are in the same set (isooctane + DIPE, cyclohexane + benzene);
#: tests/test_bulk.py recomputes it. Petrol's excess volumes are mostly smaller.
U_DENSITY_REL = 0.004
#: Relative standard uncertainty of the heats of combustion [-]: mixing rule plus the
#: components' heats from enthalpies of formation (judgement, no source).
U_HEAT_REL = 0.002
#: Share of the mass [%] without a heat of combustion above which no heat is reported.
MAX_MISSING_HEAT_PCT = 2.0

_FORMULA_RE = re.compile(r"([A-Z][a-z]?)(\d*)")


def formula_atoms(formula: str) -> dict[str, int]:
    """Atom counts of a Hill formula.

    >>> formula_atoms("C2H6O")
    {'C': 2, 'H': 6, 'O': 1}
    """
    text = str(formula).strip()
    atoms: dict[str, int] = {}
    pos = 0
    for m in _FORMULA_RE.finditer(text):
        if m.start() != pos:
            break
        atoms[m.group(1)] = atoms.get(m.group(1), 0) + (int(m.group(2)) if m.group(2) else 1)
        pos = m.end()
    if pos != len(text) or not atoms:
        raise LibraryError(f"components.csv: formula {formula!r} cannot be read; write a Hill "
                           "formula such as C7H16")
    return atoms


def density_volume_additive(mass_frac, density_kg_m3) -> float:
    """Mixture density [kg/m³] by volume additivity, 1/ρ = Σ w_i/ρ_i.

    >>> round(density_volume_additive([0.5, 0.5], [700.0, 800.0]), 2)
    746.67
    """
    w = np.asarray(mass_frac, float)
    return float(w.sum() / np.sum(w / np.asarray(density_kg_m3, float)))


#: Per-library arrays of the values bulk needs, per components table.
_TABLES = ObjectMemo()


def _library_table(comps: pd.DataFrame) -> dict[str, Any]:
    """The library columns bulk needs as arrays in library order, with the formulas' atom
    counts (NaN where a formula cannot be read; reported when such a row is used), computed
    once per components table."""
    return _TABLES.get(comps, lambda: _build_library_table(comps))


def _build_library_table(comps: pd.DataFrame) -> dict[str, Any]:
    atoms = []
    for f in comps["formula"]:
        try:
            atoms.append(formula_atoms(f))
        except LibraryError:
            atoms.append(None)
    table = {
        "index": comps.index,
        "carbon_number": comps["carbon_number"].to_numpy(),
        "density": pd.to_numeric(comps["density_15c_kg_m3"], errors="coerce").to_numpy(float),
        "molar_mass": pd.to_numeric(comps["molar_mass_g_mol"], errors="coerce").to_numpy(float),
        "gross": pd.to_numeric(comps.get("gross_heat_mj_kg"), errors="coerce").to_numpy(float)
        if "gross_heat_mj_kg" in comps else np.full(len(comps), np.nan),
        "net": pd.to_numeric(comps.get("net_heat_mj_kg"), errors="coerce").to_numpy(float)
        if "net_heat_mj_kg" in comps else np.full(len(comps), np.nan),
        "formula_ok": np.array([a is not None for a in atoms], dtype=bool),
        "formula": comps["formula"].to_numpy(dtype=object),
    }
    for key, atom in (("n_c", "C"), ("n_h", "H"), ("n_o", "O")):
        table[key] = np.array([a.get(atom, 0) if a is not None else 0 for a in atoms],
                              dtype=np.int64)
    return table


def _rows(composition: pd.DataFrame, library) -> dict[str, np.ndarray]:
    """Composition rows joined with the library values of their model components (arrays)."""
    for col in ("model_component", "mass_pct"):
        if col not in composition.columns:
            raise LibraryError(f"composition table: column {col!r} missing (quantify stage)")
    keep = (composition["mass_pct"] > 0).to_numpy()
    names = composition["model_component"].astype(str).to_numpy()[keep]
    table = _library_table(library.components)
    pos = table["index"].get_indexer(names)
    if (pos < 0).any():
        absent = sorted(set(names[pos < 0]))
        raise LibraryError(f"library: model component(s) {', '.join(absent[:5])} not in "
                           "components.csv; check the composition's model_component column")
    bad_formula = ~table["formula_ok"][pos]
    if bad_formula.any():
        formula_atoms(table["formula"][pos][bad_formula][0])      # raises the one-line error
    mass = composition["mass_pct"].to_numpy(float)[keep]
    out = {
        "model_component": names,
        "unidentified": (composition["group"].to_numpy()[keep] == "unidentified")
        if "group" in composition.columns else np.zeros(len(names), bool),
        "w": mass / mass.sum(),
    }
    for key in ("carbon_number", "density", "molar_mass", "gross", "net", "n_c", "n_h", "n_o"):
        out[key] = table[key][pos]
    good = (out["density"] > 0) & (out["molar_mass"] > 0)
    if not good.all():
        bad = names[~good]
        raise LibraryError(f"library: {', '.join(sorted(set(bad))[:5])} lack(s) a density at "
                           "15 °C or molar mass")
    return out


#: Per-library tables of _carbon_spreads, per components table and column.
_SPREADS = ObjectMemo(size=32)


def _carbon_spreads(library, column: str) -> dict:
    """{carbon number: range/√12 of ``column`` over the library's components of it (0 when
    fewer than two values)}, computed once per library table (the library does not change
    during a run; a different table gets its own entry)."""
    comps = library.components
    return _SPREADS.get(comps, lambda: _build_carbon_spreads(comps, column), tag=column)


def _build_carbon_spreads(comps: pd.DataFrame, column: str) -> dict:
    if column == "n_h":
        values = pd.Series([formula_atoms(f).get("H", 0) for f in comps["formula"]],
                           index=comps.index, dtype=float)
    else:
        values = pd.to_numeric(comps[column], errors="coerce")
    table = {}
    for cn, vals in values.groupby(comps["carbon_number"].to_numpy()):
        vals = vals.dropna()
        if column == "n_h":     # the range itself (None when fewer than two components)
            table[cn] = float(vals.max() - vals.min()) if len(vals) >= 2 else None
        else:
            table[cn] = float((vals.max() - vals.min()) / np.sqrt(12.0)) if len(vals) >= 2 else 0.0
    return table


def _same_carbon_spread(library, column: str, carbon_number) -> float:
    """Standard deviation of a uniform distribution over the library's values of ``column``
    for components of ``carbon_number`` (range/√12); 0 when fewer than two."""
    return _carbon_spreads(library, column).get(carbon_number, 0.0)


def compute(composition: pd.DataFrame, library, settings: dict | None = None) -> PropertyResult:
    """Density at 15 °C, heats of combustion, C/H/O mass %, H/C, mean molar mass, CO2/MJ.

    Parameters
    ----------
    composition : DataFrame
        Composition table (``model_component``, ``mass_pct``; ``group`` marks unidentified
        rows).
    library : Library
        ``components`` with ``formula``, ``molar_mass_g_mol``, ``density_15c_kg_m3``,
        ``gross_heat_mj_kg``, ``net_heat_mj_kg``, ``carbon_number``.
    settings : dict, optional
        Not used (no settings of its own).

    Returns
    -------
    PropertyResult with ``density_kg_m3``, ``net_heat_mj_kg``, ``mean_molar_mass_g_mol``,
    ``h_to_c_molar`` (and their standard uncertainties); details hold ``gross_heat_mj_kg``,
    ``carbon_mass_pct``, ``hydrogen_mass_pct``, ``oxygen_mass_pct``, ``co2_g_per_mj`` and the
    uncertainty basis.

    Notes
    -----
    Uncertainties: density U_DENSITY_REL (volume additivity, measured binaries) and heats
    U_HEAT_REL, each combined with the unidentified rows' spread — per row, the range of the
    property among the library's components of its carbon number divided by √12, weighted by
    the row's share and added linearly over rows. Mean molar mass and H/C carry only that
    spread.
    """
    result = PropertyResult()
    rows = _rows(composition, library)
    w = rows["w"]
    rho = density_volume_additive(w, rows["density"])
    m_mean = 1.0 / float(np.sum(w / rows["molar_mass"]))
    mol_c = w * rows["n_c"] / rows["molar_mass"]          # mol C per g of fuel
    mol_h = w * rows["n_h"] / rows["molar_mass"]
    mol_o = w * rows["n_o"] / rows["molar_mass"]
    c_frac = float(mol_c.sum() * ATOMIC_WEIGHT["C"])
    h_frac = float(mol_h.sum() * ATOMIC_WEIGHT["H"])
    o_frac = float(mol_o.sum() * ATOMIC_WEIGHT["O"])
    h_to_c = float(mol_h.sum() / mol_c.sum()) if mol_c.sum() > 0 else None

    unid = rows["unidentified"]
    unid_cn = rows["carbon_number"][unid].tolist()
    unid_w = w[unid]
    unid_mm = rows["molar_mass"][unid]
    spread = {}
    for col in ("density_15c_kg_m3", "gross_heat_mj_kg", "net_heat_mj_kg", "molar_mass_g_mol"):
        table = _carbon_spreads(library, col)
        spread[col] = np.array([table.get(cn, 0.0) for cn in unid_cn], dtype=float)
    vol_frac = (w / rows["density"]) * rho
    u_rho_unid = float(np.sum(vol_frac[unid] * spread["density_15c_kg_m3"]))
    u_m_unid = float(m_mean ** 2 * np.sum(unid_w * spread["molar_mass_g_mol"] / unid_mm ** 2))
    # H/C of an unknown C_n: from the range of n_H among the library's C_n components.
    u_hc_unid = 0.0
    if unid.any() and mol_c.sum() > 0:
        h_range = _carbon_spreads(library, "n_h")      # range of n_H per C_n
        total_c = mol_c.sum()
        for cn, w_i, n_c, mm in zip(unid_cn, unid_w.tolist(), rows["n_c"][unid].tolist(),
                                    unid_mm.tolist()):
            range_h = h_range.get(cn)
            if range_h is not None:
                share_c = w_i * n_c / mm / total_c
                u_hc_unid += share_c * range_h / max(n_c, 1) / np.sqrt(12.0)

    result.values["density_kg_m3"] = rho
    result.uncertainty["density_kg_m3"] = float(np.hypot(U_DENSITY_REL * rho, u_rho_unid))
    result.values["mean_molar_mass_g_mol"] = m_mean
    result.uncertainty["mean_molar_mass_g_mol"] = u_m_unid
    result.values["h_to_c_molar"] = h_to_c
    result.uncertainty["h_to_c_molar"] = u_hc_unid if h_to_c is not None else None

    heats = {}
    for key, col in (("gross", "gross_heat_mj_kg"), ("net", "net_heat_mj_kg")):
        have = np.isfinite(rows[key])
        missing_pct = float(w[~have].sum() * 100)
        if missing_pct > MAX_MISSING_HEAT_PCT:
            names = sorted(set(rows["model_component"][~have]))
            result.warnings.append(
                f"bulk: no {key} heat of combustion for {', '.join(names[:5])} "
                f"({missing_pct:.1f} % m/m); {key} heat not reported")
            heats[key] = (None, None)
            continue
        value = float(np.sum(w[have] * rows[key][have]) / w[have].sum())
        u_unid = float(np.sum(unid_w * spread[col]))
        u = float(np.hypot(U_HEAT_REL * value, u_unid))
        if missing_pct > 0:
            names = sorted(set(rows["model_component"][~have]))
            result.warnings.append(
                f"bulk: no {key} heat of combustion for {', '.join(names[:5])} "
                f"({missing_pct:.2f} % m/m); averaged over the rest")
            u = float(np.hypot(u, missing_pct / 100 * value))
        heats[key] = (value, u)
    net, u_net = heats["net"]
    result.values["net_heat_mj_kg"] = net
    result.uncertainty["net_heat_mj_kg"] = u_net
    co2 = (c_frac * M_CO2 / ATOMIC_WEIGHT["C"] * 1000.0 / net) if net else None
    result.details.update({
        "gross_heat_mj_kg": heats["gross"][0],
        "gross_heat_uncertainty_mj_kg": heats["gross"][1],
        "carbon_mass_pct": 100.0 * c_frac,
        "hydrogen_mass_pct": 100.0 * h_frac,
        "oxygen_mass_pct": 100.0 * o_frac,
        "co2_g_per_mj": co2,
        "model": {"density": "volume additivity at 15 °C (library densities)",
                  "heats": "mass-weighted heats of combustion of the liquids at 25 °C",
                  "elements": "from formulas, IUPAC conventional atomic weights"},
        "uncertainty_basis": {
            "density_kg_m3": "0.4 %: RMS deviation of volume additivity on measured binary "
                             "mixtures (NIST ThermoML), plus the unidentified share",
            "net_heat_mj_kg": "0.2 % (judgement, no source) plus the unidentified share",
            "mean_molar_mass_g_mol": "unidentified share only",
            "h_to_c_molar": "unidentified share only",
        },
    })
    return result
