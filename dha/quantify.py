"""Quantification: identified peaks (or a composition table) -> composition table.

Two entry points, both pure functions over DataFrames:

- :func:`quantify_peaks` for a peak run: FID areas -> response-corrected mass -> mass, volume
  and mole %, with a mass balance of every peak area;
- :func:`quantify_composition` for a composition run (``Run.kind == "composition"``): names,
  synonyms or CAS numbers resolved through the library, one basis converted to all three.

Both return a :class:`Quantified` holding the *composition table* of DEVELOPERS.md (``table``),
the mass balance (peak runs only) and warnings for the result.

Notes
-----
Response factors (relative mass response, methane = 1):

- hydrocarbons: ``RRF = (M·0.7487)/(12.011·n_C)``, 0.7487 = 12.011/16.043, i.e. the mass of a
  compound per mole of carbon relative to methane's (FID responds to carbon; FID carbon-mass response, ASTM D6730 §15);
- oxygenates: ``RRF = (M·0.7487)/(12.011·ECN)`` with the library's effective carbon number
  (Sternberg et al. 1962; Scanlon and Willis, J. Chromatogr. Sci. 23 (1985) 333). The library's
  ``ecn`` column is computed with a primary-alcohol oxygen contribution of −0.6 (Sternberg); when
  ``[quantify] primary_alcohol_oxygen_ecn`` differs, the ECN of each primary alcohol is shifted by
  (setting − (−0.6)) per hydroxyl (methanol 0.4 -> 0.5 with −0.5);
- lab-measured factors (``[quantify] response_factors``, keyed by library name, synonym or CAS)
  override the theory for that component;
- unidentified peaks take the hydrocarbon factor of the isoparaffin CnH2n+2 of their carbon
  number (common practice, no source).

Normalisation: ``m_i = area_i·RRF_i``, normalised to 100 % over all peaks not excluded by
``[quantify] exclude``. Excluded peaks (solvent, air) leave the composition but stay in the
mass balance. With ``[quantify] oxygenates_other_method_mass_pct = X ≥ 0`` the hydrocarbons
(identified and unidentified) are normalised to 100 − X and X is distributed over the
oxygenates detected in the chromatogram in proportion to their response-corrected areas (the GC
gives the split, the other method the total). With X > 0 and no oxygenate peak identified, the
run cannot be reported (an ``InputError`` says so): the tool never invents an oxygenate.

Volume % from ``v_i ∝ m_i/ρ_i(T_ref)``; mole % from ``n_i ∝ m_i/M_i``. The library holds
densities at 15 °C; for ``reference_temperature_c`` = 15.56 (60 °F) each density is corrected
with the thermal-expansion form of API MPMS 11.1 (1980) for generalized products, gasoline
range: ``α15 = K0/ρ15² + K1/ρ15`` with K0 = 346.4228 kg²/m⁶/K, K1 = 0.4388 kg/m³/K and
``ρ_T = ρ15·exp(−α15·ΔT·(1 + 0.8·α15·ΔT))`` (constants from memory; the test checks the
correction against CoolProp for n-heptane and toluene). The effect on volume % is second order
(only density ratios matter).

Unidentified peaks take the molar mass and density of a representative isoparaffin of their
carbon number (common practice, no source): the 2-methylalkane (2-methylhexane for C7), else
another isoparaffin of that carbon number (first by name), else the n-alkane, else the nearest
carbon number's representative (with a warning). That library name is the ``model_component``.
"""
from __future__ import annotations

import difflib
import logging
import math
import re
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from dha.errors import InputError, SettingsError
from dha.memo import ObjectMemo

log = logging.getLogger("dha.quantify")

#: The DHA convention 12.011/16.043 (FID carbon-mass response, ASTM D6730 §15: checked equal to M_C/M_CH4).
RRF_CONSTANT = 0.7487
#: IUPAC abridged standard atomic weights (IUPAC 2013, conventional values).
ATOMIC_WEIGHT = {"C": 12.011, "H": 1.008, "O": 15.999, "N": 14.007, "S": 32.06}
#: ECN contribution of a primary-alcohol oxygen used by the library's ``ecn`` column.
LIBRARY_PRIMARY_ALCOHOL_ECN = -0.6
#: API MPMS 11.1 (1980) gasoline constants of the thermal-expansion coefficient (from memory).
K0_GASOLINE = 346.4228
K1_GASOLINE = 0.4388

GROUPS = ("n_paraffins", "isoparaffins", "olefins", "naphthenes", "aromatics", "oxygenates",
          "unidentified")

#: Columns of the composition table, in order (DEVELOPERS.md).
COMPOSITION_COLUMNS = (
    "name", "component", "cas", "group", "carbon_number", "rt_min", "retention_index", "area",
    "rrf", "mass_pct", "vol_pct", "mol_pct", "match", "ri_source", "model_component",
    "molar_mass_g_mol", "density_kg_m3",
)

_ALKANE_STEM = {
    1: "methane", 2: "ethane", 3: "propane", 4: "butane", 5: "pentane", 6: "hexane",
    7: "heptane", 8: "octane", 9: "nonane", 10: "decane", 11: "undecane", 12: "dodecane",
    13: "tridecane", 14: "tetradecane", 15: "pentadecane", 16: "hexadecane",
    17: "heptadecane", 18: "octadecane", 19: "nonadecane", 20: "icosane",
}

_PRIMARY_ALCOHOL_NAME = re.compile(r"(^|[-,])1-[a-z]*ol$|an-1-ol$")


@dataclass(frozen=True)
class Quantified:
    """What quantification returns.

    table : the composition table (``COMPOSITION_COLUMNS``), percentages summing to 100
    mass_balance : peak runs: areas and shares of identified,
        unidentified and excluded peaks, raw and response-corrected, and the closure check;
        composition input: rows and amounts in the library, split over stereo isomers and not
        in the library, the not-in-library share in each basis
    warnings : human-readable strings for the result's ``warnings``
    """

    table: pd.DataFrame
    mass_balance: dict[str, Any] | None = None
    warnings: list[str] = field(default_factory=list)
    #: rows of the input changed here (composition tables: stereo splits, unknown components),
    #: ``{"row", "action", "reason"}``; the result appends them to the reader's import log
    import_log: list[dict[str, Any]] = field(default_factory=list)


# --------------------------------------------------------------------------- formula helpers

def parse_formula(formula: str) -> dict[str, int]:
    """Element counts of a Hill formula.

    >>> parse_formula("C5H12O")
    {'C': 5, 'H': 12, 'O': 1}
    """
    counts: dict[str, int] = {}
    for element, n in re.findall(r"([A-Z][a-z]?)(\d*)", str(formula or "")):
        counts[element] = counts.get(element, 0) + (int(n) if n else 1)
    return counts


def alkane_molar_mass(n_carbon: int) -> float:
    """Molar mass of an alkane CnH2n+2 [g/mol] from IUPAC atomic weights.

    >>> round(alkane_molar_mass(7), 3)
    100.205
    """
    return n_carbon * ATOMIC_WEIGHT["C"] + (2 * n_carbon + 2) * ATOMIC_WEIGHT["H"]


def hydrocarbon_rrf(molar_mass_g_mol: float, n_carbon: float) -> float:
    """Theoretical relative mass response factor of a hydrocarbon (methane = 1) [-].

    Notes
    -----
    RRF = (M·0.7487)/(12.011·n_C); 0.7487 = 12.011/16.043 (FID carbon-mass response, ASTM D6730 §15).

    >>> round(hydrocarbon_rrf(78.114, 6), 4)   # benzene
    0.8115
    """
    return molar_mass_g_mol * RRF_CONSTANT / (ATOMIC_WEIGHT["C"] * n_carbon)


def oxygenate_rrf(molar_mass_g_mol: float, ecn: float) -> float:
    """Theoretical relative mass response factor of an oxygenate from its ECN (methane = 1) [-].

    Notes
    -----
    RRF = (M·0.7487)/(12.011·ECN) (Sternberg et al. 1962; Scanlon and Willis 1985).

    >>> round(oxygenate_rrf(46.069, 1.4), 4)   # ethanol, ECN = 2 - 0.6
    2.0512
    """
    return molar_mass_g_mol * RRF_CONSTANT / (ATOMIC_WEIGHT["C"] * ecn)


def density_at(density_15c_kg_m3, temperature_c: float):
    """Liquid density at ``temperature_c`` from the density at 15 °C [kg/m³].

    Notes
    -----
    API MPMS 11.1 (1980) generalized products, gasoline constants (from memory):
    α15 = K0/ρ15² + K1/ρ15; ρ_T = ρ15·exp(−α15·Δt·(1 + 0.8·α15·Δt)), Δt = T − 15 °C.

    >>> round(density_at(700.0, 15.56), 2)
    699.48
    """
    rho = np.asarray(density_15c_kg_m3, dtype=float)
    dt = float(temperature_c) - 15.0
    if dt == 0.0:
        return density_15c_kg_m3 if np.ndim(density_15c_kg_m3) else float(rho)
    alpha = K0_GASOLINE / rho**2 + K1_GASOLINE / rho
    out = rho * np.exp(-alpha * dt * (1.0 + 0.8 * alpha * dt))
    if isinstance(density_15c_kg_m3, pd.Series):
        return pd.Series(out, index=density_15c_kg_m3.index)
    return out if np.ndim(out) else float(out)


# --------------------------------------------------------------------------- library helpers

def is_primary_alcohol(name: str, subgroup: str | None) -> bool:
    """True for a primary alcohol, judged from its library name (methanol, ethanol, *-1-ol).

    >>> is_primary_alcohol("2-methylpropan-1-ol", "alcohol"), is_primary_alcohol("2-propanol", "alcohol")
    (True, False)
    """
    if str(subgroup) != "alcohol":
        return False
    name = str(name).lower()
    return name in ("methanol", "ethanol") or bool(_PRIMARY_ALCOHOL_NAME.search(name))


def representative_component(n_carbon: int, library) -> tuple[str, str | None]:
    """Library name standing in for an unidentified peak of ``n_carbon`` carbons.

    Returns (name, warning or None). Order: 2-methylalkane, other isoparaffin of that carbon
    number (first by name), n-alkane, then the nearest carbon number (with a warning).
    """
    comps = library.components
    return _REPRESENTATIVE.get(comps, lambda: _representative(int(n_carbon), library, comps),
                               tag=int(n_carbon))


#: representative_component per components table and carbon number.
_REPRESENTATIVE = ObjectMemo(size=512)


def _representative(n_carbon: int, library, comps: pd.DataFrame) -> tuple[str, str | None]:
    for n in _nearest_first(int(n_carbon)):
        name = _representative_exact(n, library, comps)
        if name is not None:
            if n == n_carbon:
                return name, None
            return name, (f"no isoparaffin or n-alkane of C{n_carbon} in the library: "
                          f"unidentified C{n_carbon} peaks use {name} (C{n}) for density and "
                          "molar mass")
    raise InputError("the library holds no alkane to stand in for unidentified peaks; "
                     "check the component library")


def _nearest_first(n: int):
    yield n
    for d in range(1, 40):
        if n - d >= 1:
            yield n - d
        yield n + d


def _representative_exact(n: int, library, comps: pd.DataFrame) -> str | None:
    stem = _ALKANE_STEM.get(n - 1)   # 2-methylhexane is C7: the chain has n - 1 carbons
    if stem and n >= 4:
        found = library.find(f"2-methyl{stem}")
        if found is not None:
            return found
    cn = pd.to_numeric(comps["carbon_number"], errors="coerce")
    iso = sorted(comps.index[(comps["group"] == "isoparaffins") & (cn == n)])
    if iso:
        return iso[0]
    normal = sorted(comps.index[(comps["group"] == "n_paraffins") & (cn == n)])
    return normal[0] if normal else None


def _norm(text: Any) -> str:
    return " ".join(str(text).casefold().split())


def _resolve_name(text: str, library) -> str | None:
    """Library name for a name, synonym or CAS; the identifier's tolerant matcher if present."""
    found = library.find(str(text).strip())
    if found is not None:
        return found
    try:  # the identifier's tolerant name matcher, when it exists
        from dha import identify as _identify
        matcher = getattr(_identify, "match_name", None)
    except ImportError:
        matcher = None
    if matcher is not None:
        try:
            got = matcher(str(text), library)
        except Exception:  # noqa: BLE001 - a matcher problem must not hide the plain lookup
            got = None
        if isinstance(got, tuple):
            got = got[0]
        if got is not None and got in library.components.index:
            return got
    return None


def _suggestions(text: str, library, n: int = 3) -> list[str]:
    if hasattr(library, "suggest"):
        return list(library.suggest(str(text), n=n))
    comps = library.components
    choices = list(comps.index)
    if "synonyms" in comps.columns:
        for syn in comps["synonyms"].dropna():
            choices += [s.strip() for s in str(syn).split(";") if s.strip()]
    lower = {c.casefold(): c for c in choices}
    got = difflib.get_close_matches(str(text).casefold(), list(lower), n=n, cutoff=0.6)
    return [lower[g] for g in got]


def response_factor_overrides(settings: dict, library) -> dict[str, float]:
    """Lab-measured response factors by library name (``[quantify] response_factors``)."""
    out: dict[str, float] = {}
    for key, value in (settings.get("quantify", {}).get("response_factors") or {}).items():
        name = _resolve_name(str(key), library)
        if name is None:
            hint = _suggestions(key, library)
            raise SettingsError(
                f"[quantify] response_factors: unknown component {key!r}"
                + (f"; did you mean {', '.join(repr(h) for h in hint)}?" if hint else
                   "; use a library name, synonym or CAS number"))
        if isinstance(value, bool) or not isinstance(value, (int, float)) or not value > 0:
            raise SettingsError(f"[quantify] response_factors: {key} = {value!r} must be a "
                                "positive number (relative mass response, methane = 1)")
        out[name] = float(value)
    return out


def library_rrf(names, library, settings) -> pd.Series:
    """Response factors of library components (theory or lab override), by name [-]."""
    comps = library.components
    q = settings.get("quantify", {})
    overrides = response_factor_overrides(settings, library)
    delta_alcohol = float(q.get("primary_alcohol_oxygen_ecn", LIBRARY_PRIMARY_ALCOHOL_ECN)) \
        - LIBRARY_PRIMARY_ALCOHOL_ECN
    theory = _theory_cache(comps, delta_alcohol)
    rows = None
    out = {}
    for name in dict.fromkeys(names):
        if name in overrides:
            out[name] = overrides[name]
            continue
        if name in theory:
            out[name] = theory[name]
            continue
        if rows is None:
            rows = _rrf_rows(comps)
        row = rows[name]
        mw = float(row["molar_mass_g_mol"])
        atoms = parse_formula(row.get("formula", ""))
        n_c = atoms.get("C") or float(row["carbon_number"])
        if row["group"] == "oxygenates" or atoms.get("O", 0) > 0:
            ecn = pd.to_numeric(pd.Series([row.get("ecn")]), errors="coerce").iloc[0]
            if pd.isna(ecn):
                raise InputError(f"library component {name!r} is an oxygenate without an ECN; "
                                 "add its ecn or a measured factor in [quantify] response_factors")
            if delta_alcohol and is_primary_alcohol(name, row.get("subgroup")):
                ecn = ecn + delta_alcohol * atoms.get("O", 1)
            out[name] = oxygenate_rrf(mw, float(ecn))
        else:
            out[name] = hydrocarbon_rrf(mw, n_c)
        theory[name] = out[name]
    return pd.Series(out, dtype=float)


#: Theoretical factors per library table and alcohol ECN shift: {name: rrf}, filled as
#: components are asked for.
_THEORY_RRF = ObjectMemo(size=16)
_RRF_COLUMNS = ("molar_mass_g_mol", "formula", "carbon_number", "group", "ecn", "subgroup")


def _theory_cache(comps: pd.DataFrame, shift: float) -> dict[str, float]:
    return _THEORY_RRF.get(comps, dict, tag=shift)


def _rrf_rows(comps: pd.DataFrame) -> dict[str, dict[str, Any]]:
    """The library columns the factors need, as {name: {column: value}} (one conversion
    instead of one row lookup per component)."""
    cols = [c for c in _RRF_COLUMNS if c in comps.columns]
    return comps[cols].to_dict(orient="index")


def _physical(names: pd.Series, library, settings) -> tuple[pd.Series, pd.Series]:
    comps = library.components
    t_ref = float(settings.get("quantify", {}).get("reference_temperature_c", 15.0))
    if not 0.0 <= t_ref <= 40.0:
        raise SettingsError(f"[quantify] reference_temperature_c = {t_ref:g}: the density "
                            "correction from 15 °C holds for 0-40 °C; use 15.0 or 15.56")
    mw = comps.loc[names.values, "molar_mass_g_mol"].astype(float).to_numpy()
    rho15 = comps.loc[names.values, "density_15c_kg_m3"].astype(float).to_numpy()
    missing = [n for n, r in zip(names, rho15) if not (r > 0)]
    if missing:
        raise InputError(f"no liquid density at 15 °C in the library for {', '.join(missing)}; "
                         "add density_15c_kg_m3 (or use a lab library overlay)")
    rho = np.asarray(density_at(rho15, t_ref), dtype=float)
    return (pd.Series(mw, index=names.index), pd.Series(rho, index=names.index))


def _percentages(mass: pd.Series, mw: pd.Series, rho: pd.Series) -> pd.DataFrame:
    """mass, vol and mol % from (unnormalised) masses."""
    mass_pct = 100.0 * mass / mass.sum()
    vol = mass_pct / rho
    mol = mass_pct / mw
    return pd.DataFrame({"mass_pct": mass_pct, "vol_pct": 100.0 * vol / vol.sum(),
                         "mol_pct": 100.0 * mol / mol.sum()})


# --------------------------------------------------------------------------- peak runs

def _carbon_numbers(peaks: pd.DataFrame, warnings: list[str]) -> pd.Series:
    """Integer carbon numbers; missing ones from the index bracket, else the preceding peak."""
    cn = pd.to_numeric(peaks["carbon_number"], errors="coerce") if "carbon_number" in peaks \
        else pd.Series(np.nan, index=peaks.index)
    ri = pd.to_numeric(peaks.get("retention_index"), errors="coerce") \
        if "retention_index" in peaks else pd.Series(np.nan, index=peaks.index)
    from_ri = np.ceil(ri / 100.0 - 1e-9)  # common trade practice: n-C6 < peak <= n-C7 -> C7
    cn = cn.fillna(from_ri.where(from_ri >= 1))
    if cn.isna().any():
        rows = peaks.loc[cn.isna(), "row"].tolist() if "row" in peaks else list(cn.index[cn.isna()])
        filled = cn.ffill().bfill()
        if filled.isna().any():
            raise InputError("no carbon number known for any peak (no index, no identified peak); "
                             "give n-alkane markers in [identify] markers")
        warnings.append(f"{len(rows)} peak(s) without carbon number or retention index (rows "
                        f"{', '.join(map(str, rows[:10]))}{' ...' if len(rows) > 10 else ''}) "
                        "took the carbon number of the peak before them")
        cn = filled
    low = cn < 1
    if low.any():
        # an index below 100 (a peak extrapolated before the lightest marker, e.g. markers
        # taken one carbon number too high) has no carbon number of its own
        rows = peaks.loc[low, "row"].tolist() if "row" in peaks else list(cn.index[low])
        warnings.append(f"{len(rows)} peak(s) with a retention index below 100 (rows "
                        f"{', '.join(map(str, rows[:10]))}{' ...' if len(rows) > 10 else ''}) "
                        "counted as C1: no compound of petrol elutes before methane; check the "
                        "n-alkane markers")
        cn = cn.where(~low, 1)
    return cn.round().astype(int)


def _name_key():
    """The identifier's name comparison key (case, spacing, punctuation, ``n-``), if present."""
    try:
        from dha.identify import name_key
        return name_key
    except ImportError:
        return _norm


def _excluded_mask(peaks: pd.DataFrame, library, settings) -> pd.Series:
    """Peaks named in ``[quantify] exclude``.

    An entry matches a peak whose export name has the same comparison key as the identifier
    uses (so "Air", "air " and "AIR" are one name), or whose identified component is the
    library component the entry names (name, synonym or CAS).
    """
    entries = settings.get("quantify", {}).get("exclude") or []
    mask = pd.Series(False, index=peaks.index)
    if not entries:
        return mask
    key = _name_key()
    keys = {key(str(e)) for e in entries}
    resolved = {_resolve_name(str(e), library) for e in entries} - {None}
    if "name" in peaks:
        mask |= peaks["name"].map(lambda v: _clean(v) is not None and key(str(v)) in keys)
    if "component" in peaks:
        mask |= peaks["component"].isin(resolved)
    return mask


def quantify_peaks(identified: pd.DataFrame, library, settings: dict,
                   peaks: pd.DataFrame | None = None, source: str = "") -> Quantified:
    """Composition table from an identified peak table (DEVELOPERS.md).

    Parameters
    ----------
    identified : identified peak table (``row``, ``rt_min``, ``area`` [counts], ``name``,
        ``component``, ``match``, ``retention_index``, ``ri_source``, ``carbon_number``, ...)
    library : ``dha.library.Library``
    settings : full settings; reads ``[quantify]``
    peaks : the reader's peak table before identification; when given, the mass balance checks
        that the identified table accounts for exactly its total area
    source : file name for messages

    Returns
    -------
    Quantified

    Notes
    -----
    mass_i = area_i·RRF_i / Σ(area·RRF) · 100 over peaks not excluded (see module notes for the
    factors, the oxygenate option and volume/mole %).
    """
    where = f"{source}: " if source else ""
    warnings: list[str] = []
    q = settings.get("quantify", {})
    df = identified.reset_index(drop=True)
    df.attrs = {}   # pandas deep-copies attrs on every operation: run metadata stays outside
    area = pd.to_numeric(df["area"], errors="coerce")
    bad = area.isna() | (area < 0) | ~np.isfinite(area.fillna(0.0))
    if bad.any():
        r = df.loc[bad, "row"].iloc[0] if "row" in df else int(bad.idxmax())
        raise InputError(f"{where}row {r}: area {df.loc[bad, 'area'].iloc[0]!r} is not a "
                         "non-negative number; fix the export or let the reader skip it")
    if len(df) == 0 or area.sum() <= 0:
        raise InputError(f"{where}no peak area to quantify; check the export")
    df["area"] = area.astype(float)
    comp_col = df["component"] if "component" in df else pd.Series(None, index=df.index)
    comp_col = comp_col.where(comp_col.notna(), None)
    match = df["match"] if "match" in df else pd.Series("unidentified", index=df.index)
    unknown_lib = comp_col.notna() & ~comp_col.isin(library.components.index)
    if unknown_lib.any():
        raise InputError(f"{where}identified component(s) not in the library: "
                         f"{', '.join(sorted(set(comp_col[unknown_lib])))}")
    identified_mask = comp_col.notna() & (match != "unidentified")
    lib_cn = comp_col[identified_mask].map(library.components["carbon_number"])
    df["carbon_number"] = pd.to_numeric(df.get("carbon_number"), errors="coerce") \
        if "carbon_number" in df else np.nan
    df.loc[identified_mask, "carbon_number"] = lib_cn.astype(float)
    cn = _carbon_numbers(df, warnings)
    excluded = _excluded_mask(df, library, settings)

    # response factors
    rrf = pd.Series(np.nan, index=df.index)
    lib_rrf = library_rrf(comp_col[identified_mask].tolist(), library, settings)
    rrf[identified_mask] = comp_col[identified_mask].map(lib_rrf)
    unk = ~identified_mask
    unk_rrf = {int(n): hydrocarbon_rrf(alkane_molar_mass(int(n)), int(n))
               for n in pd.unique(cn[unk])}
    rrf[unk] = cn[unk].map(unk_rrf)
    corrected = df["area"] * rrf

    # mass balance (all peaks: identified + unidentified + excluded)
    mass_balance = _mass_balance(df["area"], corrected, identified_mask, excluded, peaks, where)
    if not mass_balance["closes"]:
        warnings.append(f"mass balance does not close: identified + unidentified + excluded "
                        f"areas differ from the peak table's total by "
                        f"{mass_balance['closure_error_rel']:.3g} (relative)")
    if excluded.any():
        warnings.append(f"{int(excluded.sum())} peak(s) excluded from normalisation by "
                        f"[quantify] exclude ({mass_balance['area_share_pct']['excluded']:.4g} % "
                        "of the area)")

    keep = ~excluded
    kept = df[keep].copy()
    kept["rrf"] = rrf[keep]
    kept["carbon_number"] = cn[keep]
    kept["component"] = comp_col[keep]
    kept["identified"] = identified_mask[keep]
    kept["corrected"] = corrected[keep]
    if kept.empty or kept["corrected"].sum() <= 0:
        raise InputError(f"{where}every peak is excluded by [quantify] exclude; nothing to report")

    rows = _aggregate(kept, library, warnings)
    # model components for unidentified rows
    rep_cache: dict[int, str] = {}
    unid = rows["component"].isna().to_numpy()
    if unid.any():
        unid_cn = rows["carbon_number"].to_numpy()[unid].astype(int)
        for n in pd.unique(unid_cn):             # first appearance order (warnings)
            rep_cache[int(n)], note = representative_component(int(n), library)
            if note:
                warnings.append(note)
        model = rows["model_component"].to_numpy(dtype=object).copy()
        model[unid] = [rep_cache[int(n)] for n in unid_cn]
        rows["model_component"] = model
    ident = rows["component"].notna()
    rows.loc[ident, "model_component"] = rows.loc[ident, "component"]

    # normalisation
    mass = rows["corrected"].astype(float)
    x_other = float(q.get("oxygenates_other_method_mass_pct", -1.0))
    oxy = rows["group"] == "oxygenates"
    if x_other >= 0:
        if x_other >= 100:
            raise SettingsError("[quantify] oxygenates_other_method_mass_pct must be below 100")
        if x_other > 0 and not oxy.any():
            raise InputError(f"{where}[quantify] oxygenates_other_method_mass_pct = {x_other} but "
                             "no oxygenate peak is identified; name the oxygenate peaks or set -1")
        hc = mass[~oxy].sum()
        mass = mass.copy()
        mass[~oxy] = mass[~oxy] / hc * (100.0 - x_other)
        if oxy.any():
            mass[oxy] = (mass[oxy] / mass[oxy].sum() * x_other) if mass[oxy].sum() > 0 else 0.0
        warnings.append(f"hydrocarbons normalised to {100.0 - x_other:g} % m/m; oxygenates "
                        f"({x_other:g} % m/m) from another method, split by the chromatogram")
    mw, rho = _physical(rows["model_component"], library, settings)
    pct = _percentages(mass, mw, rho)
    rows["mass_pct"], rows["vol_pct"], rows["mol_pct"] = pct["mass_pct"], pct["vol_pct"], pct["mol_pct"]
    rows["molar_mass_g_mol"], rows["density_kg_m3"] = mw, rho
    unid_share = rows.loc[rows["group"] == "unidentified", "mass_pct"].sum()
    log.info("%sraw corrected area %.6g; unidentified %.3f %% m/m", where,
             mass_balance["sum_before_normalisation"], unid_share)
    table = rows[list(COMPOSITION_COLUMNS)].reset_index(drop=True)
    return Quantified(table=table, mass_balance=mass_balance, warnings=warnings)


def _column(df: pd.DataFrame, name: str) -> pd.Series:
    """``df[name]`` as objects with None for missing values (all None if there is no column)."""
    if name not in df:
        return pd.Series([None] * len(df), index=df.index, dtype=object)
    values = df[name].to_numpy(dtype=object, copy=True)
    values[pd.isna(values)] = None
    return pd.Series(values, index=df.index, dtype=object)


def _aggregate(kept: pd.DataFrame, library, warnings: list[str]) -> pd.DataFrame:
    """One row per identified component (peaks of the same component summed), one per unknown.

    Vectorised: the identified peaks are grouped once; the values of each component's largest
    peak (first of equal ones) are taken by position, library values in one lookup.
    """
    comps = library.components
    ident = kept[kept["identified"].to_numpy(dtype=bool)]
    unk = kept[~kept["identified"].to_numpy(dtype=bool)]
    parts = []
    if len(ident):
        pos = ident.reset_index(drop=True)
        grouped = pos.groupby("component", sort=False)
        top = grouped["area"].idxmax().to_numpy()            # positions of each largest peak
        sums = grouped[["area", "corrected"]].sum()
        names = sums.index.to_numpy(dtype=object)
        counts = grouped.size().to_numpy()
        for name in names[counts > 1]:
            grp = ident[ident["component"] == name]
            warnings.append(f"{len(grp)} peaks identified as {name} (rows "
                            f"{', '.join(str(r) for r in grp.get('row', grp.index))}) were summed")
        lib = comps.loc[names]
        rt = pd.to_numeric(pos["rt_min"], errors="coerce").to_numpy(dtype=float)[top] \
            if "rt_min" in pos else np.full(len(top), np.nan)
        parts.append(pd.DataFrame({
            "name": names.copy(), "component": names.copy(),
            "cas": _column(lib, "cas").to_numpy() if "cas" in lib else None,
            "group": lib["group"].to_numpy(),
            "carbon_number": lib["carbon_number"].to_numpy().astype(int),
            "rt_min": _column(pos, "rt_min").to_numpy()[top],
            "retention_index": _column(pos, "retention_index").to_numpy()[top],
            "area": sums["area"].to_numpy(dtype=float),
            "rrf": pos["rrf"].to_numpy(dtype=float)[top],
            "corrected": sums["corrected"].to_numpy(dtype=float),
            "match": _column(pos, "match").to_numpy()[top],
            "ri_source": _column(pos, "ri_source").to_numpy()[top],
            "model_component": names.copy(), "_order": rt,
        }))
    if len(unk):
        export_name = _column(unk, "name")
        parts.append(pd.DataFrame({
            "name": export_name.where(export_name.notna(), "unidentified").to_numpy(),
            "component": None, "cas": _column(unk, "cas").to_numpy(),
            "group": "unidentified",
            "carbon_number": unk["carbon_number"].to_numpy().astype(int),
            "rt_min": _column(unk, "rt_min").to_numpy(),
            "retention_index": _column(unk, "retention_index").to_numpy(),
            "area": unk["area"].to_numpy(dtype=float), "rrf": unk["rrf"].to_numpy(dtype=float),
            "corrected": unk["corrected"].to_numpy(dtype=float), "match": "unidentified",
            "ri_source": _column(unk, "ri_source").to_numpy(), "model_component": None,
            "_order": pd.to_numeric(unk["rt_min"], errors="coerce").to_numpy(dtype=float)
            if "rt_min" in unk else np.nan,
        }))
    rows = pd.concat(parts, ignore_index=True) if len(parts) > 1 else parts[0]
    for col in ("rt_min", "retention_index"):
        rows[col] = pd.to_numeric(rows[col], errors="coerce")
    rows = rows.sort_values("_order", kind="stable", na_position="last").drop(columns="_order")
    rows["component"] = rows["component"].astype(object)
    rows["model_component"] = rows["model_component"].astype(object)
    return rows.reset_index(drop=True)


def _clean(value: Any) -> Any:
    if value is None or (isinstance(value, float) and math.isnan(value)) or value is pd.NA:
        return None
    return value


def _mass_balance(area: pd.Series, corrected: pd.Series, identified: pd.Series,
                  excluded: pd.Series, peaks: pd.DataFrame | None, where: str) -> dict[str, Any]:
    """Areas and shares of identified / unidentified / excluded peaks and the closure check."""
    parts = {
        "identified": identified & ~excluded,
        "unidentified": ~identified & ~excluded,
        "excluded": excluded,
    }
    total_area = float(area.sum())
    if peaks is not None and "area" in peaks:
        total_area = float(pd.to_numeric(peaks["area"], errors="coerce").sum())
    total_corr = float(corrected.sum())
    a = {k: float(area[m].sum()) for k, m in parts.items()}
    c = {k: float(corrected[m].sum()) for k, m in parts.items()}
    n = {k: int(m.sum()) for k, m in parts.items()}
    closure = abs(sum(a.values()) - total_area) / total_area if total_area > 0 else math.inf
    # float sums of the same numbers in another order differ by a few ulps per term
    tolerance = 1e-12 * max(len(area), 1)
    return {
        # rows of the identified table (a co-elution split gives two rows for one peak) and,
        # when known, the number of peaks the reader delivered
        "peaks": {**n, "total": int(len(area)),
                  "read": int(len(peaks)) if peaks is not None else int(len(area))},
        "area": {**a, "total": total_area},
        "area_share_pct": {k: 100.0 * v / total_area for k, v in a.items()},
        "corrected_area": {**c, "total": total_corr},
        "corrected_share_pct": {k: 100.0 * v / total_corr for k, v in c.items()},
        "sum_before_normalisation": c["identified"] + c["unidentified"],
        "closure_error_rel": closure,
        "closes": bool(closure <= tolerance),
    }


# --------------------------------------------------------------------------- composition runs

BASES = ("mass_pct", "vol_pct", "mol_pct")


def quantify_composition(table: pd.DataFrame, basis: str, library, settings: dict,
                         source: str = "") -> Quantified:
    """Composition table from a composition input (one basis -> mass, vol and mol %).

    Parameters
    ----------
    table : columns ``row``, ``component`` (name, synonym or CAS), ``amount`` [``basis``];
        optional ``cas`` (tried when the name is unknown) and ``formula`` (Hill formula: carbon
        number, group and molar mass of a component outside the library)
    basis : ``"mass_pct"``, ``"vol_pct"`` or ``"mol_pct"``
    library, settings : as for :func:`quantify_peaks`
    source : file name for messages

    Notes
    -----
    m_i ∝ v_i·ρ_i (volume basis) or n_i·M_i (mole basis); then v_i ∝ m_i/ρ_i, n_i ∝ m_i/M_i,
    each normalised to 100 %. Repeated components are summed (warning); amounts not summing to
    100 are normalised (warning when off by more than 0.5).

    A name or CAS number without cis/trans (``library.stereo``) is split over the library's
    isomers by ``Library.stereo_isomers`` (``[quantify] stereo_shares`` overrides the shares).
    A component the library does not know is kept as an unidentified row (``match``
    "unidentified", ``component`` None) with its amount: carbon number and group from its
    name or formula (:mod:`dha.unknown_components`), else group ``unidentified`` and the
    amount-weighted mean carbon number of the known rows; its molar mass and density (and
    its properties, through ``model_component``) are those of a library stand-in of that group
    and carbon number (:func:`stand_in_component`). Every such row is in the import log and
    one warning; ``mass_balance`` gives the shares in the library, split and not in the library.
    """
    from dha.unknown_components import (guess_from_formula, guess_from_name, guess_from_smiles,
                                        looks_like_cas)

    where = source or "composition table"
    if basis not in BASES:
        raise InputError(f"{where}: basis {basis!r} unknown; use one of {', '.join(BASES)}")
    lab_shares = _stereo_settings(settings, library)
    warnings: list[str] = []
    import_log: list[dict[str, Any]] = []
    amounts: dict[Any, float] = {}
    matches: dict[Any, str] = {}
    unknown: dict[str, dict[str, Any]] = {}
    part = {"in_library": 0.0, "stereo_split": 0.0, "not_in_library": 0.0}
    rows = {"in_library": 0, "stereo_split": 0, "not_in_library": 0}
    has_formula = "formula" in table.columns
    explicit: set[str] = set()
    n_rows = 0
    for i, rec in table.reset_index(drop=True).iterrows():
        text = rec["component"]
        row = rec["row"] if "row" in table else i + 1
        amount = pd.to_numeric(pd.Series([rec["amount"]]), errors="coerce").iloc[0]
        if pd.isna(amount) or amount < 0:
            raise InputError(f"{where}, row {row}: amount {rec['amount']!r} of {text} is not a "
                             "non-negative number")
        amount = float(amount)
        if _clean(text) is None or not str(text).strip():
            raise InputError(f"{where}, row {row}: no component name or CAS number; fill it in "
                             "or delete the row")
        n_rows += 1
        text = str(text).strip()
        how = "cas" if looks_like_cas(text) else "name"
        name = _resolve_name(text, library)
        cas_text = _clean(rec.get("cas")) if "cas" in table.columns else None
        if name is None and cas_text is not None and str(cas_text).strip() != text:
            # a name the library does not know, with a CAS number beside it
            name = _resolve_name(str(cas_text).strip(), library)
            if name is not None:
                how = "cas"
                import_log.append({"row": int(row), "action": "changed", "reason": (
                    f"name {text!r} not in the library; its CAS number {cas_text} is {name}")})
        if name is not None:
            if name in explicit:
                warnings.append(f"{where}: {name} given more than once; amounts summed")
            explicit.add(name)
            amounts[name] = amounts.get(name, 0.0) + amount
            matches.setdefault(name, how)
            part["in_library"] += amount
            rows["in_library"] += 1
            continue
        entry = _resolve_stereo(text, library)
        if entry is None and cas_text is not None:
            entry = _resolve_stereo(str(cas_text).strip(), library)
        if entry is not None:
            split = library.stereo_isomers(entry, lab_shares.get(entry))
            for iso, share in split:
                amounts[iso] = amounts.get(iso, 0.0) + amount * share
                matches.setdefault(iso, how)
            part["stereo_split"] += amount
            rows["stereo_split"] += 1
            import_log.append({"row": int(row), "action": "changed", "reason": (
                f"{text!r} has no cis/trans: {amount:.6g} {basis} split over "
                + ", ".join(f"{iso} {100 * share:.3g} %" for iso, share in split))})
            continue
        formula = _clean(rec.get("formula")) if has_formula else None
        guess = guess_from_name(text)
        if guess.carbon_number is None:
            guess = guess_from_smiles(text)
        if formula is not None:
            fg = guess_from_formula(formula)
            guess = type(guess)(fg.carbon_number or guess.carbon_number,
                                guess.group or fg.group, "formula" if fg.carbon_number else
                                guess.how)
        key = text
        got = unknown.setdefault(key, {"amount": 0.0, "guess": guess, "rows": [], "how": how,
                                       "formula": formula, "cas": cas_text})
        got["amount"] += amount
        got["rows"].append(int(row))
        part["not_in_library"] += amount
        rows["not_in_library"] += 1
    if n_rows == 0:
        raise InputError(f"{where}: no components")
    total = sum(part.values())
    if total <= 0:
        raise InputError(f"{where}: amounts sum to zero")
    if abs(total - 100.0) > 0.5:
        warnings.append(f"{where}: amounts ({basis}) sum to {total:.6g}, normalised to 100")
    known = pd.Series(amounts, dtype=float)
    mean_cn = None
    if len(known) and known.sum() > 0:
        cn_known = library.components.loc[known.index, "carbon_number"].astype(float)
        mean_cn = int(round(float((cn_known * known).sum() / known.sum())))
    records = []
    for name, amount in amounts.items():
        records.append({"name": name, "component": name, "group": None, "carbon_number": None,
                        "amount": amount, "match": matches[name], "model_component": name})
    unknown_notes = []
    for text, got in unknown.items():
        guess = got["guess"]
        cn = guess.carbon_number or mean_cn or 7
        group = guess.group or "unidentified"
        stand_in, note = stand_in_component(group, cn, library)
        if note:
            warnings.append(note)
        desc = (f"C{cn} {group} from its {guess.how}" if guess.group else
                f"C{cn} from its {guess.how}, group unknown" if guess.carbon_number else
                f"nothing known: C{cn} (the known rows' mean carbon number), group unidentified")
        hint = _unknown_hint(text, library)
        for r in got["rows"]:
            import_log.append({"row": r, "action": "changed", "reason": (
                f"component {text!r} not in the library: kept as an unidentified row "
                f"({desc}; properties from {stand_in}){hint}")})
        unknown_notes.append(f"{text} ({desc})")
        records.append({"name": text, "component": None, "group": group, "carbon_number": cn,
                        "amount": got["amount"], "match": "unidentified",
                        "model_component": stand_in, "formula": got["formula"],
                        "cas": text if got["how"] == "cas" else got["cas"]})
    frame = pd.DataFrame(records)
    mw, rho = _physical(frame["model_component"], library, settings)
    if "formula" in frame:
        # an unknown row's own formula gives its molar mass (IUPAC 2013 weights)
        own = frame["formula"].map(_formula_molar_mass)
        mw = mw.where(own.isna(), own.astype(float))
    x = frame["amount"].astype(float)
    mass = {"mass_pct": x, "vol_pct": x * rho, "mol_pct": x * mw}[basis]
    pct = _percentages(mass, mw, rho)
    comps = library.components
    lib_rows = frame["component"].notna()
    names = frame["model_component"]
    out = pd.DataFrame({
        "name": frame["name"], "component": frame["component"].astype(object),
        "cas": [(_clean(comps.at[n, "cas"]) if ok else c) for n, ok, c in
                zip(names, lib_rows, frame.get("cas", pd.Series([None] * len(frame))))],
        "group": np.where(lib_rows, comps.loc[names.values, "group"].to_numpy(),
                          frame["group"].to_numpy(dtype=object)),
        "carbon_number": np.where(lib_rows, comps.loc[names.values, "carbon_number"].to_numpy(),
                                  frame["carbon_number"].to_numpy(dtype=object)).astype(int),
        "rt_min": np.nan, "retention_index": np.nan, "area": np.nan, "rrf": np.nan,
        "mass_pct": pct["mass_pct"], "vol_pct": pct["vol_pct"], "mol_pct": pct["mol_pct"],
        "match": frame["match"], "ri_source": None, "model_component": names,
        "molar_mass_g_mol": mw, "density_kg_m3": rho,
    })
    unk = ~lib_rows.to_numpy()
    unknown_pct = {b: float(out.loc[unk, b].sum()) for b in BASES}
    if unknown:
        listed = "; ".join(unknown_notes[:20]) + (" ..." if len(unknown_notes) > 20 else "")
        warnings.append(
            f"{where}: {len(unknown)} component(s) not in the library kept as unidentified rows "
            f"({unknown_pct['mass_pct']:.3g} % m/m, {unknown_pct['vol_pct']:.3g} % v/v, "
            f"{unknown_pct['mol_pct']:.3g} % mol): {listed}. Their properties use library "
            "stand-ins of the same group and carbon number; add them to the library (a lab "
            "overlay) for exact values")
    if rows["stereo_split"]:
        warnings.append(f"{where}: {rows['stereo_split']} component(s) named without cis/trans "
                        "split over the library's isomers (import log; shares from "
                        "component_library/stereo_unspecified.csv or [quantify] stereo_shares)")
    mass_balance = {
        "basis": basis,
        "rows": {**rows, "total": n_rows},
        "amount": {**part, "total": total},
        "amount_share_pct": {k: 100.0 * v / total for k, v in part.items()},
        "not_in_library_pct": unknown_pct,
        "sum_before_normalisation": total,
        "closes": bool(abs(sum(part.values()) - total) <= 1e-9 * max(total, 1.0)),
    }
    return Quantified(table=out[list(COMPOSITION_COLUMNS)], mass_balance=mass_balance,
                      warnings=warnings, import_log=import_log)


def _formula_molar_mass(formula: Any) -> float | None:
    """Molar mass [g/mol] of a C/H/O Hill formula, None when blank or not C/H/O."""
    if _clean(formula) is None:
        return None
    try:
        atoms = parse_formula(str(formula).replace(" ", ""))
    except (ValueError, KeyError, TypeError):
        return None
    if not atoms or not atoms.get("C") or set(atoms) - {"C", "H", "O"}:
        return None
    return float(sum(ATOMIC_WEIGHT[el] * n for el, n in atoms.items()))


def _resolve_stereo(text: str, library) -> str | None:
    """Stereo-unspecified entry for a name or CAS (exact, then the tolerant matcher)."""
    finder = getattr(library, "find_stereo", None)
    entry = finder(text) if finder is not None else None
    if entry is None and getattr(library, "stereo", None) is not None:
        from dha.identify import match_stereo
        entry = match_stereo(text, library)
    return entry


def _stereo_settings(settings: dict, library) -> dict[str, dict[str, float]]:
    """``[quantify] stereo_shares`` checked: {entry: {isomer: share}}."""
    given = (settings.get("quantify", {}) or {}).get("stereo_shares") or {}
    if not isinstance(given, dict):
        raise SettingsError("[quantify] stereo_shares must be a table like "
                            "{ \"2-hexene\" = { \"cis-2-hexene\" = 0.3, \"trans-2-hexene\" = 0.7 } }")
    out: dict[str, dict[str, float]] = {}
    for key, shares in given.items():
        entry = _resolve_stereo(str(key), library)
        if entry is None:
            raise SettingsError(f"[quantify] stereo_shares: {key!r} is not a name without "
                                "cis/trans of component_library/stereo_unspecified.csv")
        isomers = [n for n, _ in library.stereo_isomers(entry)]
        if not isinstance(shares, dict) or not shares:
            raise SettingsError(f"[quantify] stereo_shares.{key}: give {{isomer = share}} for "
                                f"{', '.join(isomers)}")
        clean: dict[str, float] = {}
        for iso, value in shares.items():
            name = library.find(str(iso))
            if name not in isomers:
                raise SettingsError(f"[quantify] stereo_shares.{key}: {iso!r} is not one of "
                                    f"{', '.join(isomers)}")
            if isinstance(value, bool) or not isinstance(value, (int, float)) or value < 0:
                raise SettingsError(f"[quantify] stereo_shares.{key}.{iso} = {value!r}: give a "
                                    "non-negative number")
            clean[name] = float(value)
        if not sum(clean.values()) > 0:
            raise SettingsError(f"[quantify] stereo_shares.{key}: the shares sum to zero")
        out[entry] = clean
    return out


def _unknown_hint(text: str, library) -> str:
    """'; did you mean ...' for an unknown component: CAS numbers for a CAS, names for a name."""
    from dha.unknown_components import cas_suggestions, looks_like_cas
    if looks_like_cas(text) or re.fullmatch(r"\d{5,10}", text):
        numbers = list(library.components["cas"]) + list(library.stereo["cas"]) \
            if getattr(library, "stereo", None) is not None else list(library.components["cas"])
        note, close = cas_suggestions(text, numbers)
        out = f"; {note}" if note else ""
        if close:
            out += "; close library CAS numbers: " + ", ".join(
                f"{c} ({library.find(c) or library.find_stereo(c)})" for c in close)
        return out
    close = _suggestions(text, library)
    return f"; close library names: {', '.join(close)}" if close else ""


def stand_in_component(group: str, n_carbon: int, library) -> tuple[str, str | None]:
    """Library component whose properties stand in for an unknown row of ``group`` and C``n``.

    Paraffins and unknown groups: :func:`representative_component` (a 2-methylalkane). Other
    groups: the component of that group at the nearest carbon number (equal distance: the
    lower), first by name (common practice, no source). Returns (name, warning or None).
    """
    if group in ("isoparaffins", "n_paraffins", "unidentified"):
        return representative_component(int(n_carbon), library)
    comps = library.components
    cn = pd.to_numeric(comps["carbon_number"], errors="coerce")
    for n in _nearest_first(int(n_carbon)):
        hit = sorted(comps.index[(comps["group"] == group) & (cn == n)])
        if hit:
            note = None if n == n_carbon else (
                f"no {group} of C{n_carbon} in the library: unknown C{n_carbon} {group} use "
                f"{hit[0]} (C{n}) for their properties")
            return hit[0], note
    return representative_component(int(n_carbon), library)


def quantify_run(run, identified: pd.DataFrame | None, library, settings: dict) -> Quantified:
    """Dispatch on ``run.kind``: composition input or identified peaks."""
    source = Path(str(getattr(run, "source_file", "") or "")).name
    if getattr(run, "injection", None):
        source = f"{source} [{run.injection}]"
    if run.kind == "composition":
        return quantify_composition(run.table, run.basis, library, settings, source=source)
    return quantify_peaks(identified, library, settings, peaks=run.table, source=source)
