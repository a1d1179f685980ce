"""Process levers (dha/levers.py): equilibrium against published thermochemistry, direction of
every lever, balances, and the oxygenate solver against the models it solves.

Sources beside each check. The test composition is invented (a light-naphtha-rich petrol,
% v/v), resolved through the library like any composition input.
"""
from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from dha import levers, specs
from dha.quantify import quantify_composition

R = 8.314462618  # J/mol/K, CODATA 2018
T150 = 423.15

BASE = {"n-butane": 3.0, "2-methylbutane": 8.0, "n-pentane": 8.0, "n-hexane": 7.0,
        "2-methylpentane": 6.0, "benzene": 2.0, "cyclohexane": 2.0, "methylcyclopentane": 3.0,
        "n-heptane": 6.0, "methylcyclohexane": 4.0, "toluene": 15.0,
        "2,2,4-trimethylpentane": 16.0, "1,2-dimethylbenzene": 8.0, "n-octane": 3.0,
        "n-decane": 3.0, "1-hexene": 6.0}


@pytest.fixture(scope="module")
def table(library, settings):
    comp = pd.DataFrame({"row": range(1, len(BASE) + 1), "component": list(BASE),
                         "amount": list(BASE.values())})
    return quantify_composition(comp, "vol_pct", library, settings).table


@pytest.fixture(scope="module")
def profile():
    return specs.load_profile("en228-e10-summer")


@pytest.fixture(scope="module")
def base(table, library, settings, profile):
    return levers.evaluate(table, library, settings, profile)


def _independent_shares(cas_list, t_k, h_method="YAWS", s_method="YAWS"):
    """Equilibrium mole fractions from chemicals' published H_f and S (gas, 298 K) and thermo's
    own ideal-gas heat capacity (its default method): a code path and Cp independent of
    dha/levers_data."""
    reaction = pytest.importorskip("chemicals.reaction")
    thermo = pytest.importorskip("thermo")
    g = []
    for cas in cas_list:
        cp = thermo.HeatCapacityGas(CASRN=cas)
        h = reaction.Hfg(cas, method=h_method)
        s = reaction.S0g(cas, method=s_method if s_method in reaction.S0g_methods(cas)
                         else "YAWS")
        g.append(h + cp.T_dependent_property_integral(298.15, t_k)
                 - t_k * (s + cp.T_dependent_property_integral_over_T(298.15, t_k)))
    g = np.array(g)
    w = np.exp(-(g - g.min()) / (R * t_k))
    return w / w.sum()


C6 = {"n-hexane": "110-54-3", "2-methylpentane": "107-83-5", "3-methylpentane": "96-14-0",
      "2,2-dimethylbutane": "75-83-2", "2,3-dimethylbutane": "79-29-8"}


def test_c5_equilibrium_isopentane_share_at_150c():
    # Published Gibbs data: Yaws (2014) H_f and S of the ideal gas as tabulated in chemicals
    # 1.5.2, integrated with thermo 0.6.1's HeatCapacityGas (not the TRC equation we ship):
    shares = levers.equilibrium_shares(5, 150.0)
    ref = _independent_shares(["109-66-0", "78-78-4"], T150)
    assert shares["2-methylbutane"] == pytest.approx(ref[1], abs=0.005)
    # Other compilations (NIST WebBook H_f and S where it has them, else Yaws S; API TDB
    # (Albahri) H_f) spread by about 0.03: the data's own uncertainty.
    for h in ("WEBBOOK", "API_TDB_G"):
        alt = _independent_shares(["109-66-0", "78-78-4"], T150, h, "WEBBOOK")
        assert shares["2-methylbutane"] == pytest.approx(alt[1], abs=0.04)
    # from memory: isomerisation charts give ~75-80 % isopentane (neopentane excluded) near
    # 150 °C, falling with temperature
    assert 0.74 < shares["2-methylbutane"] < 0.84
    assert levers.equilibrium_shares(5, 250.0)["2-methylbutane"] < shares["2-methylbutane"]


def test_c6_equilibrium_isomer_shares_at_150c():
    shares = levers.equilibrium_shares(6, 150.0)
    ref = _independent_shares(list(C6.values()), T150)
    for (name, _), r in zip(C6.items(), ref):
        assert shares[name] == pytest.approx(r, abs=0.005), name
    # 2,2-dimethylbutane gains at low temperature (exothermic, from memory: the reason
    # isomerisation units run cold)
    assert levers.equilibrium_shares(6, 120.0)["2,2-dimethylbutane"] > shares["2,2-dimethylbutane"]


def test_isomerisation_raises_ron_and_closes(table, library, settings, base, profile):
    out = levers.isomerise(table, library, settings, 150.0, 1.0)
    assert out.balance["closes"] and out.hydrogen_g == 0.0
    after = levers.evaluate(out.table, library, settings, profile)
    # DOMAIN trend (common practice, no source): branching raises octane
    assert after["properties"]["ron"] > base["properties"]["ron"] + 0.5
    # moles of C5 alkanes conserved, now at equilibrium
    c5 = out.table[out.table["component"].isin(["n-pentane", "2-methylbutane"])]
    share = c5.set_index("component")["mol_pct"]
    assert share["2-methylbutane"] / share.sum() == pytest.approx(
        levers.equilibrium_shares(5, 150.0)["2-methylbutane"], abs=1e-9)
    half = levers.isomerise(table, library, settings, 150.0, 0.5)
    assert half.table.set_index("component").at["n-pentane", "mass_pct"] > \
        out.table.set_index("component").at["n-pentane", "mass_pct"]


def test_benzene_saturation(table, library, settings, base, profile):
    out = levers.saturate_benzene(table, library, settings)
    after = levers.evaluate(out.table, library, settings, profile)
    assert after["benzene"]["vol_pct"] == 0.0
    # benzene (MON 115, Kuzhagaliyeva 2022) becomes cyclohexane (RON 83): RON a little lower
    assert -1.5 < after["properties"]["ron"] - base["properties"]["ron"] < 0
    # C6H6 + 3 H2 -> C6H12: hydrogen used = 3 mol per mol benzene (stoichiometry)
    benz = table.set_index("component").loc["benzene"]
    mol_b = benz["mass_pct"] / benz["molar_mass_g_mol"]
    assert out.hydrogen_g == pytest.approx(-3 * mol_b * 2.016, rel=1e-9)
    assert out.balance["closes"]
    assert out.product_g == pytest.approx(100.0 - out.hydrogen_g, rel=1e-12)


def test_reforming_raises_ron_and_aromatics_and_makes_hydrogen(table, library, settings, base,
                                                                 profile):
    out = levers.reform(table, library, settings, 0.8)
    after = levers.evaluate(out.table, library, settings, profile)
    assert after["properties"]["ron"] > base["properties"]["ron"] + 1.0
    assert after["totals"]["vol_pct"]["aromatics"] > base["totals"]["vol_pct"]["aromatics"] + 5
    assert out.hydrogen_g > 0 and out.balance["closes"]
    # n-heptane C7H16 -> toluene C7H8 + 4 H2; methylcyclohexane C7H14 -> toluene + 3 H2
    # (stoichiometry): the hydrogen made equals the atoms' count
    t = table.set_index("component")
    h2 = 0.0
    for name, n_h2 in (("n-hexane", 4), ("n-heptane", 4), ("n-octane", 4), ("cyclohexane", 3),
                       ("methylcyclopentane", 3), ("methylcyclohexane", 3)):
        h2 += 0.8 * t.at[name, "mass_pct"] / t.at[name, "molar_mass_g_mol"] * n_h2 * 2.016
    assert out.hydrogen_g == pytest.approx(h2, rel=1e-9)


def test_light_cut_lowers_dvpe_heavy_cut_balance(table, library, settings, base, profile):
    light = levers.remove_cut(table, library, settings, "light")
    after = levers.evaluate(light.table, library, settings, profile)
    # common practice, no source: butanes and pentanes carry the vapour pressure
    assert after["properties"]["dvpe_kpa"] < base["properties"]["dvpe_kpa"] - 10
    assert light.balance["closes"]
    assert (light.table["carbon_number"] > 5).all()
    heavy = levers.remove_cut(table, library, settings, "heavy")
    assert heavy.balance["closes"] and (heavy.table["carbon_number"] < 10).all()
    assert heavy.removed_g["heavy cut"] == pytest.approx(
        table.loc[table["carbon_number"] >= 10, "mass_pct"].sum(), rel=1e-12)


def test_ethanol_raises_ron_and_dvpe_up_to_about_e10(table, library, settings, base, profile):
    e10 = levers.add_oxygenate(table, library, settings, "ethanol", 10.0)
    assert e10.balance["closes"]
    after = levers.evaluate(e10.table, library, settings, profile)
    eth = after["oxygenates"][0]
    assert eth["name"] == "ethanol" and eth["vol_pct"] == pytest.approx(10.0, abs=1e-9)
    assert after["properties"]["ron"] > base["properties"]["ron"] + 2
    assert after["properties"]["dvpe_kpa"] > base["properties"]["dvpe_kpa"] + 2
    # The DVPE rise of ethanol peaks at a few % v/v and flattens or falls beyond ~E10
    # (Anderson et al., Fuel 97 (2012) review of ethanol-gasoline vapour pressure, from memory)
    rng = levers.oxygenate_range(table, library, settings, "ethanol", profile, target_ron=None)
    curve = pd.DataFrame(rng["curve"])
    peak = curve.loc[curve["dvpe_kpa"].idxmax(), "vol_pct"]
    assert 2.0 <= peak <= 15.0
    assert curve["dvpe_kpa"].iloc[-1] < curve["dvpe_kpa"].max()
    # the solver's fast path is the same model as the full evaluation at 10 % v/v
    row = curve.set_index("vol_pct").loc[10.0]
    assert row["dvpe_kpa"] == pytest.approx(after["properties"]["dvpe_kpa"], abs=1e-6)
    assert row["ron"] == pytest.approx(after["properties"]["ron"], abs=1e-6)


def test_oxygenate_solver_shares(table, library, settings, base, profile):
    target = round(base["properties"]["ron"] + 2.0, 1)
    rng = levers.oxygenate_range(table, library, settings, "ethanol", profile,
                                 target_ron=target)
    s_min = rng["min_share_vol_pct"]
    assert 0 < s_min < 15
    at_min = levers.evaluate(levers.add_oxygenate(table, library, settings, "ethanol",
                                                  s_min).table, library, settings)
    assert at_min["properties"]["ron"] == pytest.approx(target, abs=0.01)
    s_max, binding = rng["max_share_vol_pct"], rng["binding_limit"]
    assert binding in levers.SHARE_LIMITS
    at_max = levers.evaluate(levers.add_oxygenate(table, library, settings, "ethanol",
                                                  s_max).table, library, settings, profile)
    limit = next(float(l["value"]) for l in profile["limits"]
                 if l["quantity"] == binding and l["kind"] == "max")
    value = specs.quantities(at_max, library)[binding][0]
    assert value == pytest.approx(limit, abs=0.01)


def test_run_levers_record(table, library, settings, base, profile):
    out = levers.run_levers(table, library, settings, profile,
                            which=("benzene saturation", "light cut"), base=base)
    assert [r["lever"] for r in out["levers"]] == ["benzene saturation", "light cut removed"]
    rec = out["levers"][0]
    deltas = {d["quantity"]: d for d in rec["deltas"]}
    assert deltas["benzene_vol_pct"]["after"] == 0.0
    assert deltas["benzene_vol_pct"]["max"] == 1.0          # EN 228 benzene max 1.0 % v/v
    assert set(deltas) == set(levers.COMPARED)
    assert rec["balance"]["closes"] and rec["hydrogen_g_per_100g"] < 0


def test_cli_levers_and_explain_json_and_tables():
    import json
    from pathlib import Path

    from click.testing import CliRunner

    from dha.cli import cli
    recipe = Path(__file__).resolve().parents[1] / "dha" / "example_runs" / "hp-blend-recipe.csv"
    runner = CliRunner()
    r = runner.invoke(cli, ["levers", str(recipe), "--lever", "benzene-saturation",
                            "--json", "-"])
    assert r.exit_code == 0, r.output
    data = json.loads(r.output)
    assert data["levers"][0]["lever"] == "benzene saturation"
    assert data["levers"][0]["balance"]["closes"]
    r = runner.invoke(cli, ["levers", str(recipe), "--lever", "light-cut"])
    assert r.exit_code == 0 and "dvpe_kpa" in r.output and "closes" in r.output
    r = runner.invoke(cli, ["explain", str(recipe), "--json", "-"])
    assert r.exit_code == 0, r.output
    data = json.loads(r.output)
    assert sum(c["ron"] for c in data["octane_contributions"]) == pytest.approx(
        data["properties"]["ron"], abs=0.01)
    r = runner.invoke(cli, ["explain", str(recipe)])
    assert r.exit_code == 0 and "n-heptane" in r.output
    # the lowest carbon-number bucket (C1-C3, ethanol's) is labelled as in the reports
    buckets = {c["carbon_number"] for c in data["octane_contributions"]}
    assert "C5" in r.output and ("≤C3" in r.output) == (3 in buckets)
    # bad input: one line, exit 1
    r = runner.invoke(cli, ["levers", "no-such-file.csv"])
    assert r.exit_code == 1 and "not found" in r.output
