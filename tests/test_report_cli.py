"""``dha report``: outputs, overwrite refusal, exit codes 0/1/2/3 (the dha-result/1 schema)."""
from __future__ import annotations

import json

import pytest
from click.testing import CliRunner

import dha.library
from dha.cli import cli
from test_quantify import tiny_library


@pytest.fixture
def runner(monkeypatch):
    # the stand-in library of test_quantify (values from chemicals/thermo/CoolProp)
    monkeypatch.setattr(dha.library, "load_library", lambda overlay=None: tiny_library())
    return CliRunner()


@pytest.fixture
def blend(tmp_path):
    # invented recipe; 5 % v/v benzene is far above the EN 228 limit of 1.0 % v/v (EN 228:2012+A1:2017)
    path = tmp_path / "blend_tk7.csv"
    path.write_text("component,vol_pct\nbenzene,5\ntoluene,30\nn-heptane,65\n", encoding="utf-8")
    return path


def test_report_writes_json_and_headline(runner, blend, tmp_path):
    out = tmp_path / "out"
    r = runner.invoke(cli, ["report", str(blend), "-o", str(out), "--format", "json", "--spec", ""])
    assert r.exit_code == 0, r.output
    data = json.loads((out / "blend_tk7.json").read_text(encoding="utf-8"))
    assert data["schema"] == "dha-result/1"
    assert data["benzene"]["vol_pct"] == pytest.approx(5.0)
    assert "blend_tk7.json" in r.output and "benzene 5.00 % v/v" in r.output


def test_missing_writer_is_a_warning_not_a_failure(runner, blend, tmp_path, monkeypatch):
    import dha.pipeline
    real = dha.pipeline.writers
    monkeypatch.setattr(dha.pipeline, "writers", lambda: {**real(), "pdf": None})
    r = runner.invoke(cli, ["report", str(blend), "-o", str(tmp_path), "--format", "json,pdf",
                            "--spec", ""])
    assert r.exit_code == 0, r.output
    data = json.loads((tmp_path / "blend_tk7.json").read_text(encoding="utf-8"))
    assert any("pdf output not written" in w for w in data["warnings"])
    assert not (tmp_path / "blend_tk7.pdf").exists()


def test_refuses_to_overwrite(runner, blend, tmp_path):
    args = ["report", str(blend), "-o", str(tmp_path), "--format", "json", "--spec", ""]
    assert runner.invoke(cli, args).exit_code == 0
    r = runner.invoke(cli, args)
    assert r.exit_code == 1
    assert "--overwrite" in r.output and len(r.output.strip().splitlines()) == 1
    assert runner.invoke(cli, args + ["--overwrite"]).exit_code == 0


def test_strict_exit_3_on_failed_check(runner, blend, tmp_path):
    args = ["report", str(blend), "-o", str(tmp_path), "--format", "json",
            "--spec", "en228-e10-summer"]
    r = runner.invoke(cli, args)
    assert r.exit_code == 0, r.output           # a failed spec is not an error without --strict
    data = json.loads((tmp_path / "blend_tk7.json").read_text(encoding="utf-8"))
    benz = [c for c in data["checks"] if c["property"] == "benzene_vol_pct"]
    assert benz and benz[0]["verdict"] == "fail"
    r = runner.invoke(cli, args + ["--overwrite", "--strict"])
    assert r.exit_code == 3


def test_bad_inputs_exit_1_one_line(runner, tmp_path):
    missing = tmp_path / "nope.csv"
    r = runner.invoke(cli, ["report", str(missing), "-o", str(tmp_path)])
    assert r.exit_code == 1 and "nope.csv" in r.output
    assert len(r.output.strip().splitlines()) == 1 and "Traceback" not in r.output
    bad = tmp_path / "recipe.csv"
    bad.write_text("component,mass_pct\ntoluene,abc\ntolune,-5\n", encoding="utf-8")
    r = runner.invoke(cli, ["report", str(bad), "-o", str(tmp_path), "--format", "json"])
    assert r.exit_code == 1 and "recipe.csv" in r.output
    assert len(r.output.strip().splitlines()) == 1 and "Traceback" not in r.output


def test_unknown_component_exit_0_with_suggestion(runner, tmp_path):
    # issue 12: a misspelt name is kept as an unidentified row, the suggestion in the import log
    recipe = tmp_path / "recipe.csv"
    recipe.write_text("component,mass_pct\ntoluene,50\ntolune,50\n", encoding="utf-8")
    r = runner.invoke(cli, ["report", str(recipe), "-o", str(tmp_path), "--format", "json"])
    assert r.exit_code == 0, r.output
    data = json.loads((tmp_path / "recipe.json").read_text(encoding="utf-8"))
    assert any("tolune" in e["reason"] and "toluene" in e["reason"] for e in data["import_log"])
    assert data["mass_balance"]["not_in_library_pct"]["mass_pct"] == pytest.approx(50.0)


def test_usage_errors_exit_2(runner, blend):
    assert runner.invoke(cli, ["report", str(blend), "--no-such-option"]).exit_code == 2
    assert runner.invoke(cli, ["report", str(blend), "--format", "docx"]).exit_code == 2
    assert runner.invoke(cli, ["report"]).exit_code == 2


def test_warnings_on_stderr_name_their_input(caplog):
    # With several inputs, a warning must say which file it belongs to (issue 14).
    import logging

    from dha.commands.report import warnings_name_input
    # a logger outside "dha": other tests in the same process may quieten the "dha" loggers
    log = logging.getLogger("test_report_cli.input_names")
    with caplog.at_level(logging.WARNING):
        with warnings_name_input("/lab/runs/tank-14 50%.csv"):
            log.warning("peak %d looks odd", 3)
        log.warning("after the file")
    assert caplog.messages == ["tank-14 50%.csv: peak 3 looks odd", "after the file"]
