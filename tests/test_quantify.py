"""Quantification: response factors, normalisation, volume and mole %, composition input.

Unit tests run on a tiny stand-in library (``tiny_library``) whose values come from outside the
project: molar masses from ``chemicals`` (IUPAC atomic weights), liquid densities at 15 °C from
``thermo`` 0.6 (``Chemical(T=288.15).rhol``); ECNs from Sternberg's contributions (aliphatic C
1.0, ether O −1.0, primary alcohol O −0.6, secondary −0.75; Scanlon & Willis, J. Chromatogr. Sci. 23 (1985) 333, from memory for
−0.6). The other quantification test modules import ``tiny_library`` from here.
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from functools import lru_cache

import numpy as np
import pandas as pd
import pytest

from dha.errors import InputError, SettingsError
from dha.quantify import (alkane_molar_mass, density_at, hydrocarbon_rrf, is_primary_alcohol,
                          library_rrf, quantify_composition, quantify_peaks,
                          representative_component)
from dha.settings import default_settings

# name, synonyms, cas, formula, group, subgroup, carbon number, ECN (None for hydrocarbons)
_TINY = [
    ("n-butane", "", "106-97-8", "C4H10", "n_paraffins", "alkane", 4, None),
    ("n-heptane", "heptane", "142-82-5", "C7H16", "n_paraffins", "alkane", 7, None),
    ("n-nonane", "", "111-84-2", "C9H20", "n_paraffins", "alkane", 9, None),
    ("n-tridecane", "", "629-50-5", "C13H28", "n_paraffins", "alkane", 13, None),
    ("2-methylbutane", "isopentane", "78-78-4", "C5H12", "isoparaffins", "alkane", 5, None),
    ("2-methylhexane", "", "591-76-4", "C7H16", "isoparaffins", "alkane", 7, None),
    ("2-methylheptane", "", "592-27-8", "C8H18", "isoparaffins", "alkane", 8, None),
    ("2,2,4-trimethylpentane", "isooctane", "540-84-1", "C8H18", "isoparaffins", "alkane", 8, None),
    ("1-butene", "", "106-98-9", "C4H8", "olefins", "alkene", 4, None),
    ("cyclopentene", "", "142-29-0", "C5H8", "olefins", "cycloalkene", 5, None),
    ("cyclohexane", "", "110-82-7", "C6H12", "naphthenes", "cycloalkane", 6, None),
    ("benzene", "", "71-43-2", "C6H6", "aromatics", "monoaromatic", 6, None),
    ("toluene", "methylbenzene", "108-88-3", "C7H8", "aromatics", "monoaromatic", 7, None),
    ("m-xylene", "1,3-dimethylbenzene", "108-38-3", "C8H10", "aromatics", "monoaromatic", 8, None),
    ("1,2,4-trimethylbenzene", "", "95-63-6", "C9H12", "aromatics", "monoaromatic", 9, None),
    ("methanol", "", "67-56-1", "CH4O", "oxygenates", "alcohol", 1, 1 - 0.6),
    ("ethanol", "etoh", "64-17-5", "C2H6O", "oxygenates", "alcohol", 2, 2 - 0.6),
    ("propan-2-ol", "2-propanol;isopropanol", "67-63-0", "C3H8O", "oxygenates", "alcohol", 3,
     3 - 0.75),
    ("2-methoxy-2-methylpropane", "mtbe", "1634-04-4", "C5H12O", "oxygenates", "ether", 5,
     5 - 1.0),
]


@dataclass
class TinyLibrary:
    """Stand-in with the ``Library`` attributes quantify/groups/result use."""

    components: pd.DataFrame
    version: str = "tiny-test"
    sha256: str = "0" * 64

    def find(self, text):
        if text is None or (isinstance(text, float) and math.isnan(text)):
            return None
        key = " ".join(str(text).casefold().split())
        for name, row in self.components.iterrows():
            syns = [s.strip().casefold() for s in str(row["synonyms"]).split(";") if s.strip()]
            if key in (name.casefold(), str(row["cas"])) or key in syns:
                return name
        return None


def _saturated(name: str) -> float:
    import CoolProp.CoolProp as CP
    return CP.PropsSI("D", "T", 288.15, "Q", 0, {"n-butane": "n-Butane", "1-butene": "1-Butene"}[name])


@lru_cache(maxsize=1)
@lru_cache(maxsize=1)
def tiny_library() -> TinyLibrary:
    """Built once per test session (thermo's Chemical objects are slow to make); the tests
    only read it."""
    from chemicals.elements import molecular_weight, nested_formula_parser
    from thermo import Chemical
    rows = []
    for name, syn, cas, formula, group, sub, n, ecn in _TINY:
        rows.append({
            "name": name, "synonyms": syn, "cas": cas, "formula": formula, "group": group,
            "subgroup": sub, "carbon_number": n,
            # IUPAC standard atomic weights as packaged in chemicals 1.5
            "molar_mass_g_mol": molecular_weight(nested_formula_parser(formula)),
            # thermo 0.6.1 default liquid-density method at 288.15 K, 1 atm; the C4s boil
            # below 15 °C: CoolProp 8 saturated-liquid density at 288.15 K for those
            "density_15c_kg_m3": Chemical(cas, T=288.15, P=101325.0).rhol or _saturated(name),
            "ecn": np.nan if ecn is None else ecn,
        })
    return TinyLibrary(pd.DataFrame(rows).set_index("name"))


def peak_table(rows):
    """Identified peak table from (rt_min, area, component or None, carbon_number, ri)."""
    out = []
    for i, (rt, area, comp, cn, ri) in enumerate(rows, start=1):
        out.append({"row": i, "rt_min": rt, "area": area, "height": np.nan, "area_pct": np.nan,
                    "name": comp, "cas": None, "retention_index": ri, "cds_mass_pct": np.nan,
                    "component": comp, "match": "name" if comp else "unidentified",
                    "ri_source": None, "ri_delta": np.nan, "carbon_number": cn,
                    "coelution": None})
    return pd.DataFrame(out)


@pytest.fixture
def lib():
    return tiny_library()


@pytest.fixture
def settings():
    return default_settings()


# ------------------------------------------------------------------ response factors

def test_hydrocarbon_rrf_equals_carbon_mass_rule(lib, settings):
    # FID carbon-mass response, ASTM D6730 §15: the mass RRF vs methane is M/(n_C·M_CH4) (petrochromatics.com form);
    # 0.7487 = 12.011/16.043 to 4 digits, so both forms agree to 5e-5 relative.
    comps = lib.components
    rrf = library_rrf(["benzene", "n-heptane", "2,2,4-trimethylpentane"], lib, settings)
    for name in rrf.index:
        mw, n = comps.at[name, "molar_mass_g_mol"], comps.at[name, "carbon_number"]
        assert rrf[name] == pytest.approx(mw / (n * 16.043), rel=5e-5)
    # benzene by hand: 78.112·0.7487/(12.011·6) = 0.81152 (chemicals molar mass 78.11184)
    assert rrf["benzene"] == pytest.approx(78.11184 * 0.7487 / (12.011 * 6), rel=1e-6)


def test_oxygenate_rrf_from_ecn_and_primary_alcohol_setting(lib, settings):
    # Sternberg ECN: ethanol 2 - 0.6 = 1.4; MTBE 5 - 1.0 = 4 (Scanlon & Willis, J. Chromatogr. Sci. 23 (1985) 333)
    mw_e = lib.components.at["ethanol", "molar_mass_g_mol"]
    mw_m = lib.components.at["2-methoxy-2-methylpropane", "molar_mass_g_mol"]
    mw_p = lib.components.at["propan-2-ol", "molar_mass_g_mol"]
    rrf = library_rrf(["ethanol", "2-methoxy-2-methylpropane", "propan-2-ol"], lib, settings)
    assert rrf["ethanol"] == pytest.approx(mw_e * 0.7487 / (12.011 * 1.4))
    assert rrf["2-methoxy-2-methylpropane"] == pytest.approx(mw_m * 0.7487 / (12.011 * 4.0))
    settings["quantify"]["primary_alcohol_oxygen_ecn"] = -0.5   # the other tabulation
    rrf2 = library_rrf(["ethanol", "propan-2-ol", "2-methoxy-2-methylpropane"], lib, settings)
    assert rrf2["ethanol"] == pytest.approx(mw_e * 0.7487 / (12.011 * 1.5))
    # a secondary alcohol and an ether do not change
    assert rrf2["propan-2-ol"] == pytest.approx(mw_p * 0.7487 / (12.011 * 2.25))
    assert rrf2["2-methoxy-2-methylpropane"] == rrf["2-methoxy-2-methylpropane"]


def test_lab_factor_overrides_by_synonym(lib, settings):
    settings["quantify"]["response_factors"] = {"EtOH": 1.95}   # invented lab value
    assert library_rrf(["ethanol"], lib, settings)["ethanol"] == 1.95
    settings["quantify"]["response_factors"] = {"ethanoll": 1.9}
    with pytest.raises(SettingsError, match="ethanoll"):
        library_rrf(["ethanol"], lib, settings)


def test_primary_alcohol_rule_agrees_with_rdkit():
    # RDKit 2024: a primary alcohol has its OH on a carbon with at most one carbon neighbour
    from rdkit import Chem
    cases = {"methanol": "CO", "ethanol": "CCO", "propan-1-ol": "CCCO", "1-butanol": "CCCCO",
             "2-methylpropan-1-ol": "CC(C)CO", "2-methyl-1-propanol": "CC(C)CO",
             "propan-2-ol": "CC(C)O", "2-butanol": "CCC(C)O", "tert-butanol": "CC(C)(C)O",
             "2-methylpropan-2-ol": "CC(C)(C)O"}
    patt = Chem.MolFromSmarts("[OX2H][CX4;!$(C([#6])([#6])[#6])]")
    patt_sec = Chem.MolFromSmarts("[OX2H][CX4]([#6])[#6]")
    for name, smi in cases.items():
        mol = Chem.MolFromSmiles(smi)
        primary = mol.HasSubstructMatch(patt) and not mol.HasSubstructMatch(patt_sec)
        assert is_primary_alcohol(name, "alcohol") == primary, name


# ------------------------------------------------------------------ a peak run by hand

def test_three_peak_worked_example(lib, settings):
    # n-heptane 1000, toluene 500 counts, one unknown between n-C7 and n-C8 (RI 750 -> C8)
    peaks = peak_table([(10.0, 1000.0, "n-heptane", 7, 700.0), (12.0, 500.0, "toluene", 7, 760.0),
                        (11.0, 200.0, None, np.nan, 750.0)])
    q = quantify_peaks(peaks, lib, settings)
    c = lib.components
    # first principles: RRF = M·0.7487/(12.011·n_C); unknown C8 = isoparaffin C8H18
    f_hep = c.at["n-heptane", "molar_mass_g_mol"] * 0.7487 / (12.011 * 7)
    f_tol = c.at["toluene", "molar_mass_g_mol"] * 0.7487 / (12.011 * 7)
    f_unk = (8 * 12.011 + 18 * 1.008) * 0.7487 / (12.011 * 8)
    m = np.array([1000 * f_hep, 200 * f_unk, 500 * f_tol])        # order of retention time
    mass_pct = 100 * m / m.sum()
    rho = np.array([c.at["n-heptane", "density_15c_kg_m3"], c.at["2-methylheptane", "density_15c_kg_m3"],
                    c.at["toluene", "density_15c_kg_m3"]])
    mw = np.array([c.at["n-heptane", "molar_mass_g_mol"], c.at["2-methylheptane", "molar_mass_g_mol"],
                   c.at["toluene", "molar_mass_g_mol"]])
    vol_pct = 100 * (mass_pct / rho) / (mass_pct / rho).sum()
    mol_pct = 100 * (mass_pct / mw) / (mass_pct / mw).sum()
    t = q.table
    assert list(t["name"]) == ["n-heptane", "unidentified", "toluene"]
    assert list(t["model_component"]) == ["n-heptane", "2-methylheptane", "toluene"]
    assert list(t["carbon_number"]) == [7, 8, 7]
    np.testing.assert_allclose(t["mass_pct"], mass_pct, rtol=1e-12)
    np.testing.assert_allclose(t["vol_pct"], vol_pct, rtol=1e-12)
    np.testing.assert_allclose(t["mol_pct"], mol_pct, rtol=1e-12)
    mb = q.mass_balance
    assert mb["closes"] and mb["area"]["total"] == 1700.0
    assert mb["sum_before_normalisation"] == pytest.approx(m.sum())
    assert mb["area_share_pct"]["unidentified"] == pytest.approx(100 * 200 / 1700)


def test_exclusion_keeps_mass_balance(lib, settings):
    settings["quantify"]["exclude"] = ["Air", "carbon disulfide"]
    peaks = peak_table([(1.0, 50.0, None, 3, 250.0), (2.0, 900.0, None, 3, 300.0),
                        (10.0, 1000.0, "n-heptane", 7, 700.0), (12.0, 500.0, "toluene", 7, 760.0)])
    peaks.loc[0, "name"] = "air"
    peaks.loc[1, "name"] = "Carbon Disulfide"
    raw = peaks.drop(columns=["component", "match", "ri_source", "ri_delta", "coelution"])
    q = quantify_peaks(peaks, lib, settings, peaks=raw)
    assert list(q.table["name"]) == ["n-heptane", "toluene"]
    assert q.table["mass_pct"].sum() == pytest.approx(100.0, abs=1e-12)
    mb = q.mass_balance
    assert mb["peaks"] == {"identified": 2, "unidentified": 0, "excluded": 2, "total": 4, "read": 4}
    assert mb["area"]["excluded"] == 950.0
    parts = mb["area"]["identified"] + mb["area"]["unidentified"] + mb["area"]["excluded"]
    assert parts == mb["area"]["total"] and mb["closes"]
    # a peak lost between reader and quantification breaks the balance
    q2 = quantify_peaks(peaks.iloc[1:], lib, settings, peaks=raw)
    assert not q2.mass_balance["closes"] and any("does not close" in w for w in q2.warnings)


def test_oxygenates_from_another_method(lib, settings):
    settings["quantify"]["oxygenates_other_method_mass_pct"] = 10.0
    peaks = peak_table([(3.0, 100.0, "ethanol", 2, 450.0), (6.0, 300.0, "2-methoxy-2-methylpropane", 5, 560.0),
                        (10.0, 1000.0, "n-heptane", 7, 700.0), (12.0, 500.0, "toluene", 7, 760.0)])
    t = quantify_peaks(peaks, lib, settings).table.set_index("name")
    rrf = library_rrf(["ethanol", "2-methoxy-2-methylpropane"], lib, settings)
    oxy = pd.Series({"ethanol": 100 * rrf["ethanol"],
                     "2-methoxy-2-methylpropane": 300 * rrf["2-methoxy-2-methylpropane"]})
    expect = 10.0 * oxy / oxy.sum()
    assert t.loc["ethanol", "mass_pct"] == pytest.approx(expect["ethanol"])
    assert t.loc[["n-heptane", "toluene"], "mass_pct"].sum() == pytest.approx(90.0)
    settings["quantify"]["oxygenates_other_method_mass_pct"] = 5.0
    with pytest.raises(InputError, match="no oxygenate peak"):
        quantify_peaks(peaks.iloc[2:], lib, settings)


def test_unidentified_representatives(lib):
    assert representative_component(7, lib) == ("2-methylhexane", None)
    assert representative_component(5, lib)[0] == "2-methylbutane"      # isopentane
    assert representative_component(9, lib) == ("n-nonane", None)       # no C9 isoparaffin here
    name, note = representative_component(11, lib)                        # none: nearest
    assert name in ("n-nonane", "n-tridecane") and "C11" in note
    # 2-methylheptane: CnH2n+2 with IUPAC weights, as thermo/chemicals give it
    assert alkane_molar_mass(8) == pytest.approx(lib.components.at["2-methylheptane", "molar_mass_g_mol"], rel=1e-4)


def test_mass_balance_closes_for_random_tables(lib, settings):
    rng = np.random.default_rng(7)
    names = ["n-heptane", "toluene", "benzene", "2,2,4-trimethylpentane", None, None]
    for _ in range(20):
        rows = [(float(i), float(rng.uniform(0.1, 1e6)), names[i % 6], 7 + i % 3, 700.0 + i)
                for i in range(rng.integers(6, 40))]
        peaks = peak_table(rows)
        peaks["component"] = [c if i < 6 else (None if c else None) for i, c in enumerate(peaks["component"])]
        peaks.loc[peaks["component"].isna(), "match"] = "unidentified"
        q = quantify_peaks(peaks, lib, settings, peaks=peaks)
        assert q.mass_balance["closes"]
        assert q.table["mass_pct"].sum() == pytest.approx(100.0, abs=1e-9)


# ------------------------------------------------------------------ volume, density, composition

def test_binary_volume_pct_from_coolprop_densities(lib, settings):
    # CoolProp 8 saturated-liquid densities at 288.15 K (15 °C)
    import CoolProp.CoolProp as CP
    rho_h = CP.PropsSI("D", "T", 288.15, "Q", 0, "n-Heptane")
    rho_t = CP.PropsSI("D", "T", 288.15, "Q", 0, "Toluene")
    table = pd.DataFrame({"row": [1, 2], "component": ["n-heptane", "toluene"], "amount": [50.0, 50.0]})
    t = quantify_composition(table, "mass_pct", lib, settings).table.set_index("name")
    v_h = 50 / rho_h / (50 / rho_h + 50 / rho_t) * 100
    # the stand-in library's densities (thermo) agree with CoolProp to 0.5 %; the volume
    # split of a 50/50 blend then agrees to 0.15 % v/v
    assert t.loc["n-heptane", "vol_pct"] == pytest.approx(v_h, abs=0.15)
    assert t.loc["n-heptane", "vol_pct"] + t.loc["toluene", "vol_pct"] == pytest.approx(100.0)


def test_prf90_by_volume_round_trip(lib, settings):
    # PRF 90 = 90 % v/v isooctane in n-heptane (ASTM D2699 definition of the octane scale)
    table = pd.DataFrame({"row": [1, 2], "component": ["isooctane", "n-heptane"], "amount": [90.0, 10.0]})
    t = quantify_composition(table, "vol_pct", lib, settings).table.set_index("name")
    assert round(t.loc["2,2,4-trimethylpentane", "vol_pct"], 2) == 90.00
    back = pd.DataFrame({"row": [1, 2], "component": list(t.index), "amount": list(t["mass_pct"])})
    t2 = quantify_composition(back, "mass_pct", lib, settings).table.set_index("name")
    assert t2.loc["2,2,4-trimethylpentane", "vol_pct"] == pytest.approx(90.0, abs=1e-9)


def test_mole_basis_by_hand(lib, settings):
    # 50/50 mol ethanol/n-heptane: mass ∝ n·M (stoichiometry)
    table = pd.DataFrame({"row": [1, 2], "component": ["64-17-5", "heptane"], "amount": [50.0, 50.0]})
    t = quantify_composition(table, "mol_pct", lib, settings).table.set_index("name")
    m_e, m_h = (lib.components.at[n, "molar_mass_g_mol"] for n in ("ethanol", "n-heptane"))
    assert t.loc["ethanol", "mass_pct"] == pytest.approx(100 * m_e / (m_e + m_h))
    assert t.loc["ethanol", "match"] == "cas" and t.loc["n-heptane", "match"] == "name"


def test_unknown_component_kept_with_suggestion(lib, settings):
    # issue 12: an unknown component no longer fails the file; it stays as an unidentified row
    table = pd.DataFrame({"row": [4, 5], "component": ["toluene", "toluen"], "amount": [50.0, 50.0]})
    q = quantify_composition(table, "vol_pct", lib, settings, source="blend.csv")
    t = q.table.set_index("name")
    assert t.loc["toluen", "match"] == "unidentified" and t["vol_pct"].sum() == pytest.approx(100)
    assert t.loc["toluen", "vol_pct"] == pytest.approx(50.0)
    entry = [e for e in q.import_log if e["row"] == 5][0]
    assert "'toluen'" in entry["reason"] and "toluene" in entry["reason"]
    assert any("blend.csv" in w and "toluen" in w for w in q.warnings)
    assert q.mass_balance["rows"]["not_in_library"] == 1 and q.mass_balance["closes"]


def test_density_at_60f_against_coolprop():
    # CoolProp 8: ρ(288.71 K)/ρ(288.15 K) for n-heptane and toluene; the API gasoline
    # expansion form reproduces the ratio within 1e-4 (the volume % effect is smaller still)
    import CoolProp.CoolProp as CP
    for fluid in ("n-Heptane", "Toluene"):
        r15 = CP.PropsSI("D", "T", 288.15, "Q", 0, fluid)
        r60 = CP.PropsSI("D", "T", 288.15 + 0.56, "Q", 0, fluid)
        assert density_at(r15, 15.56) / r15 == pytest.approx(r60 / r15, abs=1e-4)
    assert density_at(700.0, 15.0) == 700.0


def test_reference_temperature_60f_changes_volume_pct_only_slightly(lib, settings):
    # 60 °F = 15.56 °C (US practice, common trade practice): densities shift by ~0.07 %, and the volume
    # split of a heptane/toluene blend moves by far less than 0.01 % v/v
    table = pd.DataFrame({"row": [1, 2], "component": ["n-heptane", "toluene"], "amount": [50.0, 50.0]})
    v15 = quantify_composition(table, "mass_pct", lib, settings).table["vol_pct"]
    settings["quantify"]["reference_temperature_c"] = 15.56
    t60 = quantify_composition(table, "mass_pct", lib, settings).table
    assert (t60["vol_pct"] - v15).abs().max() < 0.01
    assert (t60["density_kg_m3"] < lib.components.loc[list(t60["name"]), "density_15c_kg_m3"].to_numpy()).all()
    settings["quantify"]["reference_temperature_c"] = 60.0      # °F typed as °C: refused
    with pytest.raises(SettingsError, match="reference_temperature_c"):
        quantify_composition(table, "mass_pct", lib, settings)


def test_composition_names_through_the_identifiers_matcher(settings):
    # trade abbreviations and inverted index names (dha.identify.match_name) resolve like the
    # identifier resolves export names; CAS 71-43-2 is benzene (CAS registry)
    from dha.library import load_library
    table = pd.DataFrame({"row": [2, 3, 4, 5], "component": ["nC7", "iC5", "Benzene, methyl-", "71-43-2"],
                          "amount": [40.0, 30.0, 29.0, 1.0]})
    t = quantify_composition(table, "vol_pct", load_library(), settings).table
    assert list(t["name"]) == ["n-heptane", "2-methylbutane", "toluene", "benzene"]
    assert list(t["match"]) == ["name", "name", "name", "cas"]
    np.testing.assert_allclose(t["vol_pct"], [40.0, 30.0, 29.0, 1.0], rtol=1e-12)


def test_missing_carbon_numbers(lib, settings):
    # identified peaks take the library's carbon number; an unknown with neither carbon number
    # nor index takes the one of the peak eluting before it (documented rule), with a warning
    peaks = peak_table([(10.0, 1000.0, "n-heptane", np.nan, np.nan), (10.5, 100.0, None, np.nan, np.nan),
                        (12.0, 500.0, "toluene", np.nan, np.nan)])
    q = quantify_peaks(peaks, lib, settings)
    assert list(q.table["carbon_number"]) == [7, 7, 7]
    assert q.table.loc[1, "model_component"] == "2-methylhexane"
    assert sum("took the carbon number" in w for w in q.warnings) == 1 and "rows 2" in q.warnings[0]


def test_peak_extrapolated_below_index_100_is_c1_not_a_crash():
    # issue 13: an unnamed run whose markers sit late gave a peak an index <= 0 (carbon
    # number 0) and the FID factor divided by zero. Van den Dool-Kratz extrapolated with the
    # first bracket: 500 + 100 (t - 5.0) / (5.5 - 5.0) = -480 at 0.1 min (C-4) and -50 at
    # 2.25 min (C0, the division by zero) (arithmetic, no source)
    from dha.identify import identify
    from dha.library import load_library
    from dha.quantify import quantify_peaks
    from dha.settings import default_settings
    lib = load_library()
    s = default_settings()
    s["identify"]["markers"] = {"5": 5.0, "6": 5.5, "7": 6.0}
    peaks = pd.DataFrame({"row": [1, 2, 3, 4, 5], "rt_min": [0.1, 2.25, 5.0, 5.5, 6.0],
                          "area": [10.0, 10.0, 100.0, 100.0, 100.0], "name": None, "cas": None,
                          "retention_index": np.nan})
    ident = identify(peaks, lib, s)
    assert (ident["carbon_number"] >= 1).all()       # the identifier gives no C0 any more
    # an identified table (or export) that still carries them: quantify copes too
    ident.loc[ident["rt_min"] < 5.0, "carbon_number"] = [-4, 0]
    q = quantify_peaks(ident, lib, s, peaks=peaks)
    assert q.table["mass_pct"].sum() == pytest.approx(100.0)
    assert (q.table["carbon_number"] >= 1).all() and (q.table["mass_pct"] > 0).all()
    assert any("below 100" in w and "C1" in w for w in q.warnings)
