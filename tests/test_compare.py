"""dha compare: differences between two results (invented result dicts; the logic is ours)."""
import json

from click.testing import CliRunner

from dha.cli import cli
from dha.compare import compare_results


def _result(version, ron, benzene, comps):
    return {"schema": "dha-result/1", "library": {"version": version, "sha256": version * 4},
            "settings": {"identify": {"ri_tolerance": 3.0}},
            "totals": {"mass_pct": {"aromatics": 30.0}, "vol_pct": {}, "mol_pct": {}},
            "benzene": {"mass_pct": benzene, "vol_pct": benzene * 0.9},
            "oxygen_mass_pct": 0.0, "properties": {"ron": ron}, "checks": [],
            "components": comps}


COMPS_A = [{"name": "benzene", "rt_min": 20.1, "area": 10.0, "mass_pct": 1.0, "match": "name"},
           {"name": "unidentified", "rt_min": 30.2, "area": 5.0, "mass_pct": 0.5, "match": "unidentified"}]
COMPS_B = [{"name": "benzene", "rt_min": 20.1, "area": 10.0, "mass_pct": 1.0, "match": "name"},
           {"name": "2-methylhexane", "rt_min": 30.2, "area": 5.0, "mass_pct": 0.5,
            "match": "retention_index"}]


def test_identical_results_have_no_differences():
    r = _result("1", 95.0, 1.0, COMPS_A)
    assert compare_results(r, r).empty


def test_library_change_and_reidentified_peak_reported():
    t = compare_results(_result("1", 95.0, 1.0, COMPS_A), _result("2", 95.3, 1.0, COMPS_B))
    sections = set(t["section"])
    assert {"library", "properties", "identification", "components mass_pct"} <= sections
    ident = t[t["section"] == "identification"].iloc[0]
    assert (ident["a"], ident["b"]) == ("unidentified", "2-methylhexane")


def test_cli_folders(tmp_path):
    for folder, res in (("a", _result("1", 95.0, 1.0, COMPS_A)), ("b", _result("2", 95.0, 1.2, COMPS_A))):
        (tmp_path / folder).mkdir()
        (tmp_path / folder / "run1.json").write_text(json.dumps(res))
    (tmp_path / "b" / "run2.json").write_text(json.dumps(_result("2", 95.0, 1.0, COMPS_A)))
    r = CliRunner().invoke(cli, ["compare", str(tmp_path / "a"), str(tmp_path / "b")])
    assert r.exit_code == 0, r.output
    assert "only in B" in r.output and "benzene" in r.output


def test_cli_not_a_result(tmp_path):
    bad = tmp_path / "x.json"
    bad.write_text("[1, 2]")
    r = CliRunner().invoke(cli, ["compare", str(bad), str(bad)])
    assert r.exit_code == 1
    assert "not a dha result" in r.output and "Traceback" not in r.output


def test_screen_shows_no_nan_or_none_and_counts_pairs(tmp_path):
    # Folders as `dha batch` writes them: results in sub-folders, a batch record beside them.
    ra = _result("1", 95.0, 1.0, COMPS_A)
    rb = _result("2", 95.4, 1.0, COMPS_B)
    rb["properties"]["mon"] = 85.1            # a key only in B
    for folder, res in (("a", ra), ("b", rb)):
        (tmp_path / folder / "2024-01").mkdir(parents=True)
        (tmp_path / folder / "2024-01" / "run1.json").write_text(json.dumps(res))
        (tmp_path / folder / "2024-01" / "same.json").write_text(json.dumps(ra))
        (tmp_path / folder / "dha-batch.json").write_text(json.dumps({"input_root": "x"}))
    (tmp_path / "a" / "2024-01" / "gone.json").write_text(json.dumps(ra))
    (tmp_path / "b" / "2024-01" / "late.json").write_text(json.dumps(ra))
    r = CliRunner().invoke(cli, ["compare", str(tmp_path / "a"), str(tmp_path / "b")])
    assert r.exit_code == 0, r.output
    for word in ("NaN", "None", "nan"):
        assert word not in r.output, word
    lines = r.output.splitlines()
    assert any("2024-01/gone.json" in ln and "only in A" in ln for ln in lines)
    assert any("2024-01/late.json" in ln and "only in B" in ln for ln in lines)
    mon = [ln for ln in lines if " mon " in f" {ln} "][0]
    assert "(absent)" in mon and "85.1" in mon
    ron = [ln for ln in lines if " ron " in f" {ln} "][0]
    assert "+0.4" in ron
    # two pairs compared (run1, same), one differing; the batch record is not a result
    assert ("2 pair(s) of results compared, 1 with differences; 1 result(s) only in A, "
            "1 only in B") in r.output
