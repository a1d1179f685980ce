"""The JSON result: every the dha-result/1 schema key, deterministic text, NaN -> null."""
from __future__ import annotations

import json
import math

import numpy as np
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

# the dha-result/1 schema "The JSON result": keys that must be present
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
    assert r["mass_balance"]["closes"] and r["mass_balance"]["rows"]["not_in_library"] == 0
    assert r["sample"]["id"] == "recipe"
    assert jsonable(1 / 3) == 0.333333333 and jsonable(math.inf) is None


# ------------------------------------------------------------------ end to end, real modules

#: Invented blend [mass %] for the hand-made export (no co-elution pair members).
HAND_BLEND = {"n-butane": 4.0, "ethanol": 10.0, "n-pentane": 8.0, "2-methoxy-2-methylpropane": 5.0,
              "2-methylpentane": 14.0, "1-hexene": 6.0, "benzene": 1.0, "cyclohexane": 8.0,
              "2,2,4-trimethylpentane": 20.0, "n-heptane": 10.0, "1,2,4-trimethylbenzene": 12.0,
              "n-decane": 2.0}


def _rrf_by_hand(lib, name):
    # FID carbon-mass response, ASTM D6730 §15 / common trade practice: RRF = M·0.7487/(12.011·n_C), oxygenates with the ECN
    row = lib.components.loc[name]
    n = row["ecn"] if row["group"] == "oxygenates" else row["carbon_number"]
    return row["molar_mass_g_mol"] * 0.7487 / (12.011 * n)


def _e2e_settings():
    """Defaults with a narrow index window (1 unit), so that the unknown stays unknown in the
    dense shipped library (the named peaks match by name)."""
    s = default_settings()
    s["identify"]["ri_tolerance"] = 1.0
    return s


def _gap_index(lib):
    """Middle of the widest gap between library indices in (700, 800): no component within the
    identifier's window there (asserted, so a denser library shows up here, not as a wrong match)."""
    ri = np.sort(lib.components["retention_index"].dropna().to_numpy())
    ri = np.concatenate([[700.0], ri[(ri > 700) & (ri < 800)], [800.0]])
    i = int(np.argmax(np.diff(ri)))
    assert ri[i + 1] - ri[i] > 4 * _e2e_settings()["identify"]["ri_tolerance"]
    return float((ri[i] + ri[i + 1]) / 2)


def _hand_export(lib, tmp_path):
    """Peak table by hand: area = mass/RRF, times t = I/50 min (linear index scale), names
    given, plus one unnamed peak of 30 000 counts in the widest gap of the library's indices
    between n-C7 and n-C8 (a C8 unknown)."""
    rows = [(lib.components.at[n, "retention_index"] / 50.0, 1.0e4 * m / _rrf_by_hand(lib, n), n)
            for n, m in HAND_BLEND.items()]
    rows.append((_gap_index(lib) / 50.0, 3.0e4, ""))
    table = pd.DataFrame(sorted(rows), columns=["RT [min]", "Area", "Name"])
    path = tmp_path / "hand_blend.csv"
    table.to_csv(path, index=False)
    return path


def _export_files(tmp_path):
    """(path, settings) of every export of the reader's corpus (tests/exports/*.expected.json,
    with the reader settings each one names), plus the hand-made one."""
    from pathlib import Path

    from dha.library import load_library
    from dha.settings import merge_settings
    lib = load_library()
    exports = Path(__file__).parent / "exports"
    files = [(_hand_export(lib, tmp_path), _e2e_settings())]
    for expected in sorted(exports.glob("*.expected.json")):
        spec = json.loads(expected.read_text(encoding="utf-8"))
        reader = dict(spec.get("settings") or {})
        if reader.get("profile"):
            reader["profile"] = str(exports / reader["profile"])
        settings = merge_settings(default_settings(), {"reader": reader}) if reader else default_settings()
        files.append((exports / spec["file"], settings))
    return lib, files


def test_mass_balance_closes_on_every_export(tmp_path):
    from dha.pipeline import process_file
    lib, files = _export_files(tmp_path)
    checked = 0
    for path, settings in files:
        for r in process_file(path, settings, lib, spec=""):
            for basis in ("mass_pct", "vol_pct", "mol_pct"):
                assert sum(r["totals"][basis].values()) == pytest.approx(100.0, abs=1e-6)
            mb = r["mass_balance"]
            if mb is None or "area" not in mb:      # composition input: no peaks
                assert mb is None or mb["closes"]
                continue
            checked += 1
            assert mb["closes"], (path.name, mb)
            parts = sum(mb["area"][k] for k in ("identified", "unidentified", "excluded"))
            # the JSON keeps 9 significant digits: the rounded parts add up to 1e-8
            assert parts == pytest.approx(mb["area"]["total"], rel=1e-8)
    assert checked >= len(files) - 3      # all but the three composition exports are peak runs


def test_hand_made_export_end_to_end(tmp_path):
    # reader -> identify -> quantify -> groups -> result on a peak table made by hand
    from dha.pipeline import process_file
    lib, files = _export_files(tmp_path)
    r = process_file(files[0][0], files[0][1], lib, spec="")[0]
    got = {c["name"]: c for c in r["components"]}
    # unknown C8: isoparaffin C8H18 factor (IUPAC weights) on 30 000 counts
    m_unknown = 3.0e4 * (8 * 12.011 + 18 * 1.008) * 0.7487 / (12.011 * 8)
    total = 1.0e4 * sum(HAND_BLEND.values()) + m_unknown
    for name, mass in HAND_BLEND.items():
        assert got[name]["mass_pct"] == pytest.approx(100 * 1.0e4 * mass / total, rel=1e-6), name
        assert got[name]["match"] == "name"
    unknown = [c for c in r["components"] if c["group"] == "unidentified"]
    assert len(unknown) == 1 and unknown[0]["carbon_number"] == 8
    assert unknown[0]["mass_pct"] == pytest.approx(100 * m_unknown / total, rel=1e-6)
    assert r["totals"]["mass_pct"]["oxygenates"] == pytest.approx(100 * 15.0e4 / total, rel=1e-6)
    # oxygen from stoichiometry: ethanol C2H6O and MTBE C5H12O, IUPAC weights
    m_e, m_m = 2 * 12.011 + 6 * 1.008 + 15.999, 5 * 12.011 + 12 * 1.008 + 15.999
    ox = 100 * 1.0e4 / total * (10.0 * 15.999 / m_e + 5.0 * 15.999 / m_m)
    assert r["oxygen_mass_pct"] == pytest.approx(ox, rel=1e-4)
    assert r["mass_balance"]["closes"] and r["mass_balance"]["peaks"]["total"] == 13


def test_binary_volume_pct_real_library_vs_coolprop():
    # CoolProp 8 saturated-liquid densities at 288.15 K; the shipped library's densities give
    # the same volume split of a 50/50 mass blend of n-heptane and toluene within 0.2 % v/v
    import CoolProp.CoolProp as CP
    from dha.library import load_library
    rho_h = CP.PropsSI("D", "T", 288.15, "Q", 0, "n-Heptane")
    rho_t = CP.PropsSI("D", "T", 288.15, "Q", 0, "Toluene")
    table = pd.DataFrame({"row": [1, 2], "component": ["n-heptane", "toluene"], "amount": [50.0, 50.0]})
    t = quantify_composition(table, "mass_pct", load_library(), default_settings()).table
    v_h = 100 * (50 / rho_h) / (50 / rho_h + 50 / rho_t)
    assert t.set_index("name").loc["n-heptane", "vol_pct"] == pytest.approx(v_h, abs=0.2)


def test_property_models_run_in_order_and_failures_become_warnings(monkeypatch):
    # the interface of dha/properties/__init__.py: compute(composition, library, settings)
    import sys
    import types

    import dha.properties
    from dha.pipeline import run_properties
    good = types.ModuleType("fake_bulk")
    good.compute = lambda comp, lib, s: PropertyResult(
        values={"mean_molar_mass_g_mol": float(100.0 / (comp["mass_pct"] / comp["molar_mass_g_mol"]).sum())})
    bad = types.ModuleType("fake_broken")

    def broken(comp, lib, s):
        raise ZeroDivisionError("no data")
    bad.compute = broken
    monkeypatch.setitem(sys.modules, "fake_bulk", good)
    monkeypatch.setitem(sys.modules, "fake_broken", bad)
    monkeypatch.setattr(dha.properties, "MODELS", ("fake_bulk", "fake_broken"))
    lib, s = tiny_library(), default_settings()
    table = pd.DataFrame({"row": [1, 2], "component": ["toluene", "n-heptane"], "amount": [50.0, 50.0]})
    q = quantify_composition(table, "mol_pct", lib, s)
    props = run_properties(q.table, lib, s)
    assert [name for name, _ in props] == ["fake_bulk", "fake_broken"]
    run = Run(source_file="x.csv", injection=None, sample={}, kind="composition", table=table,
              basis="mol_pct", import_log=[])
    r = build_result(run, q, group_totals(q.table, lib, s), props, lib, s)
    # equimolar blend: mean molar mass = (M_toluene + M_heptane)/2 (definition of the mean)
    m = lib.components["molar_mass_g_mol"]
    assert r["properties"]["mean_molar_mass_g_mol"] == pytest.approx((m["toluene"] + m["n-heptane"]) / 2)
    assert any("fake_broken failed" in w for w in r["warnings"])


def test_dumps_is_the_standard_json_text_of_the_jsonable_result():
    # Reference: Python's json module (json.dumps(jsonable(r), indent=2, ensure_ascii=False)),
    # the text dha wrote before its one-pass writer; byte for byte, on a real result, on odd
    # values and on floats of every magnitude (repr of the value rounded to 9 digits).
    import datetime
    from pathlib import Path

    def standard(value):
        return json.dumps(jsonable(value), indent=2, ensure_ascii=False, allow_nan=False) + "\n"

    res = _result(generated_at="2026-01-01T00:00:00+00:00")
    assert dumps(res) == standard(res)

    class Text(str):
        pass

    odd = {"a": [np.float64(1 / 3), np.int64(3), np.bool_(True), float("nan"), -0.0, math.inf,
                 (1, 2.5), [], {}], 1: {}, None: [{}], 2.5: "é\u2028\"\\\n",
           "t": pd.Timestamp("2026-01-01"), "p": Path("x/y"), "s": Text("sub"),
           "df": pd.DataFrame({"x": [1.0, np.nan], "y": ["a", None]}),
           "ser": pd.Series([1.5], index=["k"]), "np": np.array([[1.0, 2.0]]), "na": pd.NA,
           "d": datetime.date(2026, 1, 2), "big": 12345678901234567890}
    assert dumps(odd) == standard(odd)
    rng = np.random.default_rng(5)
    floats = (rng.standard_normal(20000) * 10.0 ** rng.integers(-25, 25, 20000)).tolist()
    floats += [1e9, 999999999.6, 1e16, 1e15 + 0.3, 1e-5, 9.999999999e-5, 5e-324, 1.5e308,
               123456789012.0, -0.000123456789123, 100.0]
    assert dumps(floats) == standard(floats)
