"""Duplicate injections averaged into one result with a repeatability check (issue 13).

The check follows the definition of the repeatability limit r (ISO 5725-1: two results of one
sample, same method, lab, operator and short time, differ by more than r in only 5 % of cases;
from memory): the spread of the injections against a limit the lab sets.
"""
from __future__ import annotations

import json

import openpyxl
import pytest
from click.testing import CliRunner

from dha.cli import cli
from dha.replicates import value_of


def _workbook(path, benzene=(0.80, 0.90)):
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Inj 1"
    rows = [[("component", "vol_pct"), ("benzene", b), ("toluene", 30.0),
             ("n-heptane", 40.0), ("2,2,4-trimethylpentane", 30.0 - b)] for b in benzene]
    for r in rows[0]:
        ws.append(r)
    ws2 = wb.create_sheet("Inj 2")
    for r in rows[1]:
        ws2.append(r)
    wb.save(path)
    return path


def _settings(tmp_path, limit):
    path = tmp_path / f"lab_{limit}.toml"
    path.write_text(f"[injections]\nrepeatability = {{ benzene_vol_pct = {limit} }}\n",
                    encoding="utf-8")
    return path


def test_two_sheets_averaged_with_a_failed_repeatability(tmp_path):
    book = _workbook(tmp_path / "tk7.xlsx")
    out = tmp_path / "out"
    args = ["report", str(book), "-o", str(out), "--format", "json", "--spec", "",
            "--average-injections", "--settings", str(_settings(tmp_path, 0.05))]
    r = CliRunner().invoke(cli, args)
    assert r.exit_code == 0, r.output
    data = json.loads((out / "tk7__average.json").read_text(encoding="utf-8"))
    # the mean of the two injections (volume basis: benzene 0.80 and 0.90 % v/v as given)
    assert data["benzene"]["vol_pct"] == pytest.approx(0.85)
    assert data["sample"]["id"] == "tk7"
    rep = data["replicates"]
    assert rep["count"] == 2 and len(rep["results"]) == 2
    assert [x["benzene"]["vol_pct"] for x in rep["results"]] == pytest.approx([0.80, 0.90])
    check = [c for c in data["checks"] if c["spec"] == "repeatability"][0]
    assert check["value"] == pytest.approx(0.10) and check["verdict"] == "fail"
    assert any("repeatability" in w for w in data["warnings"])
    for basis in ("mass_pct", "vol_pct", "mol_pct"):
        assert sum(data["totals"][basis].values()) == pytest.approx(100.0, abs=1e-6)
    # interfaces.md: octane contributions still add up to the (averaged) RON
    if data["properties"]["ron"] is not None:
        assert sum(c["ron"] for c in data["octane_contributions"]) == pytest.approx(
            data["properties"]["ron"], abs=0.01)
    # --strict counts a failed repeatability like a failed specification
    r = CliRunner().invoke(cli, args + ["--overwrite", "--strict"])
    assert r.exit_code == 3


def test_within_the_limit_passes(tmp_path):
    book = _workbook(tmp_path / "tk7.xlsx", benzene=(0.80, 0.82))
    out = tmp_path / "out"
    r = CliRunner().invoke(cli, ["report", str(book), "-o", str(out), "--format", "json",
                                 "--spec", "", "--average-injections", "--strict",
                                 "--settings", str(_settings(tmp_path, 0.05))])
    assert r.exit_code == 0, r.output
    data = json.loads((out / "tk7__average.json").read_text(encoding="utf-8"))
    assert [c["verdict"] for c in data["checks"] if c["spec"] == "repeatability"] == ["pass"]


def test_files_with_the_same_sample_id_are_averaged_others_kept(tmp_path):
    text = "Sample ID,{}\n\ncomponent,vol_pct\nbenzene,{}\ntoluene,30\nn-heptane,{}\n"
    for name, sid, b in (("a", "TK7-0412", 0.8), ("b", "TK7-0412", 0.84), ("c", "TK9", 0.5)):
        (tmp_path / f"{name}.csv").write_text(text.format(sid, b, 70 - b), encoding="utf-8")
    out = tmp_path / "out"
    r = CliRunner().invoke(cli, ["report", *(str(tmp_path / f"{n}.csv") for n in "abc"),
                                 "-o", str(out), "--format", "json", "--spec", "",
                                 "--average-injections"])
    assert r.exit_code == 0, r.output
    assert sorted(p.name for p in out.iterdir()) == ["TK7-0412__average.json", "c.json"]
    data = json.loads((out / "TK7-0412__average.json").read_text(encoding="utf-8"))
    assert data["benzene"]["vol_pct"] == pytest.approx(0.82)
    assert [i["source_file"] for i in data["replicates"]["injections"]] == ["a.csv", "b.csv"]


def test_value_of_keys():
    r = {"properties": {"ron": 95.1}, "benzene": {"vol_pct": 0.7}, "oxygen_mass_pct": 3.6,
         "totals": {"vol_pct": {"aromatics": 31.0}}}
    assert [value_of(r, k) for k in ("ron", "benzene_vol_pct", "oxygen_mass_pct",
                                     "aromatics_vol_pct", "nothing")] == [95.1, 0.7, 3.6, 31.0,
                                                                          None]
