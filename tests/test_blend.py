"""Blends and recipe search (dha/blend.py).

Sources: volume additivity is the definition the composition tables use (dha.quantify:
v ∝ m/ρ); the blend of two results must equal the composition table mixed by hand (issue 17,
1e-9); the linear-volume octane model is linear by its definition (octane.py), the default
model is not (Anderson et al. 2010 for ethanol: linear by mole, not by volume). Spec limits:
EN 228:2012+A1:2017 as shipped in dha/spec_profiles/en228-e10-summer.toml. Stream compositions
are invented (alkylate-, reformate- and isomerate-like cuts).
"""
from __future__ import annotations

import json
from pathlib import Path

import pandas as pd
import pytest
from click.testing import CliRunner

from dha import blend, specs
from dha.cli import cli
from dha.levers import load_samples
from dha.pipeline import process_file, write_outputs
from dha.settings import load_settings

EXAMPLES = Path(__file__).resolve().parents[1] / "dha" / "example_runs"  # shipped with the package
STREAMS = {
    "alkylate": {"2,2,4-trimethylpentane": 50, "2,3,4-trimethylpentane": 15,
                 "2,3,3-trimethylpentane": 10, "2,5-dimethylhexane": 10, "2-methylbutane": 10,
                 "n-butane": 5},
    "reformate": {"toluene": 40, "1,3-dimethylbenzene": 20, "1,2,4-trimethylbenzene": 10,
                  "benzene": 1, "2-methylpentane": 10, "2-methylhexane": 9, "n-heptane": 5,
                  "2-methylbutane": 5},
    "isomerate": {"2-methylbutane": 40, "n-pentane": 15, "2,2-dimethylbutane": 15,
                  "2-methylpentane": 15, "n-butane": 5, "3-methylpentane": 10},
    "ethanol": {"ethanol": 100},
    "heavy naphtha": {"n-heptane": 40, "n-octane": 30, "2-methylheptane": 30},
}


def _write(folder: Path, name: str, comp: dict) -> Path:
    path = folder / f"{name.replace(' ', '_')}.csv"
    pd.DataFrame({"component": list(comp), "vol_pct": list(comp.values())}).to_csv(
        path, index=False)
    return path


@pytest.fixture(scope="module")
def folder(tmp_path_factory):
    d = tmp_path_factory.mktemp("streams")
    for name, comp in STREAMS.items():
        _write(d, name, comp)
    return d


@pytest.fixture(scope="module")
def profile():
    return specs.load_profile("en228-e10-summer")


def test_blend_of_two_results_equals_the_mixed_composition_table(folder, library, settings):
    # two result JSONs (written by the pipeline, 9 significant digits) blended 50/50
    recipe = EXAMPLES / "hp-blend-recipe.csv"
    res_a = process_file(recipe, settings, library, spec="")[0]
    res_b = process_file(folder / "alkylate.csv", settings, library, spec="")[0]
    out = folder / "results"
    write_outputs(res_a, out, "a", overwrite=True)
    write_outputs(res_b, out, "b", overwrite=True)
    a = load_samples(out / "a.json", settings, library)[0]
    b = load_samples(out / "b.json", settings, library)[0]
    table = blend.blend_tables([a.table, b.table], [50, 50])
    # the same blend written by hand as a composition table (% v/v) and run through dha
    va = pd.read_csv(recipe, comment="#").set_index("component")["vol_pct"]
    vb = pd.Series(STREAMS["alkylate"], dtype=float)
    mixed = va.mul(0.5).add(vb.mul(0.5), fill_value=0.0)
    mixed.rename_axis("component").rename("vol_pct").reset_index().to_csv(
        folder / "mixed.csv", index=False)
    ref = process_file(folder / "mixed.csv", settings, library, spec="")[0]
    refc = pd.DataFrame(ref["components"]).set_index("name")
    got = table.set_index("name")
    assert sorted(got.index) == sorted(refc.index)
    for col in ("vol_pct", "mass_pct", "mol_pct"):
        diff = (got[col] - refc.loc[got.index, col]).abs().max() / 100.0
        assert diff < 1e-9, col
    blended = blend.blend_results([a, b], [50, 50], library, settings)
    assert blended["properties"]["ron"] == pytest.approx(ref["properties"]["ron"], abs=1e-6)
    assert blended["properties"]["dvpe_kpa"] == pytest.approx(ref["properties"]["dvpe_kpa"],
                                                              abs=1e-5)
    # the default model is not linear by volume (ethanol blends by mole, interactions):
    lin = 0.5 * (res_a["properties"]["ron"] + res_b["properties"]["ron"])
    assert abs(blended["properties"]["ron"] - lin) > 0.1
    assert blended["blend"]["linear_volume_average"]["ron"] == pytest.approx(lin, abs=1e-6)


def test_linear_volume_model_blends_linearly(folder, library):
    # octane.py: linear_volume is RON = sum phi_i RON_i, so a blend is the volume average
    settings = load_settings()
    settings["octane"]["model"] = "linear_volume"
    a = load_samples(folder / "reformate.csv", settings, library)[0]
    b = load_samples(folder / "isomerate.csv", settings, library)[0]
    res = blend.blend_results([a, b], [30, 70], library, settings)
    assert res["properties"]["ron"] == pytest.approx(
        res["blend"]["linear_volume_average"]["ron"], abs=1e-6)


def test_recipe_meets_the_specification(folder, library, settings, profile):
    rows = [("alkylate", 750, None), ("reformate", 650, None), ("isomerate", 560, None),
            ("ethanol", 700, 10)]
    csv = folder / "streams.csv"
    pd.DataFrame({"stream": [r[0] for r in rows], "file": [f"{r[0]}.csv" for r in rows],
                  "cost_per_m3": [r[1] for r in rows],
                  "max_vol_pct": [r[2] for r in rows]}).to_csv(csv, index=False)
    samples, costs, lo, hi = blend.read_streams(csv, settings, library)
    out = blend.recipe(samples, costs, profile, library, settings, lo, hi)
    assert out["feasible"], out["impossible"]
    shares = out["vol_pct"]
    assert sum(shares.values()) == pytest.approx(100.0, abs=1e-9)
    assert shares["ethanol"] <= 10.0 + 1e-9
    # the recipe, blended and checked from scratch, passes EN 228 (no fail)
    table = blend.blend_tables([s.table for s in samples], list(shares.values()))
    from dha.levers import evaluate
    res = evaluate(table, library, settings, profile)
    assert not [c for c in res["checks"] if c["verdict"] == "fail"]
    assert out["binding"] and out["cost_per_m3"] == pytest.approx(
        sum(c * shares[s.label] / 100 for c, s in zip(costs, samples)), rel=1e-12)
    # the cheapest stream alone (isomerate) does not meet RON 95: the recipe costs more
    assert out["cost_per_m3"] > 560


def test_recipe_names_the_impossible_limit(folder, library, settings, profile):
    samples = [load_samples(folder / f"{n.replace(' ', '_')}.csv", settings, library)[0]
               for n in ("isomerate", "heavy naphtha")]
    for s, n in zip(samples, ("isomerate", "heavy naphtha")):
        s.label = n
    out = blend.recipe(samples, [560, 500], profile, library, settings)
    assert not out["feasible"]
    # RON 95 is out of reach: isomerate ~RON 85 and n-heptane/n-octane far lower
    assert "ron min 95" in out["impossible"]["reason"]


def test_cli_blend_and_recipe(folder):
    runner = CliRunner()
    r = runner.invoke(cli, ["blend", str(folder / "alkylate.csv"), str(folder / "reformate.csv"),
                            "--vol-pct", "60", "--vol-pct", "40", "--json", "-"])
    assert r.exit_code == 0, r.output
    data = json.loads(r.output)
    assert data["blend"]["streams"][0]["vol_pct"] == pytest.approx(60.0)
    r = runner.invoke(cli, ["blend", str(folder / "alkylate.csv"), "--vol-pct", "60",
                            "--vol-pct", "40"])
    assert r.exit_code == 1 and "--vol-pct" in r.output
    pd.DataFrame({"stream": ["a", "b"], "file": ["isomerate.csv", "heavy_naphtha.csv"],
                  "cost_per_m3": [1, 2]}).to_csv(folder / "bad.csv", index=False)
    r = runner.invoke(cli, ["recipe", str(folder / "bad.csv")])
    assert r.exit_code == 0 and "IMPOSSIBLE" in r.output and "ron min 95" in r.output
