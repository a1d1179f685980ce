"""Every result says what it was made from (``provenance``), in ``dha report`` as in ``dha batch``;
and the shipped example runs agree with the lab's marker table (no "marker has no peak")."""
from __future__ import annotations

import hashlib
import json
from pathlib import Path

import pytest
from click.testing import CliRunner

import dha
import dha.library
from dha.cli import cli
from dha.provenance import KEYS
from test_quantify import tiny_library

EXAMPLES = Path(__file__).resolve().parents[1] / "dha" / "example_runs"


@pytest.fixture
def runner(monkeypatch):
    # the stand-in library of test_quantify (values from chemicals/thermo/CoolProp)
    monkeypatch.setattr(dha.library, "load_library", lambda overlay=None: tiny_library())
    return CliRunner()


def test_report_result_carries_the_same_provenance_as_batch(runner, tmp_path):
    # invented recipe
    src = tmp_path / "in" / "blend_tk7.csv"
    src.parent.mkdir()
    src.write_text("component,vol_pct\nbenzene,1\ntoluene,30\nn-heptane,69\n", encoding="utf-8")
    r = runner.invoke(cli, ["report", str(src), "-o", str(tmp_path / "rep"), "--format", "json",
                            "--spec", "en228-e10-summer"])
    assert r.exit_code == 0, r.output
    rep = json.loads((tmp_path / "rep" / "blend_tk7.json").read_text(encoding="utf-8"))
    prov = rep["provenance"]
    assert set(KEYS) <= set(prov)
    # the input's checksum by the standard library's own SHA-256, independent of dha's reader
    assert prov["input_sha256"] == hashlib.sha256(src.read_bytes()).hexdigest()
    assert prov["library_sha256"] == tiny_library().sha256 == rep["library"]["sha256"]
    assert prov["tool_version"] == dha.__version__
    assert len(prov["settings_sha256"]) == 64

    r = runner.invoke(cli, ["batch", str(src.parent), "-o", str(tmp_path / "bat"), "--format",
                            "json", "--spec", "en228-e10-summer"])
    assert r.exit_code == 0, r.output
    bat = json.loads((tmp_path / "bat" / "blend_tk7.json").read_text(encoding="utf-8"))
    assert {k: bat["provenance"][k] for k in KEYS} == {k: prov[k] for k in KEYS}

    # another specification profile is another settings checksum
    r = runner.invoke(cli, ["report", str(src), "-o", str(tmp_path / "rep2"), "--format", "json",
                            "--spec", ""])
    assert r.exit_code == 0, r.output
    other = json.loads((tmp_path / "rep2" / "blend_tk7.json").read_text(encoding="utf-8"))
    assert other["provenance"]["settings_sha256"] != prov["settings_sha256"]
    assert other["provenance"]["input_sha256"] == prov["input_sha256"]


def test_averaged_result_names_every_input():
    from dha.provenance import averaged, combined

    a = {"input_sha256": "a" * 64, "library_sha256": "l", "settings_sha256": "s",
         "tool_version": "v"}
    b = dict(a, input_sha256="b" * 64)
    one = averaged({"replicates": {"results": [{"provenance": b}, {"provenance": a}]}})
    assert one["inputs_sha256"] == ["a" * 64, "b" * 64]
    assert one["input_sha256"] == combined(["b" * 64, "a" * 64]) == hashlib.sha256(
        ("a" * 64 + "\n" + "b" * 64 + "\n").encode()).hexdigest()
    same = averaged({"replicates": {"results": [{"provenance": a}, {"provenance": a}]}})
    assert same["input_sha256"] == "a" * 64           # two sheets of one workbook
    assert averaged({"replicates": {"results": [{"provenance": a}, {}]}}) is None


@pytest.mark.parametrize("name", ["hp-t11-premium-reformate.txt", "hp-t22-premium-alkylate.xlsx"])
def test_example_runs_keep_to_the_lab_marker_times(name, library):
    # The lab's marker table holds the generator's n-alkane times (its alkane standard); the
    # demo runs warned "n-alkane marker C9/C12 has no peak" when their n-alkanes were missing,
    # drifted or merged off those times.
    from dha.pipeline import process_file
    from dha.settings import load_settings

    settings = load_settings(EXAMPLES / "harbour-point-lab.toml")
    for result in process_file(EXAMPLES / name, settings, library, spec=""):
        markers = [w for w in result["warnings"] if "marker" in w and "no peak" in w]
        assert not markers, markers
        names = {c["name"] for c in result["components"]}
        assert {"n-nonane", "n-decane", "n-dodecane"} <= names
