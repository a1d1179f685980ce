"""Loader, merging and checks of dha.library on small folders written in tmp_path.

Each case copies the shipped library, breaks one thing and expects a problem that names the
file, the spreadsheet row (header = row 1) and the column.
"""
from __future__ import annotations

import csv
import shutil
from pathlib import Path

import pytest

from dha.errors import LibraryError
from dha.library import (
    SHIPPED_FOLDER,
    cas_is_valid,
    check_library,
    is_hill_order,
    load_library,
    molar_mass_g_mol,
    parse_formula,
    read_library,
)

HEPTANE = "n-heptane"
TOLUENE = "toluene"


# ---- helpers -----------------------------------------------------------------------------


def copy_library(dest: Path) -> Path:
    """A copy of the shipped library files (data only) in ``dest``."""
    shutil.copytree(SHIPPED_FOLDER, dest, ignore=shutil.ignore_patterns("*.py", "__pycache__"))
    return dest


def read_rows(path: Path) -> tuple[list[str], list[dict[str, str]]]:
    with path.open(newline="", encoding="utf-8") as fh:
        reader = csv.DictReader(fh)
        return list(reader.fieldnames), list(reader)


def write_rows(path: Path, columns: list[str], rows: list[dict[str, str]]) -> None:
    with path.open("w", newline="", encoding="utf-8") as fh:
        out = csv.DictWriter(fh, fieldnames=columns, lineterminator="\n")
        out.writeheader()
        out.writerows({c: r.get(c, "") for c in columns} for r in rows)


def edit_cell(folder: Path, name: str, column: str, value: str,
              file: str = "components.csv") -> int:
    """Set one cell of the row of component ``name``; returns its spreadsheet row number."""
    columns, rows = read_rows(folder / file)
    for i, row in enumerate(rows):
        if row["name"] == name:
            row[column] = value
            write_rows(folder / file, columns, rows)
            return i + 2  # header is row 1
    raise KeyError(name)


def only(problems, column: str):
    hits = [p for p in problems if p.column == column]
    assert hits, f"no problem in column {column}: {[str(p) for p in problems]}"
    return hits


@pytest.fixture
def folder(tmp_path: Path) -> Path:
    return copy_library(tmp_path / "lib")


# ---- the shipped library -----------------------------------------------------------------


def test_shipped_library_is_sound():
    # the shipped data must pass every check of this module
    assert [str(p) for p in check_library(SHIPPED_FOLDER)] == []


def test_shipped_library_loads_with_types():
    lib = load_library()
    assert lib.problems == ()
    comps = lib.components
    assert comps.index.name == "name" and comps.index.is_unique
    assert str(comps["carbon_number"].dtype) == "int64"
    for col in ("molar_mass_g_mol", "density_15c_kg_m3", "ron", "retention_index"):
        assert comps[col].dtype.kind == "f", col
    # n-heptane: C7H16 (IUPAC name; carbon number from the formula)
    assert comps.loc[HEPTANE, "carbon_number"] == 7
    assert comps.loc[HEPTANE, "formula"] == "C7H16"
    assert set(lib.vapour_pressure.index) == set(comps.index)
    assert lib.folders == (SHIPPED_FOLDER.resolve(),)


def test_find_by_name_synonym_cas():
    lib = load_library()
    # CAS 108-88-3 is toluene (CAS Common Chemistry, https://commonchemistry.cas.org/)
    assert lib.find("108-88-3") == TOLUENE
    assert lib.find("  TOLUENE ") == TOLUENE
    # isooctane is the trade name of 2,2,4-trimethylpentane (ASTM D2699 reference fuel)
    assert lib.find("Isooctane") == "2,2,4-trimethylpentane"
    assert lib.find("no such component") is None
    assert lib.find(None) is None
    table = lib.lookup_table()
    assert table["108-88-3"] == TOLUENE
    for name in lib.components.index:
        assert table[name] == name


def test_unifac_groups_parsed():
    lib = load_library()
    # n-heptane = 2 CH3 + 5 CH2 (original UNIFAC subgroups 1 and 2; Hansen et al. 1991)
    assert lib.unifac_groups[HEPTANE] == {1: 2, 2: 5}
    # toluene = 5 ACH + 1 ACCH3 (subgroups 9 and 11; Hansen et al. 1991)
    assert lib.unifac_groups[TOLUENE] == {9: 5, 11: 1}


def test_psat_kpa_series():
    lib = load_library()
    p = lib.psat_kpa(310.93)
    assert list(p.index) == list(lib.vapour_pressure.index)
    # n-heptane at 37.8 °C: 11.16 kPa (CoolProp 8.0.0 reference EOS,
    # saturated pressure at 310.93 K); 1 % tolerance
    assert p[HEPTANE] == pytest.approx(11.16, rel=0.01)


def test_component_values_carry_sources():
    lib = load_library()
    entry = lib.component("isooctane")
    assert entry["name"]["value"] == "2,2,4-trimethylpentane"
    assert entry["density_15c_kg_m3"]["source"]
    assert entry["density_15c_kg_m3"]["cite"]
    assert entry["psat_37_8c_kpa"]["value"] > 0
    with pytest.raises(LibraryError, match="not in the library"):
        lib.component("isoocatne")


# ---- small parsers -----------------------------------------------------------------------


def test_cas_check_digit():
    # check-digit rule and the example 7732-18-5 (water) from CAS,
    # https://www.cas.org/support/documentation/chemical-substances/checkdig
    assert cas_is_valid("7732-18-5")
    assert not cas_is_valid("7732-18-4")
    # 71-43-2 benzene, 64-17-5 ethanol (CAS Common Chemistry)
    assert cas_is_valid("71-43-2") and cas_is_valid("64-17-5")
    assert not cas_is_valid("71-43-3")
    assert not cas_is_valid("71432")


def test_formula_and_molar_mass():
    assert parse_formula("C2H6O") == {"C": 2, "H": 6, "O": 1}
    assert parse_formula("c8h18") is None
    assert is_hill_order("C2H6O") and not is_hill_order("H6C2O") and not is_hill_order("C1H4")
    # ethanol C2H6O: 46.069 g/mol with IUPAC 2021 conventional atomic weights
    # (C 12.011, H 1.008, O 15.999; Pure Appl. Chem. 94 (2022) 573)
    assert molar_mass_g_mol("C2H6O") == pytest.approx(46.069, abs=1e-3)


# ---- one broken thing per case -----------------------------------------------------------


def test_bad_cas_check_digit(folder):
    # 142-82-5 is n-heptane (CAS Common Chemistry); ...-6 fails the CAS check-digit rule
    row = edit_cell(folder, HEPTANE, "cas", "142-82-6")
    problems = only(check_library(folder), "cas")
    assert any(p.row == row and p.file.endswith("components.csv") and "check digit" in p.message
               for p in problems)


def test_formula_molar_mass_mismatch(folder):
    # C7H16 is 100.205 g/mol (IUPAC atomic weights); 100.5 is off by more than 0.01
    row = edit_cell(folder, HEPTANE, "molar_mass_g_mol", "100.5")
    problems = only(check_library(folder), "molar_mass_g_mol")
    assert problems[0].row == row and "100.205" in problems[0].message


def test_carbon_number_must_match_formula(folder):
    row = edit_cell(folder, HEPTANE, "carbon_number", "8")
    problems = only(check_library(folder), "carbon_number")
    assert problems[0].row == row


def test_missing_column_is_structural(folder):
    columns, rows = read_rows(folder / "components.csv")
    columns.remove("density_source")
    write_rows(folder / "components.csv", columns, rows)
    with pytest.raises(LibraryError, match=r"components\.csv.*density_source"):
        read_library(folder)
    problems = check_library(folder)
    assert problems[0].row == 1 and problems[0].column == "density_source"
    assert "components.csv:1:density_source" in str(problems[0])


def test_missing_file_is_structural(folder):
    (folder / "vapour_pressure.csv").unlink()
    with pytest.raises(LibraryError, match=r"vapour_pressure\.csv.*required file missing"):
        read_library(folder)


def test_unparsable_number_is_structural(folder):
    row = edit_cell(folder, TOLUENE, "density_15c_kg_m3", "0,8669")
    with pytest.raises(LibraryError) as info:
        read_library(folder)
    assert f"components.csv:{row}:density_15c_kg_m3" in str(info.value)


def test_unresolved_source_key(folder):
    row = edit_cell(folder, HEPTANE, "density_source", "no-such-reference")
    problems = only(check_library(folder), "density_source")
    assert problems[0].row == row and "references.toml" in problems[0].message
    # estimated:<key> must name a key of references.toml too
    edit_cell(folder, HEPTANE, "density_source", "estimated:no-such-method")
    assert only(check_library(folder), "density_source")


def test_duplicate_synonym(folder):
    columns, rows = read_rows(folder / "components.csv")
    donor = next(r for r in rows if r["synonyms"].strip())
    synonym = donor["synonyms"].split(";")[0].strip()
    for i, row in enumerate(rows):
        if row["name"] != donor["name"]:
            row["synonyms"] = (row["synonyms"] + ";" if row["synonyms"] else "") + synonym.upper()
            target_row = i + 2
            break
    write_rows(folder / "components.csv", columns, rows)
    problems = only(check_library(folder), "synonyms")
    assert problems[0].row == target_row and donor["name"] in problems[0].message


def test_synonym_equal_to_a_cas_number(folder):
    row = edit_cell(folder, HEPTANE, "synonyms", "108-88-3")  # toluene's CAS
    assert only(check_library(folder), "synonyms")[0].row == row


def test_group_formula_inconsistency(folder):
    # toluene C7H8 is not CnH2n+2, so it cannot be an n-paraffin (definition of alkanes)
    row = edit_cell(folder, TOLUENE, "group", "n_paraffins")
    edit_cell(folder, TOLUENE, "subgroup", "alkane")
    problems = check_library(folder)
    assert any(p.row == row and p.column == "formula" and "CnH2n+2" in p.message
               for p in problems)


def test_oxygen_needs_oxygenate_group(folder):
    edit_cell(folder, HEPTANE, "formula", "C7H16O")
    problems = check_library(folder)
    assert any(p.column == "group" and "oxygen" in p.message for p in problems)


def test_value_out_of_range(folder):
    row = edit_cell(folder, TOLUENE, "density_15c_kg_m3", "1866.9")  # g/L typed as kg/m3 * 2
    problems = only(check_library(folder), "density_15c_kg_m3")
    assert problems[0].row == row and "range" in problems[0].message


def test_vapour_pressure_range_must_hold_37_8_c(folder):
    row = edit_cell(folder, TOLUENE, "tmin_k", "320", file="vapour_pressure.csv")
    problems = only(check_library(folder), "tmin_k")
    assert problems[0].row == row and problems[0].file.endswith("vapour_pressure.csv")


def test_coelution_name_must_exist(folder):
    columns, rows = read_rows(folder / "coelution.csv")
    rows.append({"name_a": TOLUENE, "name_b": "2,3,3-trimethylpentan", "share_a": "0.5",
                 "source": "from-memory", "note": "typo"})
    write_rows(folder / "coelution.csv", columns, rows)
    problems = only(check_library(folder), "name_b")
    assert problems[-1].row == len(rows) + 1 and "not a component" in problems[-1].message


def test_reference_needs_licence(folder):
    text = (folder / "references.toml").read_text(encoding="utf-8")
    (folder / "references.toml").write_text(
        text + '\n[lab-notebook]\ncite = "Lab notebook 7"\nurl = "file:nb7"\n', encoding="utf-8")
    problems = check_library(folder)
    assert any(p.file.endswith("references.toml") and p.column == "lab-notebook"
               and "licence" in p.message for p in problems)


# ---- checksum ----------------------------------------------------------------------------


def test_checksum_stable_and_sensitive(folder, tmp_path):
    first = read_library(folder).sha256
    assert read_library(folder).sha256 == first
    assert load_library().sha256 == load_library().sha256
    # the copy holds the same bytes as the shipped files: same checksum
    assert first == load_library().sha256
    other = copy_library(tmp_path / "other")
    data = (other / "components.csv").read_bytes()
    (other / "components.csv").write_bytes(data.replace(b"C7H16", b"C7H18", 1))  # one byte
    assert read_library(other).sha256 != first
    # README.md is documentation, not data: it does not count
    (folder / "README.md").write_text("changed", encoding="utf-8")
    assert read_library(folder).sha256 == first


# ---- overlay -----------------------------------------------------------------------------


def _split_off(base: Path, overlay: Path, name: str) -> None:
    """Move component ``name`` (its components and vapour-pressure rows) from base to overlay."""
    overlay.mkdir()
    for file in ("components.csv", "vapour_pressure.csv"):
        columns, rows = read_rows(base / file)
        write_rows(base / file, columns, [r for r in rows if r["name"] != name])
        write_rows(overlay / file, columns, [r for r in rows if r["name"] == name])
    columns, rows = read_rows(base / "coelution.csv")
    write_rows(base / "coelution.csv", columns,
               [r for r in rows if name not in (r["name_a"], r["name_b"])])


def test_overlay_adds_and_overrides(folder, tmp_path):
    overlay = tmp_path / "lab"
    _split_off(folder, overlay, TOLUENE)
    assert read_library(folder).find(TOLUENE) is None
    # override one value of n-heptane; blank cells keep the shipped values, '-' clears one
    columns, rows = read_rows(overlay / "components.csv")
    rows.append({"name": HEPTANE, "density_15c_kg_m3": "688.5", "ron": "-", "ron_source": "-"})
    write_rows(overlay / "components.csv", columns, rows)
    (overlay / "library.toml").write_text('name = "northfield-lab"\nversion = "2026.11.3"\n',
                                          encoding="utf-8")
    base = read_library(folder)
    lib = read_library([folder, overlay])
    assert lib.find(TOLUENE) == TOLUENE
    assert lib.components.loc[HEPTANE, "density_15c_kg_m3"] == 688.5
    assert lib.components.loc[HEPTANE, "molar_mass_g_mol"] == \
        base.components.loc[HEPTANE, "molar_mass_g_mol"]
    assert lib.components.loc[HEPTANE, "formula"] == "C7H16"
    assert lib.components.loc[HEPTANE, "ron"] != lib.components.loc[HEPTANE, "ron"]  # NaN
    assert lib.version == f"{base.version}+northfield-lab/2026.11.3"
    assert lib.sha256 != base.sha256
    # the overlay brings no problem of its own (problems of the shipped rows are
    # test_shipped_library_is_sound's business)
    assert [str(p) for p in check_library(lib) if str(overlay) in p.file] == []
    assert [str(p) for p in check_library(lib)] == [str(p) for p in check_library(base)
                                                    if TOLUENE not in p.message]


def test_overlay_problem_names_the_overlay_row(tmp_path):
    overlay = tmp_path / "lab"
    overlay.mkdir()
    write_rows(overlay / "components.csv", ["name", "cas"],
               [{"name": TOLUENE, "cas": "108-88-4"}])
    problems = only(check_library([SHIPPED_FOLDER, overlay]), "cas")
    assert problems[0].file == str(overlay / "components.csv") and problems[0].row == 2
    # loading still works (the run can report it); the problem is kept and logged
    assert any(str(p).startswith(f"{overlay / 'components.csv'}:2:cas:")
               for p in load_library(overlay).problems)


def test_overlay_unknown_column_is_refused(tmp_path):
    overlay = tmp_path / "lab"
    overlay.mkdir()
    write_rows(overlay / "components.csv", ["name", "densty_15c_kg_m3"],
               [{"name": TOLUENE, "densty_15c_kg_m3": "867"}])
    with pytest.raises(LibraryError, match="densty_15c_kg_m3"):
        read_library([SHIPPED_FOLDER, overlay])


def test_load_library_overlay_cached(tmp_path):
    overlay = tmp_path / "lab"
    overlay.mkdir()
    write_rows(overlay / "components.csv", ["name", "density_15c_kg_m3"],
               [{"name": TOLUENE, "density_15c_kg_m3": "866.0"}])
    lib = load_library(overlay)
    assert load_library(str(overlay)) is lib
    assert lib.components.loc[TOLUENE, "density_15c_kg_m3"] == 866.0
    assert lib.version == f"{load_library().version}+lab"
    assert lib.folders == (SHIPPED_FOLDER.resolve(), overlay.resolve())
    with pytest.raises(LibraryError, match="not found"):
        load_library(tmp_path / "missing")
