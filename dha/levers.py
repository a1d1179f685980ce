r"""Process levers: what a refinery step would do to this petrol, through every property model.

Each lever takes the sample's composition table (DEVELOPERS.md), changes the amounts of its
components by a stated chemistry, and returns a :class:`LeverOutcome` holding the new
composition table, the hydrogen used or made and a mass, carbon and hydrogen balance. The new
table is then run through the same stages as any sample (``dha.groups.group_totals``, every
module of ``dha.properties.MODELS``, ``dha.specs.check``) by :func:`evaluate`, and
:func:`compare` gives the deltas of RON, MON, sensitivity, DVPE, benzene, aromatics, olefins,
oxygen, density, E70 and E100 against the specification profile.

Basis: 100 g of sample. Amounts change by moles through the library's molar masses; the
balance is checked independently from the atoms of each component's formula (a lever whose
atoms do not close is a bug, and the outcome says so). Unidentified peaks are never converted
(their structure is unknown); they are only removed with a cut of their carbon number.

Levers
------
``isomerise``
    The acyclic alkanes of each chosen carbon number (n-C5/n-C6 by default, optionally C7)
    move towards their ideal-gas equilibrium distribution at temperature T:
    :math:`n_i' = (1-a) n_i + a\,y_i^{eq} \sum_j n_j` with approach ``a`` (0-1) and
    :math:`y_i^{eq} \propto \exp(-G_i(T)/RT)`, :math:`G_i(T) = H_i(T) - T S_i(T)` from the
    enthalpy of formation and entropy at 298.15 K plus the ideal-gas heat capacity
    (``dha/levers_data/isomer_thermo.csv``: Yaws 2014 for H and S, the TRC equation of Kabo and
    Roganov 1994 for Cp, both via the ``chemicals`` package; PROVENANCE.md). Isomers share the
    formula, so the elements' terms cancel. Neopentane is left out by default (it is not formed
    over isomerisation catalysts: common practice, no source); moles and mass are conserved.
    A carbon number whose n-paraffin share is already at or below the equilibrium share is
    left as it is (a unit cannot isomerise past equilibrium; moving back would be
    de-isomerisation, which no one runs).
``saturate_benzene``
    C6H6 + 3 H2 -> C6H12 (cyclohexane) for a fraction ``conversion`` of the benzene.
``reform``
    Dehydrocyclisation of the n-C6-C8 paraffins (CnH2n+2 -> aromatic + 4 H2) and
    dehydrogenation of the C6-C8 naphthenes (CnH2n -> aromatic + 3 H2, five-membered rings
    expanded) at conversion ``conversion``. Products by carbon number: C6 benzene, C7 toluene,
    C8 by the substituents of the ring (ethyl -> ethylbenzene, 1,2-/1,3-/1,4-dimethyl -> o-/
    m-/p-xylene), n-octane -> ethylbenzene and o-xylene 1:1 (the two 1,6 ring closures), other
    C8 naphthenes -> the three xylenes in equal parts (judgement, no source). No cracking,
    no coke: an upper view of what reforming these molecules gives.
``remove_cut``
    ``light``: the hydrocarbons of carbon number <= 5 (C4/C5 and lighter) removed; ``heavy``:
    carbon number >= 10 removed. Oxygenates are not part of a cut (they are blended in).
``add_oxygenate``
    A library oxygenate at ``vol_pct`` % v/v of the final blend (volumes additive).
    :func:`oxygenate_range` finds with ``scipy.optimize.brentq`` the smallest share reaching a
    target RON or AKI and the largest share the profile's DVPE, oxygen, ethanol, methanol and
    ether limits allow, on the models themselves (octane through
    ``octane.predict_inputs``/the explain module's batched call, DVPE through the volatility
    module's flash), then runs the full evaluation at both shares.
"""
from __future__ import annotations

import dataclasses
import logging
import math
from dataclasses import dataclass, field
from functools import lru_cache
from pathlib import Path
from types import SimpleNamespace
from typing import Any

import numpy as np
import pandas as pd
from scipy.optimize import brentq

from dha.errors import InputError, SettingsError
from dha.quantify import COMPOSITION_COLUMNS, density_at, parse_formula, quantify_composition

log = logging.getLogger("dha.levers")

DATA_DIR = Path(__file__).with_name("levers_data")
R_J_MOL_K = 8.314462618
#: IUPAC 2013 conventional atomic weights (as dha.quantify.ATOMIC_WEIGHT).
M_H2_G_MOL = 2 * 1.008
T_REF_K = 298.15
#: Quantities compared before/after a lever, with their units.
COMPARED = {
    "ron": "-", "mon": "-", "sensitivity": "-", "dvpe_kpa": "kPa",
    "benzene_vol_pct": "% v/v", "aromatics_vol_pct": "% v/v", "olefins_vol_pct": "% v/v",
    "oxygen_mass_pct": "% m/m", "density_kg_m3": "kg/m3", "e70_vol_pct": "% v/v",
    "e100_vol_pct": "% v/v",
}
#: Largest residual of the mass / atom balance counted as closed [g per 100 g, mol per 100 g].
BALANCE_TOL = 1e-6
NEOPENTANE = "2,2-dimethylpropane"


# --------------------------------------------------------------------------------------------
# Composition tables
# --------------------------------------------------------------------------------------------

def composition_from_result(result: dict, library, settings: dict) -> pd.DataFrame:
    """The composition table of a result JSON (its ``components``), with molar masses and
    densities from the library's entry of each row's ``model_component``."""
    rows = result.get("components") or []
    if not rows:
        raise InputError(f"result {(result.get('sample') or {}).get('id')!r} has no components")
    comp = pd.DataFrame(rows)
    comps = library.components
    if "model_component" not in comp:
        comp["model_component"] = comp["name"]
    missing = sorted({str(n) for n in comp["model_component"] if n not in comps.index})
    if missing:
        raise InputError(f"result components not in the library: {', '.join(missing[:5])}; "
                         "use the library the result was made with (--library)")
    t_ref = float(settings.get("quantify", {}).get("reference_temperature_c", 15.0))
    mc = comp["model_component"]
    comp["molar_mass_g_mol"] = comps.loc[mc, "molar_mass_g_mol"].astype(float).to_numpy()
    comp["density_kg_m3"] = np.asarray(density_at(
        comps.loc[mc, "density_15c_kg_m3"].astype(float).to_numpy(), t_ref), dtype=float)
    if "component" not in comp:
        comp["component"] = [n if n in comps.index else None for n in comp["name"]]
    for col in COMPOSITION_COLUMNS:
        if col not in comp:
            comp[col] = np.nan
    return comp[list(COMPOSITION_COLUMNS)].reset_index(drop=True)


def library_rows(names: list[str], library, settings: dict) -> pd.DataFrame:
    """Composition-table rows (amounts zero) for library components, as quantify makes them."""
    table = pd.DataFrame({"row": range(1, len(names) + 1), "component": list(names),
                          "amount": 1.0})
    rows = quantify_composition(table, "mass_pct", library, settings, source="lever").table
    return rows.assign(mass_pct=0.0, vol_pct=0.0, mol_pct=0.0)


def with_masses(table: pd.DataFrame, mass_g) -> pd.DataFrame:
    """The table with new masses [g]: mass, volume and mole % recomputed (rows of zero mass
    dropped), as ``dha.quantify`` computes them (v ∝ m/ρ, n ∝ m/M)."""
    m = np.asarray(mass_g, dtype=float)
    if np.any(m < -1e-9):
        raise ValueError("negative mass in a lever")
    keep = m > 1e-12
    out = table.loc[keep].copy().reset_index(drop=True)
    m = m[keep]
    vol = m / out["density_kg_m3"].to_numpy(float)
    mol = m / out["molar_mass_g_mol"].to_numpy(float)
    out["mass_pct"] = 100.0 * m / m.sum()
    out["vol_pct"] = 100.0 * vol / vol.sum()
    out["mol_pct"] = 100.0 * mol / mol.sum()
    return out


def _ensure_rows(table: pd.DataFrame, names: list[str], library, settings: dict
                 ) -> tuple[pd.DataFrame, dict[str, int]]:
    """Table with a row for every library component in ``names`` (appended with zero amount)
    and the index of the row that receives each component's amount (its first row)."""
    comp_col = table["component"].astype(object)
    have = [n for n in names if (comp_col == n).any()]
    new = [n for n in dict.fromkeys(names) if n not in have]
    if new:
        table = pd.concat([table, library_rows(new, library, settings)], ignore_index=True)
        comp_col = table["component"].astype(object)
    first = {n: int(np.flatnonzero((comp_col == n).to_numpy())[0]) for n in names}
    return table, first


@lru_cache(maxsize=4096)
def _atoms(formula: str) -> tuple[int, int, int]:
    f = parse_formula(formula)
    return f.get("C", 0), f.get("H", 0), f.get("O", 0)


def atom_counts(table: pd.DataFrame, library) -> np.ndarray:
    """(n_rows, 3) carbon, hydrogen and oxygen atoms per molecule of each row's model component
    (an alkane CnH2n+2 of the row's carbon number where the library has no formula)."""
    formulas = table["model_component"].map(library.components["formula"])
    out = np.zeros((len(table), 3))
    for k, (formula, cn) in enumerate(zip(formulas, table["carbon_number"])):
        if isinstance(formula, str) and formula:
            out[k] = _atoms(formula)
        else:
            n = int(cn)
            out[k] = (n, 2 * n + 2, 0)
    return out


# --------------------------------------------------------------------------------------------
# Outcome and balance
# --------------------------------------------------------------------------------------------

@dataclass
class LeverOutcome:
    """What a lever did to 100 g of sample.

    name, params : the lever and its settings
    table : new composition table (percentages of the product)
    product_g : product mass [g per 100 g of sample]
    hydrogen_g : hydrogen made (> 0) or used (< 0) [g per 100 g of sample]
    added_g, removed_g : streams added (oxygenate) or removed (cut), {name: g}
    balance : mass / atom balance (``closes`` True when every residual <= BALANCE_TOL)
    notes : plain-words remarks (nothing to convert, rows left alone, ...)
    """

    name: str
    params: dict[str, Any]
    table: pd.DataFrame
    product_g: float
    hydrogen_g: float = 0.0
    added_g: dict[str, float] = field(default_factory=dict)
    removed_g: dict[str, float] = field(default_factory=dict)
    balance: dict[str, Any] = field(default_factory=dict)
    notes: list[str] = field(default_factory=list)


def _balance(feed: pd.DataFrame, product_full: pd.DataFrame, product_mass: np.ndarray,
             library, hydrogen_g: float, added: pd.DataFrame | None = None,
             added_mass: np.ndarray | None = None, removed: pd.DataFrame | None = None,
             removed_mass: np.ndarray | None = None) -> dict[str, Any]:
    """Mass and C/H/O atom balance in moles per 100 g of feed, from each row's formula."""
    def atoms(table, mass):
        if table is None or mass is None or len(table) == 0:
            return 0.0, np.zeros(3)
        mol = np.asarray(mass, float) / table["molar_mass_g_mol"].to_numpy(float)
        return float(np.sum(mass)), mol @ atom_counts(table, library)

    m_in, a_in = atoms(feed, feed["mass_pct"].to_numpy(float))
    m_add, a_add = atoms(added, added_mass)
    m_out, a_out = atoms(product_full, product_mass)
    m_rem, a_rem = atoms(removed, removed_mass)
    h2_mol = hydrogen_g / M_H2_G_MOL
    mass_res = (m_in + m_add) - (m_out + m_rem + hydrogen_g)
    atom_res = (a_in + a_add) - (a_out + a_rem) - np.array([0.0, 2.0 * h2_mol, 0.0])
    out = {"mass_in_g": m_in + m_add + max(-hydrogen_g, 0.0),
           "mass_out_g": m_out + m_rem + max(hydrogen_g, 0.0),
           "mass_residual_g": mass_res,
           "carbon_in_mol": float(a_in[0] + a_add[0]), "carbon_out_mol": float(a_out[0] + a_rem[0]),
           "carbon_residual_mol": float(atom_res[0]),
           "hydrogen_residual_mol": float(atom_res[1]), "oxygen_residual_mol": float(atom_res[2])}
    # atom residuals are compared in g of that element, so one tolerance serves all
    worst = max(abs(mass_res), abs(atom_res[0]) * 12.011, abs(atom_res[1]) * 1.008,
                abs(atom_res[2]) * 15.999)
    out["closes"] = bool(worst <= BALANCE_TOL * max(m_in, 1.0))
    return out


def _outcome(name, params, feed, table_full, mass, library, hydrogen_g=0.0, notes=None,
             added=None, added_mass=None, removed=None, removed_mass=None, added_g=None,
             removed_g=None) -> LeverOutcome:
    mass = np.asarray(mass, float)
    bal = _balance(feed, table_full, mass, library, hydrogen_g, added, added_mass, removed,
                   removed_mass)
    if not bal["closes"]:
        log.warning("lever %s: balance does not close: %s", name, bal)
    return LeverOutcome(name, params, with_masses(table_full, mass), float(mass.sum()),
                        float(hydrogen_g), added_g or {}, removed_g or {}, bal, notes or [])


# --------------------------------------------------------------------------------------------
# Isomerisation equilibrium
# --------------------------------------------------------------------------------------------

@lru_cache(maxsize=1)
def isomer_thermo() -> pd.DataFrame:
    """``levers_data/isomer_thermo.csv`` indexed by library name (see PROVENANCE.md there)."""
    return pd.read_csv(DATA_DIR / "isomer_thermo.csv").set_index("name")


def trc_cp(t_k, a) -> np.ndarray:
    """Ideal-gas heat capacity [J/mol/K] by the TRC equation (Kabo and Roganov 1994):
    Cp/R = a0 + a1/T² exp(-a2/T) + y² (a3 + (a4 - a5/(T - a7)²) y⁶), y = (T - a7)/(T + a6)
    for T > a7, else y = 0."""
    t = np.asarray(t_k, dtype=float)
    a0, a1, a2, a3, a4, a5, a6, a7 = a
    y = np.where(t > a7, (t - a7) / (t + a6), 0.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        corr = np.where(t != a7, a5 / (t - a7) ** 2, 0.0)
    return R_J_MOL_K * (a0 + a1 / t ** 2 * np.exp(-a2 / t) + y ** 2 * (a3 + (a4 - corr) * y ** 6))


def gibbs_ideal_gas(names, t_k: float) -> np.ndarray:
    r"""G_i(T) = H_f,i(298) + ∫Cp dT - T (S_i(298) + ∫Cp/T dT) [J/mol] (32-point Gauss-Legendre).

    Only differences between isomers (same formula) are meaningful.
    """
    data = isomer_thermo().loc[list(names)]
    nodes, weights = np.polynomial.legendre.leggauss(32)
    lo, hi = T_REF_K, float(t_k)
    tt = 0.5 * (hi - lo) * nodes + 0.5 * (hi + lo)
    out = []
    for _, r in data.iterrows():
        cp = trc_cp(tt, [r[f"trc_a{k}"] for k in range(8)])
        dh = 0.5 * (hi - lo) * float(weights @ cp)
        ds = 0.5 * (hi - lo) * float(weights @ (cp / tt))
        out.append(r["hf298_gas_j_mol"] + dh - hi * (r["s298_gas_j_mol_k"] + ds))
    return np.array(out)


def equilibrium_shares(carbon_number: int, t_c: float, exclude=(NEOPENTANE,)) -> pd.Series:
    """Ideal-gas equilibrium mole fractions of the acyclic alkanes of one carbon number.

    >>> s = equilibrium_shares(5, 150.0)
    >>> sorted(s.index), bool(0.7 < s["2-methylbutane"] < 0.85)
    (['2-methylbutane', 'n-pentane'], True)
    """
    data = isomer_thermo()
    names = [n for n in data.index[data["carbon_number"] == int(carbon_number)]
             if n not in set(exclude)]
    if len(names) < 2:
        raise SettingsError(f"isomerisation: no isomer data for C{carbon_number}; "
                            "choose carbon numbers 4 to 7")
    t_k = float(t_c) + 273.15
    if not 200.0 <= t_k <= 1500.0:
        raise SettingsError(f"isomerisation temperature {t_c} °C outside the heat-capacity "
                            "range of the data (-73 to 1227 °C)")
    g = gibbs_ideal_gas(names, t_k)
    w = np.exp(-(g - g.min()) / (R_J_MOL_K * t_k))
    return pd.Series(w / w.sum(), index=names)


def isomerise(table: pd.DataFrame, library, settings: dict, t_c: float = 150.0,
              approach: float = 1.0, carbon_numbers=(5, 6), include_neopentane: bool = False
              ) -> LeverOutcome:
    """Isomerisation of the C5/C6 (and C7 if asked) alkanes towards equilibrium (module notes)."""
    if not 0.0 <= approach <= 1.0:
        raise SettingsError(f"isomerisation approach {approach}: give a fraction 0-1")
    feed = table.reset_index(drop=True)
    exclude = () if include_neopentane else (NEOPENTANE,)
    shares = {int(n): equilibrium_shares(int(n), t_c, exclude) for n in carbon_numbers}
    names = [n for s in shares.values() for n in s.index]
    full, first = _ensure_rows(feed, names, library, settings)
    mass = np.concatenate([feed["mass_pct"].to_numpy(float), np.zeros(len(full) - len(feed))])
    mw = full["molar_mass_g_mol"].to_numpy(float)
    comp_col = full["component"].astype(object).to_numpy()
    notes = []
    for cn, eq in shares.items():
        rows = np.isin(comp_col, list(eq.index))
        moles_old = pd.Series({n: mass[comp_col == n].sum() / mw[first[n]] for n in eq.index})
        total = float(moles_old.sum())
        if total <= 0:
            notes.append(f"no C{cn} alkanes to isomerise")
            continue
        n_name = [n for n in eq.index if library.components.at[n, "group"] == "n_paraffins"]
        if n_name and moles_old[n_name].sum() / total <= eq[n_name].sum():
            notes.append(f"C{cn} alkanes already at or beyond equilibrium (n-paraffin "
                         f"{moles_old[n_name].sum() / total:.3f} <= {eq[n_name].sum():.3f} mol/mol); "
                         "left unchanged")
            continue
        moles_new = (1 - approach) * moles_old + approach * eq * total
        mass[rows] = 0.0
        for n in eq.index:
            mass[first[n]] = moles_new[n] * mw[first[n]]
    params = {"temperature_c": t_c, "approach": approach,
              "carbon_numbers": [int(n) for n in carbon_numbers],
              "include_neopentane": include_neopentane,
              "equilibrium_mol_frac": {f"C{k}": {n: float(v) for n, v in s.items()}
                                       for k, s in shares.items()}}
    return _outcome("isomerisation", params, feed, full, mass, library, 0.0, notes)


# --------------------------------------------------------------------------------------------
# Benzene saturation, reforming
# --------------------------------------------------------------------------------------------

def _convert(feed, library, settings, mapping: dict[int, dict[str, float]], conversion: float,
             ) -> tuple[pd.DataFrame, np.ndarray, float]:
    """Convert ``conversion`` of the moles of rows ``mapping`` keys into product components
    ({name: mole share}); returns (table with product rows, masses, hydrogen made [g])."""
    products = sorted({p for m in mapping.values() for p in m})
    full, first = _ensure_rows(feed, products, library, settings)
    mass = np.concatenate([feed["mass_pct"].to_numpy(float), np.zeros(len(full) - len(feed))])
    mw = full["molar_mass_g_mol"].to_numpy(float)
    atoms = atom_counts(full, library)
    h2_mol = 0.0
    for i, prods in mapping.items():
        moles = mass[i] / mw[i] * conversion
        if moles <= 0:
            continue
        mass[i] -= moles * mw[i]
        for p, share in prods.items():
            j = first[p]
            mass[j] += moles * share * mw[j]
            # hydrogen atoms released, as H2 (from the formulas; same carbon number)
            h2_mol += moles * share * (atoms[i, 1] - atoms[j, 1]) / 2.0
    mass[mass < 0] = 0.0
    return full, mass, h2_mol * M_H2_G_MOL


def saturate_benzene(table: pd.DataFrame, library, settings: dict, conversion: float = 1.0
                     ) -> LeverOutcome:
    """C6H6 + 3 H2 -> C6H12 for ``conversion`` (0-1) of the benzene; hydrogen used < 0."""
    if not 0.0 <= conversion <= 1.0:
        raise SettingsError(f"benzene saturation conversion {conversion}: give a fraction 0-1")
    feed = table.reset_index(drop=True)
    rows = np.flatnonzero((feed["component"].astype(object) == "benzene").to_numpy())
    notes = [] if len(rows) else ["no benzene in the sample"]
    full, mass, h2 = _convert(feed, library, settings, {int(i): {"cyclohexane": 1.0}
                                                         for i in rows}, conversion)
    return _outcome("benzene saturation", {"conversion": conversion, "product": "cyclohexane"},
                    feed, full, mass, library, h2, notes)


_XYLENES = {"1,2": "1,2-dimethylbenzene", "1,3": "1,3-dimethylbenzene",
            "1,4": "1,4-dimethylbenzene"}


def aromatic_products(name: str, group: str, carbon_number: int) -> dict[str, float] | None:
    """Aromatic product(s) of a C6-C8 n-paraffin or naphthene in reforming ({name: mole share}).

    >>> aromatic_products("methylcyclopentane", "naphthenes", 6)
    {'benzene': 1.0}
    >>> aromatic_products("n-octane", "n_paraffins", 8)
    {'ethylbenzene': 0.5, '1,2-dimethylbenzene': 0.5}
    """
    cn = int(carbon_number)
    if group not in ("n_paraffins", "naphthenes") or cn not in (6, 7, 8):
        return None
    if cn == 6:
        return {"benzene": 1.0}
    if cn == 7:
        return {"toluene": 1.0}
    if group == "n_paraffins":
        return {"ethylbenzene": 0.5, _XYLENES["1,2"]: 0.5}
    if "ethyl" in name:
        return {"ethylbenzene": 1.0}
    for pos, xyl in _XYLENES.items():
        if f"{pos}-dimethyl" in name:
            return {xyl: 1.0}
    return {x: 1.0 / 3.0 for x in _XYLENES.values()}


def reform(table: pd.DataFrame, library, settings: dict, conversion: float = 0.8
           ) -> LeverOutcome:
    """n-C6-C8 paraffins and C6-C8 naphthenes to aromatics at ``conversion`` (module notes)."""
    if not 0.0 <= conversion <= 1.0:
        raise SettingsError(f"reforming conversion {conversion}: give a fraction 0-1")
    feed = table.reset_index(drop=True)
    mapping = {}
    for i, (comp, group, cn) in enumerate(zip(feed["component"], feed["group"],
                                              feed["carbon_number"])):
        if isinstance(comp, str):
            prods = aromatic_products(comp, str(group), cn)
            if prods:
                mapping[i] = prods
    notes = [] if mapping else ["no C6-C8 n-paraffins or naphthenes to reform"]
    full, mass, h2 = _convert(feed, library, settings, mapping, conversion)
    return _outcome("reforming", {"conversion": conversion,
                                  "feed": "n-C6-C8 paraffins and C6-C8 naphthenes"},
                    feed, full, mass, library, h2, notes)


# --------------------------------------------------------------------------------------------
# Cuts, oxygenates
# --------------------------------------------------------------------------------------------

def remove_cut(table: pd.DataFrame, library, settings: dict, cut: str = "light"
               ) -> LeverOutcome:
    """Remove the light (hydrocarbons up to C5) or heavy (C10 and above) cut."""
    if cut not in ("light", "heavy"):
        raise SettingsError(f"cut {cut!r}: use light (C4/C5 and lighter) or heavy (C10+)")
    feed = table.reset_index(drop=True)
    cn = feed["carbon_number"].astype(float).to_numpy()
    hydrocarbon = (feed["group"].astype(str) != "oxygenates").to_numpy()
    out = hydrocarbon & ((cn <= 5) if cut == "light" else (cn >= 10))
    mass = feed["mass_pct"].to_numpy(float).copy()
    removed_mass = np.where(out, mass, 0.0)
    mass[out] = 0.0
    notes = [] if out.any() else [f"no {cut} cut in the sample"]
    return _outcome(f"{cut} cut removed", {"cut": cut, "carbon_numbers":
                                           "<= 5" if cut == "light" else ">= 10"},
                    feed, feed, mass, library, 0.0, notes, removed=feed,
                    removed_mass=removed_mass,
                    removed_g={f"{cut} cut": float(removed_mass.sum())})


def _oxygenate_name(name: str, library) -> str:
    found = library.find(name)
    if found is None or library.components.at[found, "group"] != "oxygenates":
        raise SettingsError(f"oxygenate {name!r} is not an oxygenate of the library; e.g. "
                            "ethanol, MTBE, ETBE")
    return found


def _with_oxygenate(feed, library, settings, name) -> tuple[pd.DataFrame, int, float]:
    """(table with the oxygenate row, its index, base volume of 100 g of feed [m3 * 1e3])."""
    full, first = _ensure_rows(feed, [name], library, settings)
    base_vol = float(np.sum(feed["mass_pct"].to_numpy(float)
                            / feed["density_kg_m3"].to_numpy(float)))
    return full, first[name], base_vol


def _oxygenate_masses(feed, full, j, base_vol, vol_pct) -> tuple[np.ndarray, float]:
    s = float(vol_pct) / 100.0
    mass = np.concatenate([feed["mass_pct"].to_numpy(float), np.zeros(len(full) - len(feed))])
    added = s / (1.0 - s) * base_vol * float(full.at[j, "density_kg_m3"])
    mass[j] += added
    return mass, added


def add_oxygenate(table: pd.DataFrame, library, settings: dict, oxygenate: str = "ethanol",
                  vol_pct: float = 10.0) -> LeverOutcome:
    """``oxygenate`` added to make ``vol_pct`` % v/v of the final blend (volumes additive)."""
    if not 0.0 <= vol_pct < 100.0:
        raise SettingsError(f"oxygenate share {vol_pct} % v/v: give 0 to < 100")
    name = _oxygenate_name(oxygenate, library)
    feed = table.reset_index(drop=True)
    full, j, base_vol = _with_oxygenate(feed, library, settings, name)
    mass, added = _oxygenate_masses(feed, full, j, base_vol, vol_pct)
    add_table = full.iloc[[j]]
    return _outcome(f"{name} added", {"oxygenate": name, "vol_pct_added": vol_pct}, feed, full,
                    mass, library, 0.0, added=add_table, added_mass=np.array([added]),
                    added_g={name: added})


# --------------------------------------------------------------------------------------------
# Evaluation through every model
# --------------------------------------------------------------------------------------------

def evaluate(table: pd.DataFrame, library, settings: dict, profile: dict | None = None,
             sample_id: str = "lever", explain: bool = True) -> dict[str, Any]:
    """A full result (groups, every property model, octane contributions, spec checks) of a
    composition table, as the pipeline makes it for a composition input (``explain=False``:
    without the octane contributions, which the lever deltas do not need)."""
    from dha import specs
    from dha.explain import result_keys
    from dha.groups import group_totals
    from dha.pipeline import run_properties
    from dha.quantify import Quantified
    from dha.result import build_result, jsonable

    table = table.reset_index(drop=True)
    groups = group_totals(table, library, settings)
    props = run_properties(table, library, settings)
    run = SimpleNamespace(source_file=None, injection=None, sample={"id": sample_id},
                          import_log=[], kind="composition")
    result = build_result(run, Quantified(table), groups, props, library, settings,
                          generated_at="")
    if explain:
        result.update(jsonable(result_keys(table, library, settings, result["properties"])))
    if profile is not None:
        checks, warns = specs.check(result, profile, library)
        result["checks"] = jsonable(checks)
        result["warnings"] += warns
    return result


def key_values(result: dict, library=None) -> dict[str, float | None]:
    """The compared quantities (``COMPARED``) of a result."""
    from dha import specs
    q = specs.quantities(result, library)
    return {k: (q.get(k, (None, None))[0]) for k in COMPARED}


def compare(before: dict, after: dict, profile: dict | None, library=None) -> list[dict]:
    """One row per compared quantity: before, after, delta, the profile's limits, verdict after."""
    b, a = key_values(before, library), key_values(after, library)
    verdicts = {}
    for c in after.get("checks") or []:
        if c.get("spec") == (profile or {}).get("name"):
            prev = verdicts.get(c["property"])
            rank = {"fail": 2, "marginal": 1, "pass": 0}
            if prev is None or rank.get(c["verdict"], 0) > rank.get(prev, 0):
                verdicts[c["property"]] = c["verdict"]
    rows = []
    for k, unit in COMPARED.items():
        lims = {lim["kind"]: float(lim["value"]) for lim in (profile or {}).get("limits", [])
                if lim["quantity"] == k}
        d = (a[k] - b[k]) if a[k] is not None and b[k] is not None else None
        rows.append({"quantity": k, "unit": unit, "before": b[k], "after": a[k], "delta": d,
                     "min": lims.get("min"), "max": lims.get("max"),
                     "verdict": verdicts.get(k)})
    return rows


def outcome_record(outcome: LeverOutcome, before: dict, after: dict, profile, library
                   ) -> dict[str, Any]:
    """JSON-ready record of one lever: settings, balance, hydrogen, deltas, new composition."""
    from dha.result import components_records, jsonable
    return jsonable({
        "lever": outcome.name, "params": outcome.params,
        "product_g_per_100g": outcome.product_g,
        "hydrogen_g_per_100g": outcome.hydrogen_g,
        "hydrogen_note": ("made (> 0)" if outcome.hydrogen_g > 0 else
                          "used (< 0)" if outcome.hydrogen_g < 0 else "none"),
        "added_g_per_100g": outcome.added_g, "removed_g_per_100g": outcome.removed_g,
        "balance": outcome.balance, "notes": outcome.notes,
        "deltas": compare(before, after, profile, library),
        "checks_failed": [f"{c['property']} {c['kind']} {c['limit']:g}: {c['value']:.4g}"
                          for c in after.get("checks") or [] if c.get("verdict") == "fail"],
        "composition": components_records(outcome.table),
        "properties": after.get("properties"),
    })


# --------------------------------------------------------------------------------------------
# Oxygenate share solver
# --------------------------------------------------------------------------------------------

class _OxygenateBlend:
    """Fast model evaluations of base + oxygenate at share s (% v/v), on the same models."""

    def __init__(self, feed, library, settings, name):
        from dha.explain import predict_matrix
        from dha.properties import octane, volatility
        self.library, self.settings, self.name = library, settings, name
        self.feed = feed.reset_index(drop=True)
        self.full, self.j, self.base_vol = _with_oxygenate(self.feed, library, settings, name)
        self._predict = predict_matrix
        rho = self.full["density_kg_m3"].to_numpy(float)
        mass_base = np.concatenate([self.feed["mass_pct"].to_numpy(float),
                                    np.zeros(len(self.full) - len(self.feed))])
        self.vol_base = mass_base / rho
        self.vol_base /= self.vol_base.sum()
        self.rho, self.mw = rho, self.full["molar_mass_g_mol"].to_numpy(float)
        m10 = _oxygenate_masses(self.feed, self.full, self.j, self.base_vol, 10.0)[0]
        table10 = with_masses(self.full, m10)
        self.inputs_table = table10
        self.inputs = octane.model_inputs(table10, library.components)
        self.keep = np.flatnonzero(m10 > 1e-12)   # rows with_masses kept, in order
        act = settings.get("volatility", {}).get("activity", "unifac")
        self.mix = volatility.mixture_from_composition(table10, library, act)
        self.vol = volatility
        mc = table10["model_component"].astype(str).to_numpy()
        self.mix_index = pd.Index(self.mix.names).get_indexer(mc)
        atoms = atom_counts(table10, library)
        self.o_mass = atoms[:, 2] * 15.999 / table10["molar_mass_g_mol"].to_numpy(float)
        cas = table10["cas"].astype(object).to_numpy()
        self.is_ethanol = cas == "64-17-5"
        self.is_methanol = cas == "67-56-1"
        comps = library.components
        self.is_ether5 = np.array([
            isinstance(m, str) and m in comps.index and comps.at[m, "subgroup"] == "ether"
            and int(comps.at[m, "carbon_number"]) >= 5 for m in mc])

    def vol_frac(self, shares_pct) -> np.ndarray:
        s = np.atleast_1d(np.asarray(shares_pct, float))[:, None] / 100.0
        e = np.zeros(len(self.full))
        e[self.j] = 1.0
        v = (1 - s) * self.vol_base[None, :] + s * e[None, :]
        return v[:, self.keep]

    def octane(self, shares_pct) -> dict[str, np.ndarray]:
        out = self._predict(self.inputs, self.vol_frac(shares_pct), self.settings)
        out["aki"] = 0.5 * (out["ron"] + out["mon"])
        return out

    def linear(self, share_pct) -> dict[str, float]:
        v = self.vol_frac([share_pct])[0]
        m = v * self.inputs_table["density_kg_m3"].to_numpy(float)
        m = m / m.sum()
        return {"oxygen_mass_pct": 100.0 * float(m @ self.o_mass),
                "ethanol_vol_pct": 100.0 * float(v[self.is_ethanol].sum()),
                "methanol_vol_pct": 100.0 * float(v[self.is_methanol].sum()),
                "ethers_c5plus_vol_pct": 100.0 * float(v[self.is_ether5].sum())}

    def dvpe(self, share_pct) -> float:
        v = self.vol_frac([share_pct])[0]
        mol = v * self.inputs_table["density_kg_m3"].to_numpy(float) / \
            self.inputs_table["molar_mass_g_mol"].to_numpy(float)
        z = np.zeros(len(self.mix.names))
        np.add.at(z, self.mix_index, mol)
        mix = dataclasses.replace(self.mix, z=z / z.sum())
        flash = self.vol.flash_volume_ratio(mix, self.vol.T_DVPE_K, self.vol.VL_RATIO)
        return float(self.vol.dvpe_kpa_from_total(flash.p_kpa))

    def values(self, share_pct) -> dict[str, float]:
        out = self.linear(share_pct)
        out["dvpe_kpa"] = self.dvpe(share_pct)
        return out


#: Limits of the profile that bound the largest oxygenate share.
SHARE_LIMITS = ("dvpe_kpa", "oxygen_mass_pct", "ethanol_vol_pct", "methanol_vol_pct",
                "ethers_c5plus_vol_pct")


def oxygenate_range(table: pd.DataFrame, library, settings: dict, oxygenate: str = "ethanol",
                    profile: dict | None = None, target_ron: float | None = None,
                    target_aki: float | None = None, max_share: float = 30.0,
                    step: float = 0.5) -> dict[str, Any]:
    """Smallest share reaching a target RON (or AKI), largest share the limits allow.

    Parameters
    ----------
    table : composition table of the base
    oxygenate : library name or synonym (ethanol, MTBE, ETBE, ...)
    profile : specification profile (``dha.specs.load_profile``); its max limits of
        ``SHARE_LIMITS`` bound the largest share
    target_ron, target_aki : target (one of them, or none)
    max_share : upper end of the search [% v/v]; step : scan step [% v/v]

    Returns
    -------
    dict: ``oxygenate``, ``min_share_vol_pct`` (None when the target is not reached below
    ``max_share``, 0 when the base already meets it), ``max_share_vol_pct`` and
    ``binding_limit`` (the limit that stops it; None when ``max_share`` is reached), the
    scanned curve (share, RON, MON, DVPE, oxygen) and notes.

    Notes
    -----
    The curve is scanned on a grid (all shares in one batched octane call), then the crossing
    is located with ``scipy.optimize.brentq`` on the same model functions. DVPE is not
    monotonic in the ethanol share (it peaks near 5-10 % v/v), so the largest share is the end
    of the feasible stretch that starts at 0 %; a later feasible stretch is mentioned in the
    notes.
    """
    if target_ron is not None and target_aki is not None:
        raise SettingsError("give a target RON or a target AKI, not both")
    name = _oxygenate_name(oxygenate, library)
    fast = _OxygenateBlend(table, library, settings, name)
    grid = np.round(np.arange(0.0, max_share + 1e-9, step), 9)
    octs = fast.octane(grid)
    notes: list[str] = []
    out: dict[str, Any] = {"oxygenate": name, "target": None, "min_share_vol_pct": None,
                           "max_share_vol_pct": None, "binding_limit": None}
    prop = "ron" if target_ron is not None else "aki" if target_aki is not None else None
    if prop:
        target = float(target_ron if prop == "ron" else target_aki)
        out["target"] = {"quantity": prop, "value": target}
        f = octs[prop] - target
        if f[0] >= 0:
            out["min_share_vol_pct"] = 0.0
            notes.append(f"the base already has {prop.upper()} {octs[prop][0]:.2f} >= {target:g}")
        else:
            idx = np.flatnonzero(f >= 0)
            if len(idx) == 0:
                notes.append(f"{prop.upper()} {target:g} not reached with up to {max_share:g} "
                             f"% v/v {name} (reaches {octs[prop].max():.2f})")
            else:
                k = int(idx[0])
                g = lambda s: float(fast.octane([s])[prop][0]) - target  # noqa: E731
                out["min_share_vol_pct"] = float(brentq(g, grid[k - 1], grid[k], xtol=1e-6))
    limits = [(lim["quantity"], float(lim["value"])) for lim in (profile or {}).get("limits", [])
              if lim["kind"] == "max" and lim["quantity"] in SHARE_LIMITS]
    vals = [fast.values(s) for s in grid]

    def slack(v: dict[str, float]) -> dict[str, float]:
        return {q: lim - v[q] for q, lim in limits}

    slacks = [slack(v) for v in vals]
    ok = np.array([all(x >= 0 for x in s.values()) for s in slacks])
    if not limits:
        notes.append("no DVPE, oxygen or oxygenate limits in the profile: largest share not "
                     "bounded")
    elif not ok[0]:
        bad = [q for q, x in slacks[0].items() if x < 0]
        out["max_share_vol_pct"] = 0.0
        out["binding_limit"] = bad[0]
        notes.append(f"the base itself exceeds {', '.join(bad)}; no share of {name} is allowed")
    else:
        stop = np.flatnonzero(~ok)
        if len(stop) == 0:
            out["max_share_vol_pct"] = float(grid[-1])
            notes.append(f"every limit holds up to {max_share:g} % v/v (the search's end)")
        else:
            k = int(stop[0])
            binding = min(slacks[k], key=slacks[k].get)
            lim = dict(limits)[binding] if binding in dict(limits) else None
            h = lambda s: min(slack(fast.values(s)).values())  # noqa: E731
            out["max_share_vol_pct"] = float(brentq(h, grid[k - 1], grid[k], xtol=1e-6))
            out["binding_limit"] = binding
            if ok[k:].any():
                notes.append(f"the limits hold again from {grid[k:][ok[k:]][0]:g} % v/v "
                             "(DVPE falls at higher shares)")
            log.debug("binding %s at %s", binding, lim)
    if out["min_share_vol_pct"] is not None and out["max_share_vol_pct"] is not None \
            and out["min_share_vol_pct"] > out["max_share_vol_pct"]:
        notes.append("the target needs more oxygenate than the limits allow")
    out["curve"] = [{"vol_pct": float(s), "ron": float(octs["ron"][i]),
                     "mon": float(octs["mon"][i]), "dvpe_kpa": vals[i]["dvpe_kpa"],
                     "oxygen_mass_pct": vals[i]["oxygen_mass_pct"]}
                    for i, s in enumerate(grid)]
    out["notes"] = notes
    return out


# --------------------------------------------------------------------------------------------
# All levers at once
# --------------------------------------------------------------------------------------------

DEFAULT_LEVERS = ("isomerisation", "benzene saturation", "reforming", "light cut",
                  "heavy cut", "oxygenate")


def run_levers(table: pd.DataFrame, library, settings: dict, profile: dict | None = None,
               which=DEFAULT_LEVERS, *, isomerisation_t_c: float = 150.0,
               isomerisation_approach: float = 1.0, isomerisation_carbon_numbers=(5, 6),
               benzene_conversion: float = 1.0, reforming_conversion: float = 0.8,
               oxygenate: str = "ethanol", oxygenate_vol_pct: float = 10.0,
               target_ron: float | None = None, target_aki: float | None = None,
               base: dict | None = None) -> dict[str, Any]:
    """Every lever in ``which`` applied to the sample, each evaluated through every model.

    Returns {"base": key values of the sample, "levers": [outcome records],
    "oxygenate_range": solver output or None}.
    """
    if base is None:
        base = evaluate(table, library, settings, profile, "sample")
    makers = {
        "isomerisation": lambda: isomerise(table, library, settings, isomerisation_t_c,
                                           isomerisation_approach, isomerisation_carbon_numbers),
        "benzene saturation": lambda: saturate_benzene(table, library, settings,
                                                       benzene_conversion),
        "reforming": lambda: reform(table, library, settings, reforming_conversion),
        "light cut": lambda: remove_cut(table, library, settings, "light"),
        "heavy cut": lambda: remove_cut(table, library, settings, "heavy"),
        "oxygenate": lambda: add_oxygenate(table, library, settings, oxygenate,
                                           oxygenate_vol_pct),
    }
    unknown = [w for w in which if w not in makers]
    if unknown:
        raise SettingsError(f"unknown lever(s) {', '.join(unknown)}; use "
                            f"{', '.join(makers)}")
    records = []
    for w in which:
        outcome = makers[w]()
        after = evaluate(outcome.table, library, settings, profile, w, explain=False)
        records.append(outcome_record(outcome, base, after, profile, library))
    solver = None
    if "oxygenate" in which:
        solver = oxygenate_range(table, library, settings, oxygenate, profile, target_ron,
                                 target_aki)
    return {"base": {"properties": base.get("properties"),
                     "values": key_values(base, library),
                     "checks_failed": [f"{c['property']} {c['kind']} {c['limit']:g}"
                                       for c in base.get("checks") or []
                                       if c.get("verdict") == "fail"]},
            "profile": (profile or {}).get("name"),
            "levers": records, "oxygenate_range": solver}


# --------------------------------------------------------------------------------------------
# Inputs
# --------------------------------------------------------------------------------------------

@dataclass
class Sample:
    """One sample for the levers and blends: a label, its composition table and its result."""

    label: str
    table: pd.DataFrame
    result: dict | None = None


def load_samples(path: str | Path, settings: dict, library) -> list[Sample]:
    """Samples from a result JSON (``dha report`` output) or an export / composition table
    (one per run), with the composition tables the pipeline makes."""
    import json

    path = Path(path)
    if not path.is_file():
        raise InputError(f"{path}: file not found; give a result JSON, a peak table or a "
                         "composition table")
    if path.suffix.lower() == ".json":
        try:
            result = json.loads(path.read_text(encoding="utf-8"))
        except (UnicodeDecodeError, json.JSONDecodeError) as err:
            raise InputError(f"{path.name}: not a JSON result ({err})") from None
        if not isinstance(result, dict) or "components" not in result:
            raise InputError(f"{path.name}: not a dha result (no 'components'); write one with "
                             "dha report --format json")
        label = (result.get("sample") or {}).get("id") or path.stem
        return [Sample(str(label), composition_from_result(result, library, settings), result)]
    from dha.quantify import quantify_run
    from dha.reader import read_input
    runs = read_input(path, settings)
    if not runs:
        raise InputError(f"{path.name}: no peak or composition table found")
    out = []
    for run in runs:
        identified = None
        if run.kind == "peaks":
            from dha.identify import identify
            identified = identify(run.table, library, settings)
        quant = quantify_run(run, identified, library, settings)
        label = (run.sample or {}).get("id") or path.stem
        if run.injection and len(runs) > 1:
            label = f"{label} [{run.injection}]"
        out.append(Sample(str(label), quant.table))
    return out
