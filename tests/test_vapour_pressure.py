"""Tests of dha.vapour_pressure and of the shipped vapour-pressure table.

Reference values come from outside the project: the `chemicals` package's own implementation of
each equation (chemicals 1.5.2, MIT) and CoolProp reference equations of state (CoolProp 8.0.0).
"""
from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from dha.errors import LibraryError
from dha.vapour_pressure import EQUATIONS, psat_kpa

T_RVP_K = 310.92777777777775  # 37.8 °C
LIB = Path(__file__).resolve().parents[1] / "component_library" / "vapour_pressure.csv"


def test_antoine_matches_chemicals():
    # chemicals.vapor_pressure.Antoine with Poling et al. 5th ed. toluene constants (log10, Pa);
    # our form is in kPa, so a = A - 3.
    from chemicals.vapor_pressure import Antoine
    A, B, C = 9.07954, 1344.8, -53.67
    row = pd.DataFrame({"equation": ["antoine"], "a": [A - 3.0], "b": [B], "c": [C]})
    for t in (290.0, T_RVP_K, 360.0):
        assert psat_kpa(row, t)[0] == pytest.approx(Antoine(t, A, B, C) / 1e3, rel=1e-12)


def test_dippr101_matches_chemicals():
    # chemicals.dippr.EQ101 with the Perry's 8th ed. Table 2-8 coefficients of 2,2,4-trimethylpentane
    from chemicals.dippr import EQ101
    c = (84.912, -6722.2, -9.5157, 7e-6, 2.0)
    row = pd.DataFrame({"equation": ["dippr101"], "a": [c[0]], "b": [c[1]], "c": [c[2]], "d": [c[3]],
                        "e": [c[4]]})
    for t in (280.0, T_RVP_K, 380.0):
        assert psat_kpa(row, t)[0] == pytest.approx(EQ101(t, *c) / 1e3, rel=1e-12)


def test_wagner25_matches_chemicals():
    # chemicals.vapor_pressure.Wagner (2.5-5 form) with its own Poling table row for n-hexane
    from chemicals.vapor_pressure import Wagner, Psat_data_WagnerPoling as W
    r = W.loc["110-54-3"]
    row = pd.DataFrame({"equation": ["wagner25"], "a": [r.A], "b": [r.B], "c": [r.C], "d": [r.D],
                        "tc_k": [r.Tc], "pc_kpa": [r.Pc / 1e3]})
    for t in (260.0, T_RVP_K, 400.0):
        assert psat_kpa(row, t)[0] == pytest.approx(Wagner(t, r.Tc, r.Pc, r.A, r.B, r.C, r.D) / 1e3,
                                                    rel=1e-12)


def test_vectorised_per_row_temperatures_and_mixed_forms():
    tab = pd.DataFrame({
        "name": ["x", "y"], "equation": ["antoine", "dippr101"],
        "a": [6.07954, 84.912], "b": [1344.8, -6722.2], "c": [-53.67, -9.5157],
        "d": [np.nan, 7e-6], "e": [np.nan, 2.0], "tc_k": [np.nan, np.nan], "pc_kpa": [np.nan, np.nan]})
    both = psat_kpa(tab, np.array([300.0, 320.0]))
    assert both[0] == pytest.approx(psat_kpa(tab.iloc[[0]], 300.0)[0])
    assert both[1] == pytest.approx(psat_kpa(tab.iloc[[1]], 320.0)[0])
    assert set(EQUATIONS) == {"antoine", "dippr101", "wagner25"}


def test_unknown_equation_is_a_library_error():
    tab = pd.DataFrame({"name": ["x"], "equation": ["clapeyron"], "a": [1.0], "b": [1.0], "c": [1.0]})
    with pytest.raises(LibraryError, match="unknown equation"):
        psat_kpa(tab, 300.0)


@pytest.fixture(scope="module")
def shipped() -> pd.DataFrame:
    return pd.read_csv(LIB)


def test_shipped_rows_valid_at_37_8_c(shipped):
    # README contract: the validity range contains 310.93 K; every value finite and positive
    assert ((shipped["tmin_k"] <= T_RVP_K) & (shipped["tmax_k"] >= T_RVP_K)).all()
    p = psat_kpa(shipped, T_RVP_K)
    assert np.all(np.isfinite(p)) and np.all(p > 0)


@pytest.mark.parametrize("name, fluid", [
    ("n-pentane", "n-Pentane"), ("2-methylbutane", "Isopentane"), ("n-hexane", "n-Hexane"),
    ("benzene", "Benzene"), ("toluene", "Toluene"), ("cyclohexane", "Cyclohexane"),
    ("ethanol", "Ethanol"), ("1,3-dimethylbenzene", "m-Xylene"), ("n-butane", "n-Butane"),
])
def test_shipped_against_coolprop(shipped, name, fluid):
    # CoolProp 8.0.0 reference equations of state, saturation pressure at 37.8 °C; within 1 %
    CP = pytest.importorskip("CoolProp.CoolProp")
    ref_kpa = CP.PropsSI("P", "T", T_RVP_K, "Q", 0, fluid) / 1e3
    row = shipped[shipped["name"] == name]
    assert len(row) == 1
    assert psat_kpa(row, T_RVP_K)[0] == pytest.approx(ref_kpa, rel=0.01)


def test_shipped_rows_consistent_with_normal_boiling_point(shipped):
    # The boiling points in components.csv come from other tables (CRC Handbook, NIST WebBook,
    # CAS Common Chemistry via chemicals 1.5.2) than most correlations (Landolt-Börnstein, VDI,
    # Perry's, Poling): each correlation must give 101.325 kPa there within 5 % (about 1.3 K),
    # wherever Tb lies within 30 K of the correlation's range (a narrow-range Antoine fitted near
    # 37.8 °C is not meant to reach a boiling point 80 K away).
    comp = pd.read_csv(LIB.parent / "components.csv").set_index("name")
    tb_k = shipped["name"].map(comp["boiling_point_c"]).to_numpy() + 273.15
    near = (tb_k >= shipped["tmin_k"] - 30) & (tb_k <= shipped["tmax_k"] + 30)
    assert near.sum() > 0.95 * len(shipped)
    p = psat_kpa(shipped, tb_k)
    bad = shipped["name"][near & (np.abs(p / 101.325 - 1) > 0.05)].tolist()
    assert bad == []
