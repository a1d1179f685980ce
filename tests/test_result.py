"""The JSON result: every CONTRACT.md key, deterministic text, NaN -> null."""
from __future__ import annotations

import json
import math

import pandas as pd
import pytest

from dha.groups import group_totals
from dha.properties import PROPERTY_KEYS, PropertyResult
from dha.quantify import quantify_composition, quantify_peaks
from dha.result import build_result, dumps, jsonable, write_json
from dha.settings import default_settings
from test_quantify import peak_table, tiny_library


def Run(**kw):  # the fields of dha.reader.Run (DEVELOPERS.md), without needing the reader
    from types import SimpleNamespace
    return SimpleNamespace(**kw)

# CONTRACT.md "The JSON result": keys that must be present
CONTRACT_KEYS = ("schema", "tool", "sample", "library", "settings", "totals", "by_carbon_number",
                 "benzene", "oxygen_mass_pct", "oxygenates", "properties", "uncertainty",
                 "checks", "components", "import_log", "warnings")
CONTRACT_GROUPS = ("n_paraffins", "isoparaffins", "olefins", "naphthenes", "aromatics",
                   "oxygenates", "unidentified")
COMPONENT_KEYS = ("name", "cas", "group", "carbon_number", "rt_min", "retention_index", "area",
                  "mass_pct", "vol_pct", "mol_pct", "match", "ri_source")


def _peak_run():
    peaks = peak_table([(3.0, 120.0, "ethanol", 2, 450.0), (8.0, 30.0, "benzene", 6, 655.0),
                        (10.0, 1000.0, "n-heptane", 7, 700.0), (11.0, 80.0, None, None, 750.0),
                        (12.0, 500.0, "toluene", 7, 760.0)])
    run = Run(source_file="tank7_0412.csv", injection=None,
              sample={"id": "TK7-0412", "operator": None},
              kind="peaks", table=peaks, basis=None,
              import_log=[{"row": 14, "action": "skipped", "reason": "area is zero"}])
    return run, peaks


def _result(generated_at=None, properties=()):
    lib, s = tiny_library(), default_settings()
    run, peaks = _peak_run()
    q = quantify_peaks(peaks, lib, s, peaks=peaks, source=run.source_file)
    g = group_totals(q.table, lib, s)
    return build_result(run, q, g, list(properties), lib, s, generated_at=generated_at)


def test_every_contract_key():
    r = _result()
    for key in CONTRACT_KEYS:
        assert key in r, key
    assert r["schema"] == "dha-result/1"
    assert set(r["tool"]) >= {"version"} and set(r["library"]) >= {"version", "sha256"}
    assert r["sample"]["id"] == "TK7-0412" and r["sample"]["source_file"] == "tank7_0412.csv"
    for basis in ("mass_pct", "vol_pct", "mol_pct"):
        assert tuple(r["totals"][basis]) == CONTRACT_GROUPS
        assert sum(r["totals"][basis].values()) == pytest.approx(100.0, abs=1e-6)
    assert {"carbon_number", "group", "mass_pct", "vol_pct", "mol_pct"} <= set(r["by_carbon_number"][0])
    assert "13+" in {row["carbon_number"] for row in r["by_carbon_number"]}
    assert set(r["benzene"]) >= {"mass_pct", "vol_pct"}
    assert r["oxygenates"][0]["name"] == "ethanol" and r["oxygenates"][0]["cas"] == "64-17-5"
    assert tuple(r["properties"])[:16] == PROPERTY_KEYS
    for comp in r["components"]:
        assert tuple(comp)[:12] == COMPONENT_KEYS
        assert comp["match"] in ("name", "cas", "retention_index", "unidentified")
    assert r["import_log"] == [{"row": 14, "action": "skipped", "reason": "area is zero"}]
    assert r["checks"] == []
    assert r["settings"] == json.loads(json.dumps(default_settings()))
    assert r["mass_balance"]["closes"] is True
    assert r["generated_at"].endswith("+00:00")


def test_missing_properties_are_null_with_a_warning():
    part = PropertyResult(values={"density_kg_m3": 731.2, "ron": None},
                          uncertainty={"density_kg_m3": 1.5},
                          warnings=["ron: no octane data for 2 components"])
    r = _result(properties=[("bulk", part)])
    assert r["properties"]["density_kg_m3"] == 731.2
    assert r["uncertainty"]["density_kg_m3"] == 1.5
    assert r["properties"]["ron"] is None and r["properties"]["dvpe_kpa"] is None
    assert "ron: no octane data for 2 components" in r["warnings"]
    assert any(w.startswith("property dvpe_kpa not computed") for w in r["warnings"])
    assert not any(w.startswith("property ron not computed") for w in r["warnings"])


def test_identical_runs_identical_json(tmp_path):
    a, b = _result(), _result()
    a.pop("generated_at"), b.pop("generated_at")
    assert dumps(a) == dumps(b)
    p1, p2 = write_json(_result("2026-01-01T00:00:00+00:00"), tmp_path / "a.json"), \
        write_json(_result("2026-01-01T00:00:00+00:00"), tmp_path / "b.json")
    assert p1.read_bytes() == p2.read_bytes()
    loaded = json.loads(p1.read_text(encoding="utf-8"))
    assert list(loaded)[:len(CONTRACT_KEYS)] == list(CONTRACT_KEYS)


def test_nan_is_null_and_floats_rounded():
    # composition input has no retention time or area: null in the JSON, never NaN
    lib, s = tiny_library(), default_settings()
    table = pd.DataFrame({"row": [1, 2], "component": ["toluene", "n-heptane"], "amount": [30.0, 70.0]})
    q = quantify_composition(table, "vol_pct", lib, s)
    run = Run(source_file="recipe.csv", injection=None, sample={}, kind="composition",
              table=table, basis="vol_pct", import_log=[])
    r = build_result(run, q, group_totals(q.table, lib, s), [], lib, s)
    text = dumps(r)
    assert "NaN" not in text and "Infinity" not in text
    assert r["components"][0]["rt_min"] is None and r["components"][0]["area"] is None
    assert r["mass_balance"] is None
    assert r["sample"]["id"] == "recipe"
    assert jsonable(1 / 3) == 0.333333333 and jsonable(math.inf) is None
