"""Original UNIFAC (dha.properties.unifac) against thermo's implementation.

Reference: thermo 0.6.1, ``thermo.unifac.UNIFAC.from_subgroups(..., version=0,
interaction_data=UFIP, subgroups=UFSG)`` (Bell, MIT licence), an independent implementation of
Fredenslund et al. (1975) with the same published parameter table.
"""
from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from dha.errors import LibraryError
from dha.properties.unifac import build_model, load_parameters, parse_groups

# Original-UNIFAC subgroup counts (DDBST assignments, as in thermo's group table).
GROUPS = {
    "n-pentane": {1: 2, 2: 3},
    "2,2,4-trimethylpentane": {1: 5, 2: 1, 3: 1, 4: 1},
    "toluene": {9: 5, 11: 1},
    "1-hexene": {1: 1, 2: 3, 5: 1},
    "2-methyl-2-butene": {1: 3, 8: 1},
    "ethanol": {1: 1, 2: 1, 14: 1},
    "methanol": {15: 1},
    "mtbe": {1: 3, 4: 1, 24: 1},
    "tert-butanol": {1: 3, 4: 1, 14: 1},
    "ethylbenzene": {9: 5, 12: 1, 1: 1},
}

MIXTURES = [
    (["n-pentane", "ethanol"], [0.9, 0.1]),
    (["2,2,4-trimethylpentane", "toluene", "ethanol"], [0.45, 0.45, 0.10]),
    (["n-pentane", "1-hexene", "2-methyl-2-butene", "toluene", "ethylbenzene", "ethanol"],
     [0.2, 0.15, 0.1, 0.3, 0.1, 0.15]),
    (["2,2,4-trimethylpentane", "mtbe", "methanol", "tert-butanol"], [0.6, 0.2, 0.1, 0.1]),
    (list(GROUPS), [0.1] * 10),
]


def _thermo_gammas(names, x, t_k):
    from thermo.unifac import UFIP, UFSG, UNIFAC

    model = UNIFAC.from_subgroups(chemgroups=[GROUPS[n] for n in names], T=t_k, xs=list(x),
                                  version=0, interaction_data=UFIP, subgroups=UFSG)
    return np.array(model.gammas())


@pytest.mark.parametrize("names, x", MIXTURES)
@pytest.mark.parametrize("t_k", [290.0, 310.93, 373.15, 450.0])
def test_gammas_match_thermo(names, x, t_k):
    # Reference: thermo 0.6.1 UNIFAC (original, version 0); tolerance 1e-6 relative (issue 7).
    model = build_model([GROUPS[n] for n in names])
    ours = model.gamma(np.array(x), t_k)
    ref = _thermo_gammas(names, x, t_k)
    np.testing.assert_allclose(ours, ref, rtol=1e-6)


def test_batch_evaluation_matches_single_rows():
    # Many compositions and temperatures at once give the same numbers as one at a time,
    # and each row matches thermo 0.6.1.
    names = MIXTURES[2][0]
    model = build_model([GROUPS[n] for n in names])
    rng = np.random.default_rng(7)
    xs = rng.dirichlet(np.ones(len(names)), size=5)
    ts = np.array([300.0, 310.0, 320.0, 330.0, 340.0])
    batch = model.gamma(xs, ts)
    for row, t in zip(range(5), ts):
        np.testing.assert_allclose(batch[row], model.gamma(xs[row], t), rtol=1e-13)
        np.testing.assert_allclose(batch[row], _thermo_gammas(names, xs[row], t), rtol=1e-6)


def test_infinite_dilution_is_finite_and_matches_thermo():
    # x_ethanol -> 0: the form used for the combinatorial part stays finite; thermo 0.6.1
    # evaluated at x = 1e-12 is the reference.
    names = ["n-pentane", "ethanol"]
    model = build_model([GROUPS[n] for n in names])
    at_zero = model.gamma(np.array([1.0, 0.0]), 310.93)
    ref = _thermo_gammas(names, [1.0 - 1e-12, 1e-12], 310.93)
    assert np.all(np.isfinite(at_zero))
    np.testing.assert_allclose(at_zero, ref, rtol=1e-6)
    # Ethanol at infinite dilution in pentane is strongly non-ideal (gamma >> 1): original
    # UNIFAC gives about 25 at 37.8 °C (thermo reference above); a pure liquid has gamma = 1.
    assert at_zero[1] > 20.0
    assert model.gamma(np.array([1.0, 0.0]), 310.93)[0] == pytest.approx(1.0, abs=1e-12)


def test_parameter_tables_match_thermo():
    # The shipped CSVs are a faithful copy of thermo 0.6.1's UFSG and UFIP tables.
    from thermo.unifac import UFIP, UFSG

    params = load_parameters()
    assert len(params.subgroups) == len(UFSG)
    for sid, g in UFSG.items():
        row = params.subgroups.loc[sid]
        assert (row["main_group"], row["r"], row["q"]) == (g.main_group_id, g.R, g.Q)
    expected = {(i, j): a for i, inner in UFIP.items() for j, a in inner.items()}
    assert params.interactions == expected
    # Every main-group pair among paraffins/olefins/aromatics/alcohols/ethers/methanol is
    # present (main groups 1 CH2, 2 C=C, 3 ACH, 4 ACCH2, 5 OH, 6 CH3OH, 13 CH2O).
    mains = [1, 2, 3, 4, 5, 6, 13]
    missing = [(i, j) for i in mains for j in mains if i != j and (i, j) not in expected]
    assert missing == []


def test_library_groups_build_a_model():
    # Every component of the shipped library with groups (all but a handful, e.g. methane,
    # which original UNIFAC has no group for) has groups the parameter tables know.
    from dha.library import load_library

    lib = load_library()
    groups = lib.unifac_groups
    names = sorted(n for n, g in groups.items() if g)
    assert len(names) >= 0.98 * len(groups)
    model = build_model([groups[n] for n in names], names=names)
    x = np.full(len(names), 1.0 / len(names))
    gamma = model.gamma(x, 310.93)
    assert np.all(np.isfinite(gamma)) and np.all(gamma > 0)
    assert model.missing_pairs == ()


def test_bad_groups_are_library_errors():
    with pytest.raises(LibraryError, match="unknown subgroup"):
        build_model([{1: 2}, {999: 1}], names=["a", "b"])
    with pytest.raises(LibraryError, match="no UNIFAC groups"):
        build_model([{1: 2}, {}], names=["a", "b"])
    with pytest.raises(LibraryError, match="cannot read"):
        parse_groups("1:2 x")
    assert parse_groups("1:2 2:4 1:1") == {1: 3, 2: 4}
    assert isinstance(load_parameters().subgroups, pd.DataFrame)


def test_one_composition_at_many_temperatures_matches_thermo():
    # Reference: thermo 0.6.1 UNIFAC (original, version 0), tolerance 1e-6 relative as above.
    # The mixture holds two isomers with the same groups (2- and 3-methylpentane share their
    # pure-component residual term, computed once) and ethanol; at_composition (the
    # distillation's per-liquid path) must equal ln_gamma and thermo at every temperature.
    groups = dict(GROUPS, **{"2-methylpentane": {1: 3, 2: 2, 3: 1},
                             "3-methylpentane": {1: 3, 2: 2, 3: 1}})
    names = ["2-methylpentane", "3-methylpentane", "toluene", "ethanol", "n-pentane"]
    x = np.array([0.3, 0.2, 0.25, 0.15, 0.1])
    model = build_model([groups[n] for n in names])
    at = model.at_composition(x)
    for t_k in (300.0, 337.5, 371.0, 300.0):
        np.testing.assert_allclose(at(t_k), model.ln_gamma(x, t_k), rtol=0, atol=1e-12)
        from thermo.unifac import UFIP, UFSG, UNIFAC
        ref = UNIFAC.from_subgroups(chemgroups=[groups[n] for n in names], T=t_k, xs=list(x),
                                    version=0, interaction_data=UFIP, subgroups=UFSG).gammas()
        np.testing.assert_allclose(np.exp(at(t_k)), ref, rtol=1e-6)
