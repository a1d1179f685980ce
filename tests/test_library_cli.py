"""`dha library check/show/export` through click's CliRunner."""
from __future__ import annotations

import csv
from pathlib import Path

import pandas as pd
from click.testing import CliRunner

from dha.cli import cli
from dha.library import load_library

CONTRACT_COLUMNS = ["name", "cas", "formula", "group", "carbon_number", "molar_mass_g_mol",
                    "density_15c_kg_m3", "boiling_point_c", "ron", "mon", "retention_index"]


def run(*args: str):
    return CliRunner().invoke(cli, list(args))


def test_check_shipped_library_is_sound():
    r = run("library", "check")
    assert r.exit_code == 0, r.output
    lib = load_library()
    assert lib.version in r.output and lib.sha256 in r.output
    assert f"components: {len(lib.components)}" in r.output
    assert "n_paraffins" in r.output


def test_check_broken_overlay_fails_with_location(tmp_path: Path):
    overlay = tmp_path / "lab"
    overlay.mkdir()
    # 108-88-4: wrong check digit for toluene's 108-88-3 (CAS check-digit rule)
    (overlay / "components.csv").write_text("name,cas\ntoluene,108-88-4\n", encoding="utf-8")
    r = run("library", "check", "--library", str(overlay))
    assert r.exit_code == 1
    assert f"{overlay / 'components.csv'}:2:cas:" in r.output
    assert "not sound" in r.output


def test_check_structural_problem(tmp_path: Path):
    overlay = tmp_path / "lab"
    overlay.mkdir()
    (overlay / "components.csv").write_text("name,density_15c_kg_m3\ntoluene,0,867\n",
                                            encoding="utf-8")
    r = run("library", "check", "--library", str(overlay))
    assert r.exit_code == 1
    assert "components.csv:2:" in r.output


def test_show_by_name_synonym_and_cas():
    for key in ("toluene", "Methylbenzene", "108-88-3"):
        r = run("library", "show", key)
        assert r.exit_code == 0, r.output
        assert "toluene" in r.output and "density_15c_kg_m3" in r.output
        assert "108-88-3" in r.output
    r = run("library", "show", "isooctane")
    assert "2,2,4-trimethylpentane" in r.output


def test_show_unknown_suggests():
    r = run("library", "show", "tolune")
    assert r.exit_code == 1
    assert "not in the library" in r.output and "toluene" in r.output


def test_export_columns_and_overwrite(tmp_path: Path):
    out = tmp_path / "lib.csv"
    r = run("library", "export", "-o", str(out))
    assert r.exit_code == 0, r.output
    table = pd.read_csv(out)
    assert list(table.columns[: len(CONTRACT_COLUMNS)]) == CONTRACT_COLUMNS
    lib = load_library()
    assert len(table) == len(lib.components)
    assert set(lib.components.columns) <= set(table.columns)
    assert "psat_37_8c_kpa" in table.columns
    before = out.read_bytes()
    r = run("library", "export", "-o", str(out))
    assert r.exit_code == 1 and "--overwrite" in r.output
    assert out.read_bytes() == before
    r = run("library", "export", "-o", str(out), "--overwrite")
    assert r.exit_code == 0


def test_export_with_overlay(tmp_path: Path):
    overlay = tmp_path / "lab"
    overlay.mkdir()
    with (overlay / "components.csv").open("w", newline="", encoding="utf-8") as fh:
        csv.writer(fh).writerows([["name", "density_15c_kg_m3"], ["toluene", "866.0"]])
    out = tmp_path / "lab.csv"
    r = run("library", "export", "-o", str(out), "--library", str(overlay))
    assert r.exit_code == 0, r.output
    table = pd.read_csv(out, index_col="name")
    assert table.loc["toluene", "density_15c_kg_m3"] == 866.0


def test_library_commands_have_examples():
    group = cli.commands["library"]
    for name, cmd in group.commands.items():
        assert "Example" in (cmd.help or ""), name
