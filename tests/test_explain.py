"""Octane contributions (dha/explain.py): exact sums and the definitions they rest on.

Sources: the sums are the attribution's defining property (issue 17: "sums equal
properties.ron / properties.mon", tolerance 0.01); the linear-by-volume case follows from
the model's definition RON = sum phi_i RON_i (octane.py docstring; ASTM D2699 PRF scale for
the reference fuels).
"""
from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from dha import explain
from dha.pipeline import process_file
from dha.settings import load_settings

EXAMPLES = Path(__file__).resolve().parents[1] / "dha" / "example_runs"  # shipped with the package


@pytest.fixture(scope="module")
def example_results(library):
    settings = load_settings()
    out = []
    for path in sorted(EXAMPLES.iterdir()):
        if path.suffix in (".csv", ".txt", ".xlsx"):
            out += [(path.name, r) for r in process_file(path, settings, library, spec="")]
    return out


def _table(vol_pct: dict[str, float], library) -> pd.DataFrame:
    names = list(vol_pct)
    comps = library.components.loc[names]
    return pd.DataFrame({"name": names, "component": names, "model_component": names,
                         "group": comps["group"].to_numpy(),
                         "carbon_number": comps["carbon_number"].astype(int).to_numpy(),
                         "vol_pct": list(vol_pct.values())})


def test_contributions_sum_to_ron_and_mon_for_every_example_run(example_results):
    # issue 17 / interfaces.md: sums equal properties.ron / .mon within 0.01
    assert len(example_results) >= 5
    for name, res in example_results:
        cells = res["octane_contributions"]
        assert cells, name
        for p in ("ron", "mon"):
            assert sum(c[p] for c in cells) == pytest.approx(res["properties"][p], abs=0.01), name
        # cells are group x carbon-number buckets of the result's matrix, with no repeats
        keys = [(c["group"], c["carbon_number"]) for c in cells]
        assert len(keys) == len(set(keys))
        expl = res["octane_explained"]
        assert 0 < len(expl["components"]) <= 10
        pulls = [c["ron"] for c in expl["components"]]
        assert pulls == sorted(pulls) and pulls[0] < 0
        # the classes' contributions add up to the number as well
        assert sum(c["ron_contribution"] for c in expl["classes"]) == pytest.approx(
            res["properties"]["ron"], abs=0.01)
        assert sum(c["vol_pct"] for c in expl["classes"]) == pytest.approx(100.0, abs=1e-6)


def test_low_octane_n_paraffins_pull_the_number_down(example_results):
    # DOMAIN trend (common practice, no source): n-heptane (RON 0 by the ASTM D2699 scale)
    # holds any petrol down; it must be among the components with a negative pull.
    for name, res in example_results:
        names = {c["name"] for c in res["octane_explained"]["components"]}
        if any(c["name"] == "n-heptane" and c["vol_pct"] > 0.5 for c in res["components"]):
            assert "n-heptane" in names, name


def test_linear_volume_model_gives_volume_times_neat_value(library):
    # model definition (octane.py): linear_volume RON = sum phi_i RON_i, so the blending
    # value of every component is its neat value and the contribution phi_i * RON_i.
    settings = load_settings()
    settings["octane"]["model"] = "linear_volume"
    vol = {"2,2,4-trimethylpentane": 55.0, "n-heptane": 15.0, "toluene": 30.0}
    table = _table(vol, library)
    out = explain.explain(table, library, settings)
    neat = library.components.loc[list(vol), "ron"].astype(float)
    by_cell = {(c["group"], c["carbon_number"]): c["ron"] for c in out["octane_contributions"]}
    assert by_cell[("isoparaffins", 8)] == pytest.approx(0.55 * neat["2,2,4-trimethylpentane"],
                                                         abs=1e-4)
    assert by_cell[("n_paraffins", 7)] == pytest.approx(0.15 * neat["n-heptane"], abs=1e-4)


def test_prf_contributions_of_interaction_model(library):
    # ASTM D2699: a PRF 90 (90 % v/v isooctane in n-heptane) has RON 90 exactly, and within
    # paraffins the default model is linear by volume: contributions 90 and 0.
    table = _table({"2,2,4-trimethylpentane": 90.0, "n-heptane": 10.0}, library)
    out = explain.explain(table, library, load_settings())
    by_cell = {c["group"]: c["ron"] for c in out["octane_contributions"]}
    assert by_cell["isoparaffins"] == pytest.approx(90.0, abs=1e-3)
    assert by_cell["n_paraffins"] == pytest.approx(0.0, abs=1e-3)


def test_sums_hold_with_a_lab_calibration(tmp_path, library, example_results):
    # A calibration applied after the model (slope kind: a + b * predicted) must still give
    # contributions that add up to the calibrated properties.ron/mon (issue 17).
    settings = load_settings()
    cal = {"format": "dha-octane-calibration/1", "model": settings["octane"]["model"],
           "kind": "slope", "date": "2026-12-01",
           "properties": {p: {"coefficients": {"bias": 5.0, "slope": 0.95}, "n": 6,
                              "rmse_fit": 0.3, "loo_rmse": 0.4, "loo_residuals": []}
                          for p in ("ron", "mon")}}
    path = tmp_path / "cal.json"
    path.write_text(json.dumps(cal), encoding="utf-8")
    settings["octane"]["calibration"] = str(path)
    src = EXAMPLES / "hp-blend-recipe.csv"
    res = process_file(src, settings, library, spec="")[0]
    plain = dict(example_results)["hp-blend-recipe.csv"]
    assert res["properties"]["ron"] == pytest.approx(5.0 + 0.95 * plain["properties"]["ron"],
                                                     abs=1e-6)
    for p in ("ron", "mon"):
        assert sum(c[p] for c in res["octane_contributions"]) == pytest.approx(
            res["properties"][p], abs=0.01)
    assert abs(res["octane_explained"]["residual"]["ron"]) < 1e-6


def test_null_octane_gives_empty_keys(library):
    out = explain.result_keys(pd.DataFrame(), library, load_settings(),
                              {"ron": None, "mon": None})
    assert out["octane_contributions"] == []
    assert out["octane_explained"]["components"] == []


def test_batched_and_per_row_model_calls_agree(library, monkeypatch):
    # the vectorised path must equal the interface predict_inputs row by row
    table = _table({"2,2,4-trimethylpentane": 40.0, "n-heptane": 10.0, "toluene": 30.0,
                    "ethanol": 10.0, "1-hexene": 10.0}, library)
    settings = load_settings()
    fast = explain.explain(table, library, settings)
    monkeypatch.setattr(explain, "BATCHED", False)
    slow = explain.explain(table, library, settings)
    a = np.array([c["ron"] for c in fast["octane_contributions"]])
    b = np.array([c["ron"] for c in slow["octane_contributions"]])
    assert np.allclose(a, b, atol=1e-9)


def test_rows_of_one_model_input_share_one_derivative(library, monkeypatch):
    # Definition (module notes): the blending values come from the derivative per row; rows
    # the model cannot tell apart (two unidentified C7 peaks standing in as 2-methylhexane,
    # a component split over two peaks) are one component for it. Taking the derivative once
    # per distinct model input must give the per-row numbers (to the difference step's noise).
    table = _table({"2,2,4-trimethylpentane": 40.0, "n-heptane": 10.0, "toluene": 25.0,
                    "ethanol": 10.0, "2-methylhexane": 5.0}, library)
    extra = table.iloc[[4, 4, 1]].assign(name="unidentified", component=None,
                                         group="unidentified", vol_pct=[4.0, 3.0, 3.0])
    extra["model_component"] = ["2-methylhexane", "2-methylhexane", "n-heptane"]
    table = pd.concat([table, extra], ignore_index=True)
    settings = load_settings()
    merged = explain.explain(table, library, settings)
    inputs = explain.octane.model_inputs(table, library.components)
    assert len(explain.merge_identical(inputs)[0]) < len(inputs)
    monkeypatch.setattr(explain, "merge_identical",
                        lambda inp: (inp, np.arange(len(inp))))
    per_row = explain.explain(table, library, settings)
    for key in ("ron", "mon"):
        a = np.array([c[key] for c in merged["octane_contributions"]])
        b = np.array([c[key] for c in per_row["octane_contributions"]])
        assert np.allclose(a, b, atol=1e-6)
        a = np.array([c[key] for c in merged["octane_explained"]["classes"]])
        b = np.array([c[key] for c in per_row["octane_explained"]["classes"]])
        assert np.allclose(a, b, atol=1e-6)


def test_group_calibration_of_the_perturbed_rows(library, tmp_path):
    # Definition (octane.apply_calibration, kind "groups"): the correction uses each row's
    # group volume fractions. The blocks' fractions, written from the unperturbed sample,
    # must equal those of the explicit perturbed matrix, and the contributions must add up to
    # the calibrated RON/MON (issue 17).
    settings = load_settings()
    coef = {"bias": 1.0, "aromatics": 2.0, "olefins": -3.0, "naphthenes": 1.5, "oxygenates": 4.0}
    cal = {"format": "dha-octane-calibration/1", "model": settings["octane"]["model"],
           "kind": "groups", "date": "2026-12-01",
           "properties": {p: {"coefficients": coef, "n": 12, "rmse_fit": 0.3, "loo_rmse": 0.4,
                              "loo_residuals": []} for p in ("ron", "mon")}}
    path = tmp_path / "cal.json"
    path.write_text(json.dumps(cal), encoding="utf-8")
    settings["octane"]["calibration"] = str(path)
    table = _table({"2,2,4-trimethylpentane": 40.0, "n-heptane": 10.0, "toluene": 25.0,
                    "ethanol": 10.0, "1-hexene": 5.0, "cyclohexane": 10.0}, library)
    inputs = explain.octane.model_inputs(table, library.components)
    xm = inputs["vol_frac"].to_numpy(float) / inputs["vol_frac"].sum()
    raw = {p: np.zeros(len(xm) + 1) for p in ("ron", "mon")}
    fast = explain._calibrate_perturbed(inputs, xm, raw, settings)
    rows = explain._perturbed_rows(xm, 0, len(xm) + 1)
    by_hand = np.array([explain.octane.apply_calibration(0.0, cal["properties"]["ron"], "groups", g)
                        for g in explain._group_fracs(inputs, rows)])
    assert np.allclose(fast["ron"], by_hand, atol=1e-12)
    from dha.properties import octane
    ron = octane.compute(table, library, settings).values["ron"]
    mon = octane.compute(table, library, settings).values["mon"]
    out = explain.explain(table, library, settings, {"ron": ron, "mon": mon})
    assert sum(c["ron"] for c in out["octane_contributions"]) == pytest.approx(ron, abs=0.01)
    assert abs(out["octane_explained"]["residual"]["ron"]) < 1e-6
