"""Bulk properties (dha.properties.bulk).

References: measured binary-mixture densities (NIST ThermoML archive as compiled in openff-sage,
copy in tests/data/density with PROVENANCE.md; DOIs in the file); chemicals 1.5.2 (liquid enthalpies of formation ``Hfl``, combustion stoichiometry,
element mass fractions, molar masses).
"""
from __future__ import annotations

import dataclasses
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from dha.errors import LibraryError
from dha.library import load_library
from dha.properties import bulk

# NIST ThermoML densities, copied into tests/data/ (source and licence in tests/data/PROVENANCE.md)
DENSITY_DATA = Path(__file__).resolve().parent / "data" / "density" / "binary_mixtures_density_hmix.csv"


@pytest.fixture(scope="module")
def lib():
    return load_library()


def composition(lib, mass_pct: dict[str, float], unidentified: tuple = ()) -> pd.DataFrame:
    names = list(mass_pct)
    comps = lib.components.loc[names]
    m = np.array(list(mass_pct.values()), float)
    group = ["unidentified" if n in unidentified else g for n, g in zip(names, comps["group"])]
    return pd.DataFrame({"name": names, "model_component": names, "group": group,
                         "carbon_number": comps["carbon_number"].to_numpy(),
                         "mass_pct": m / m.sum() * 100})


def _chemicals_heats_mj_kg(cas: str) -> tuple[float, float]:
    """Gross and net heat of combustion of the liquid at 25 °C from chemicals' Hfl."""
    from chemicals import MW
    from chemicals.combustion import HHV_stoichiometry, LHV_from_HHV, combustion_stoichiometry
    from chemicals.elements import simple_formula_parser
    from chemicals.identifiers import search_chemical
    from chemicals.reaction import Hfl

    formula = search_chemical(cas).formula
    st = combustion_stoichiometry(simple_formula_parser(formula))
    hhv = HHV_stoichiometry(st, Hfl(cas))
    lhv = LHV_from_HHV(hhv, st["H2O"])
    return -hhv / MW(cas) / 1e3, -lhv / MW(cas) / 1e3


def test_volume_additivity_against_measured_binaries():
    # Reference: measured densities of binary mixtures at 298.15 K with the pure-liquid
    # densities from the same file (NIST ThermoML; DOIs 10.1021/je2011314, 10.1021/je050367p
    # and others in the file's reference_doi column). Molar masses from chemicals 1.5.2.
    # This recomputes the basis of bulk.U_DENSITY_REL (RMS 0.40 %, max 0.65 %).
    from chemicals import MW

    data = pd.read_csv(DENSITY_DATA)
    dens = data[data["property"] == "density"]
    pure = dens[dens["fraction"] == 1.0].set_index("cas")["value"]
    devs = []
    for _, g in dens[dens["fraction"] < 1.0].groupby("mixture_id"):
        if len(g) != 2 or (g["T_K"] != 298.15).any() or not g["cas"].isin(pure.index).all():
            continue
        x = g["fraction"].to_numpy()
        m = np.array([MW(c) for c in g["cas"]])
        w = x * m / np.sum(x * m)
        calc = bulk.density_volume_additive(w, pure.loc[g["cas"]].to_numpy())
        devs.append(calc / g["value"].iloc[0] - 1)
    devs = np.array(devs)
    assert len(devs) >= 6
    assert np.max(np.abs(devs)) < 0.007
    assert np.sqrt(np.mean(devs ** 2)) <= bulk.U_DENSITY_REL * 1.05


@pytest.mark.parametrize("name", ["n-heptane", "2,2,4-trimethylpentane", "toluene", "benzene",
                                  "ethanol", "methanol", "2-methoxy-2-methylpropane"])
def test_pure_component_heats_match_chemicals(lib, name):
    # Reference: chemicals 1.5.2 — Hfl (liquid ΔfH) + combustion_stoichiometry +
    # HHV_stoichiometry / LHV_from_HHV; per kg with chemicals' MW. Tolerance 0.3 %.
    gross_ref, net_ref = _chemicals_heats_mj_kg(lib.components.loc[name, "cas"])
    res = bulk.compute(composition(lib, {name: 100.0}), lib, {})
    assert res.values["net_heat_mj_kg"] == pytest.approx(net_ref, rel=0.003)
    assert res.details["gross_heat_mj_kg"] == pytest.approx(gross_ref, rel=0.003)


def test_pure_component_elements_and_molar_mass(lib):
    # Reference: chemicals 1.5.2 mass_fractions and MW of 2,2,4-trimethylpentane (C8H18);
    # H/C = 18/8 from the formula. chemicals uses slightly different atomic weights: 0.05 %.
    from chemicals import MW
    from chemicals.elements import mass_fractions, simple_formula_parser

    res = bulk.compute(composition(lib, {"2,2,4-trimethylpentane": 100.0}), lib, {})
    frac = mass_fractions(simple_formula_parser("C8H18"))
    assert res.details["carbon_mass_pct"] == pytest.approx(100 * frac["C"], rel=5e-4)
    assert res.details["hydrogen_mass_pct"] == pytest.approx(100 * frac["H"], rel=5e-4)
    assert res.values["h_to_c_molar"] == pytest.approx(18 / 8)
    assert res.values["mean_molar_mass_g_mol"] == pytest.approx(MW("540-84-1"), rel=5e-4)
    assert res.values["density_kg_m3"] == pytest.approx(
        lib.components.loc["2,2,4-trimethylpentane", "density_15c_kg_m3"])
    # CO2 per MJ: all carbon to CO2 (44.009/12.011), per net heat (chemicals reference).
    _, net_ref = _chemicals_heats_mj_kg("540-84-1")
    co2_ref = frac["C"] * 44.009 / 12.011 * 1000 / net_ref
    assert res.details["co2_g_per_mj"] == pytest.approx(co2_ref, rel=0.004)


def test_mixing_rules(lib):
    # 50/50 by mass n-heptane + toluene: heats mass-weighted, molar mass harmonic, density by
    # volume additivity (definitions, common trade practice); values from chemicals 1.5.2.
    from chemicals import MW

    res = bulk.compute(composition(lib, {"n-heptane": 50.0, "toluene": 50.0}), lib, {})
    net = [_chemicals_heats_mj_kg(c)[1] for c in ("142-82-5", "108-88-3")]
    assert res.values["net_heat_mj_kg"] == pytest.approx(np.mean(net), rel=0.003)
    m_ref = 1 / (0.5 / MW("142-82-5") + 0.5 / MW("108-88-3"))
    assert res.values["mean_molar_mass_g_mol"] == pytest.approx(m_ref, rel=5e-4)
    rho = lib.components.loc[["n-heptane", "toluene"], "density_15c_kg_m3"].to_numpy()
    assert res.values["density_kg_m3"] == pytest.approx(1 / (0.5 / rho[0] + 0.5 / rho[1]))
    # H/C molar: (0.5·16/100.2 + 0.5·8/92.14) / (0.5·7/100.2 + 0.5·7/92.14)
    hc = (16 / MW("142-82-5") + 8 / MW("108-88-3")) / (7 / MW("142-82-5") + 7 / MW("108-88-3"))
    assert res.values["h_to_c_molar"] == pytest.approx(hc, rel=1e-4)
    for key in ("density_kg_m3", "net_heat_mj_kg"):
        assert res.uncertainty[key] > 0


def test_oxygenate_blend_has_oxygen_and_lower_heat(lib):
    # Ethanol (C2H6O) carries 34.7 % m/m oxygen (15.999/46.069) and a net heat of about
    # 26.8 MJ/kg (chemicals 1.5.2): an E10 blend has ~3.5 % m/m O and a lower heat.
    base = {"2,2,4-trimethylpentane": 50.0, "toluene": 50.0}
    e = dict(base, ethanol=10.0)
    r0 = bulk.compute(composition(lib, base), lib, {})
    r1 = bulk.compute(composition(lib, e), lib, {})
    assert r1.details["oxygen_mass_pct"] == pytest.approx(10 / 110 * 100 * 15.999 / 46.069,
                                                          rel=1e-3)
    assert r1.values["net_heat_mj_kg"] < r0.values["net_heat_mj_kg"]


def test_unidentified_rows_widen_the_uncertainty(lib):
    known = composition(lib, {"n-heptane": 80.0, "2-methylhexane": 20.0})
    unknown = composition(lib, {"n-heptane": 80.0, "2-methylhexane": 20.0},
                          unidentified=("2-methylhexane",))
    a = bulk.compute(known, lib, {})
    b = bulk.compute(unknown, lib, {})
    assert b.values == a.values
    for key in ("density_kg_m3", "net_heat_mj_kg", "mean_molar_mass_g_mol"):
        assert b.uncertainty[key] >= a.uncertainty[key]
    assert b.uncertainty["density_kg_m3"] > a.uncertainty["density_kg_m3"]
    assert b.uncertainty["h_to_c_molar"] > 0


def test_missing_heat_is_reported_not_invented(lib):
    comps = lib.components.copy()
    comps.loc["toluene", ["gross_heat_mj_kg", "net_heat_mj_kg"]] = np.nan
    holed = dataclasses.replace(lib, components=comps)
    res = bulk.compute(composition(holed, {"n-heptane": 50.0, "toluene": 50.0}), holed, {})
    assert res.values["net_heat_mj_kg"] is None
    assert any("toluene" in w for w in res.warnings)
    assert res.values["density_kg_m3"] > 0


def test_bad_input_raises_library_error(lib):
    comp = composition(lib, {"n-heptane": 100.0}).assign(model_component="no-such-thing")
    with pytest.raises(LibraryError, match="no-such-thing"):
        bulk.compute(comp, lib, {})
    with pytest.raises(LibraryError, match="formula"):
        bulk.formula_atoms("c7h16")
