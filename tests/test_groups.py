"""Group totals, carbon-number matrix, aromatics detail and oxygen content."""
from __future__ import annotations

import pandas as pd
import pytest

from dha.groups import BUCKETS, group_totals
from dha.quantify import GROUPS, quantify_composition, quantify_peaks
from dha.settings import default_settings
from test_quantify import peak_table, tiny_library

# IUPAC standard atomic weights (abridged, IUPAC 2013): O 15.999, C 12.011, H 1.008
O, C, H = 15.999, 12.011, 1.008


def _comp(amounts: dict, basis="mass_pct", settings=None):
    table = pd.DataFrame({"row": range(1, len(amounts) + 1), "component": list(amounts),
                          "amount": list(amounts.values())})
    return quantify_composition(table, basis, tiny_library(), settings or default_settings()).table


def test_one_component_per_group_exact():
    # invented blend, one component per group, by mass: totals must reproduce the input
    amounts = {"n-heptane": 10.0, "2,2,4-trimethylpentane": 30.0, "1-butene": 5.0,
               "cyclohexane": 15.0, "toluene": 35.0, "ethanol": 5.0}
    comp = _comp(amounts)
    g = group_totals(comp, tiny_library(), default_settings())
    expect = dict(zip(["n_paraffins", "isoparaffins", "olefins", "naphthenes", "aromatics",
                       "oxygenates"], amounts.values()))
    for group, value in expect.items():
        assert g["totals"]["mass_pct"][group] == pytest.approx(value, abs=1e-12)
    assert g["totals"]["mass_pct"]["unidentified"] == 0.0
    assert list(g["totals"]["vol_pct"]) == list(GROUPS)
    # volume totals: v_i = m_i/ρ_i normalised (common trade practice), by hand
    rho = tiny_library().components["density_15c_kg_m3"]
    v = {grp: amounts[name] / rho[name] for grp, name in zip(expect, amounts)}
    for grp in expect:
        assert g["totals"]["vol_pct"][grp] == pytest.approx(100 * v[grp] / sum(v.values()), rel=1e-12)
    for basis in ("mass_pct", "vol_pct", "mol_pct"):
        assert sum(g["totals"][basis].values()) == pytest.approx(100.0, abs=1e-9)


@pytest.mark.parametrize("name, pct, n_o, formula_mass", [
    # stoichiometry: O share = n_O·15.999/M, M from IUPAC weights (C2H6O, C5H12O)
    ("ethanol", 10.0, 1, 2 * C + 6 * H + O),
    ("2-methoxy-2-methylpropane", 15.0, 1, 5 * C + 12 * H + O),
])
def test_oxygen_content_from_stoichiometry(name, pct, n_o, formula_mass):
    comp = _comp({name: pct, "2,2,4-trimethylpentane": 100.0 - pct})
    g = group_totals(comp, tiny_library(), default_settings())
    assert g["oxygen_mass_pct"] == pytest.approx(pct * n_o * O / formula_mass, rel=1e-4)
    # E10 by mass: 10·15.999/46.069 = 3.473 % m/m (hand arithmetic)
    if name == "ethanol":
        assert g["oxygen_mass_pct"] == pytest.approx(3.473, abs=0.001)
    assert [o["name"] for o in g["oxygenates"]] == [name]


def test_carbon_number_matrix_buckets():
    comp = _comp({"methanol": 2.0, "n-butane": 8.0, "n-heptane": 40.0, "n-tridecane": 10.0,
                  "1,2,4-trimethylbenzene": 40.0})
    g = group_totals(comp, tiny_library(), default_settings())
    m = pd.DataFrame(g["by_carbon_number"])
    assert len(m) == len(BUCKETS) * len(GROUPS)
    assert m["mass_pct"].sum() == pytest.approx(100.0)
    cell = m.set_index(["carbon_number", "group"])["mass_pct"]
    assert cell[(3, "oxygenates")] == pytest.approx(2.0)      # C1 methanol in the lowest bucket
    assert cell[("13+", "n_paraffins")] == pytest.approx(10.0)
    assert cell[(9, "aromatics")] == pytest.approx(40.0)
    assert g["aromatics_detail"]["c9plus_aromatics"]["mass_pct"] == pytest.approx(40.0)


def test_aromatics_detail_and_benzene_volume():
    comp = _comp({"benzene": 1.0, "toluene": 20.0, "m-xylene": 10.0, "1,2,4-trimethylbenzene": 5.0,
                  "n-heptane": 64.0}, basis="vol_pct")
    g = group_totals(comp, tiny_library(), default_settings())
    assert g["benzene"]["vol_pct"] == pytest.approx(1.0)
    assert g["aromatics_detail"]["toluene"]["vol_pct"] == pytest.approx(20.0)
    assert g["aromatics_detail"]["c8_aromatics"]["vol_pct"] == pytest.approx(10.0)
    assert g["aromatics_detail"]["c9plus_aromatics"]["vol_pct"] == pytest.approx(5.0)
    assert g["totals"]["vol_pct"]["aromatics"] == pytest.approx(36.0)


def test_cyclic_olefins_inside_olefins_and_optional_key():
    s = default_settings()
    comp = _comp({"cyclopentene": 3.0, "1-butene": 7.0, "n-heptane": 90.0}, settings=s)
    g = group_totals(comp, tiny_library(), s)
    assert "cyclic_olefins" not in g and g["totals"]["mass_pct"]["olefins"] == pytest.approx(10.0)
    s["quantify"]["cyclic_olefins_separate"] = True
    g2 = group_totals(comp, tiny_library(), s)
    assert g2["cyclic_olefins"]["mass_pct"] == pytest.approx(3.0)
    assert g2["totals"] == g["totals"]


def test_unidentified_bucketed_by_carbon_number():
    lib, s = tiny_library(), default_settings()
    peaks = peak_table([(10.0, 1000.0, "n-heptane", 7, 700.0), (11.0, 250.0, None, None, 750.0)])
    q = quantify_peaks(peaks, lib, s)
    g = group_totals(q.table, lib, s)
    cell = pd.DataFrame(g["by_carbon_number"]).set_index(["carbon_number", "group"])["mass_pct"]
    assert cell[(8, "unidentified")] == pytest.approx(g["totals"]["mass_pct"]["unidentified"])
    assert g["totals"]["mass_pct"]["unidentified"] > 0
