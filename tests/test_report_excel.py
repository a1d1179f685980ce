"""Excel report: write the sample result, read the workbook back, compare with the dict.

Reports are tested by reading them back (STYLE.md §14). The fixture tests/data/sample_result.json
is an invented scenario (sample "T-14 summer blend", Harbour Point refinery, QC lab 2) with the
keys of the dha-result/1 schema "dha-result/1"; its checks were made by dha.specs.check.
"""
from __future__ import annotations

import copy
import json
from pathlib import Path

import openpyxl
import pandas as pd
import pytest

from dha.errors import InputError
from dha.report import GROUP_KEYS, RESPONSIBILITY_TEXT, carbon_label, settings_digest
from dha.report.excel import SHEETS, sheet_names, write_xlsx

FIXTURE = Path(__file__).parent / "data" / "sample_result.json"

# Units a numeric header may carry (the dha-result/1 schema units; the brief's list for the reports).
UNIT_MARKERS = ("mass %", "% v/v", "mol %", "[min]", "[-]", "[CDS units]", "[unit]", "kPa",
                "°C", "kg/m³", "MJ/kg")


@pytest.fixture(scope="module")
def result() -> dict:
    return json.loads(FIXTURE.read_text(encoding="utf-8"))


@pytest.fixture(scope="module")
def workbook_path(result, tmp_path_factory) -> Path:
    return write_xlsx(result, tmp_path_factory.mktemp("xlsx") / "sub" / "T-14.xlsx")


@pytest.fixture(scope="module")
def wb(workbook_path):
    return openpyxl.load_workbook(workbook_path)


def test_fixture_is_a_contract_result(result):
    # Every key the dha-result/1 schema lists for "dha-result/1" is present; group totals sum to 100
    # per basis ("each sums with the others to 100", the dha-result/1 schema).
    for key in ("schema", "tool", "sample", "library", "settings", "totals", "by_carbon_number",
                "benzene", "oxygen_mass_pct", "oxygenates", "properties", "uncertainty",
                "checks", "components", "import_log", "warnings"):
        assert key in result, key
    assert result["schema"] == "dha-result/1"
    for basis in ("mass_pct", "vol_pct", "mol_pct"):
        assert set(result["totals"][basis]) == set(GROUP_KEYS)
        assert sum(result["totals"][basis].values()) == pytest.approx(100.0, abs=1e-3)


def test_sheets_present_in_order(wb, workbook_path):
    assert workbook_path.is_file()
    assert wb.sheetnames == list(SHEETS)


def test_group_totals_read_back(workbook_path, result):
    groups = pd.read_excel(workbook_path, sheet_name="Groups", index_col=0, nrows=8)
    for basis, header in (("mass_pct", "mass %"), ("vol_pct", "% v/v"), ("mol_pct", "mol %")):
        for g in GROUP_KEYS:
            assert groups.loc[g, header] == pytest.approx(result["totals"][basis][g], abs=1e-12)
        assert groups.loc["total", header] == pytest.approx(100.0, abs=1e-3)


def test_aromatics_detail_read_back(wb, result):
    ws = wb["Groups"]
    rows = {r[0]: r for r in ws.iter_rows(min_row=11, values_only=True) if r[0]}
    assert rows["toluene"][3] == pytest.approx(result["aromatics_detail"]["toluene"]["vol_pct"])


def test_components_read_back(workbook_path, result):
    comps = pd.read_excel(workbook_path, sheet_name="Components")
    assert len(comps) == len(result["components"]) == 49
    assert list(comps["name"]) == [c["name"] for c in result["components"]]
    assert comps["mass %"].tolist() == pytest.approx([c["mass_pct"] for c in result["components"]])
    assert comps["retention time [min]"].tolist() == pytest.approx(
        [c["rt_min"] for c in result["components"]])
    # The five unidentified rows have no CAS number: empty cells, not the text "None".
    assert comps["CAS number"].isna().sum() == 5
    for header in ("mass %", "% v/v", "mol %", "area [CDS units]", "retention index [-]"):
        assert pd.api.types.is_float_dtype(comps[header]), header
    assert comps["mass %"].sum() == pytest.approx(100.0, abs=1e-3)


def test_numbers_are_stored_as_numbers(wb, result):
    ws = wb["Components"]
    header = [c.value for c in ws[1]]
    for name in ("mass %", "% v/v", "mol %", "retention time [min]", "carbon number"):
        col = header.index(name) + 1
        cells = [ws.cell(row=r, column=col) for r in range(2, ws.max_row + 1)]
        assert all(c.data_type == "n" and isinstance(c.value, (int, float)) for c in cells), name
        assert all(c.number_format != "General" for c in cells), name
    assert ws.freeze_panes == "A2"


def test_every_numeric_header_carries_a_unit(wb):
    # Brief: every numeric header carries its unit. A column is numeric when its data cells
    # are numbers; "#" and "carbon number"/"row in input" are counts without a unit.
    counts = {"#", "carbon number", "row in input", "carbon number (≤C3 holds C1-C3)"}
    for name in ("Groups", "Carbon number mass", "Carbon number volume", "Components",
                 "Oxygenates", "Properties", "Import log"):
        ws = wb[name]
        header = [c.value for c in ws[1]]
        for j, title in enumerate(header, start=1):
            values = [ws.cell(row=r, column=j).value for r in range(2, ws.max_row + 1)]
            numbers = [v for v in values if isinstance(v, (int, float)) and not isinstance(v, bool)]
            if numbers and len(numbers) >= len([v for v in values if v is not None]) / 2:
                assert title in counts or any(u in title for u in UNIT_MARKERS), (name, title)


def test_carbon_number_matrix_read_back(workbook_path, result):
    m = pd.read_excel(workbook_path, sheet_name="Carbon number volume", index_col=0)
    # labels as the PDF prints them: the lightest bucket holds C1-C3 (dha.groups)
    assert "C13+" in m.index and "≤C3" in m.index and "C3" not in m.index
    for entry in result["by_carbon_number"]:
        col = {"n_paraffins": "n-paraffins"}.get(entry["group"], entry["group"]) + " [% v/v]"
        cn = entry["carbon_number"]
        cell = m.loc[carbon_label(cn), col]
        assert cell == pytest.approx(entry["vol_pct"], abs=1e-12)
    # Column totals of the matrix equal the group totals (the matrix is a split of them).
    for g in GROUP_KEYS:
        col = {"n_paraffins": "n-paraffins"}.get(g, g) + " [% v/v]"
        assert m.loc["total", col] == pytest.approx(result["totals"]["vol_pct"][g], abs=1e-3)
    assert m.loc["total", "total [% v/v]"] == pytest.approx(100.0, abs=1e-3)


def test_properties_with_units_and_nulls(workbook_path, result):
    props = pd.read_excel(workbook_path, sheet_name="Properties", index_col=0)
    assert props.loc["dvpe_kpa", "unit"] == "kPa"
    assert props.loc["density_kg_m3", "unit"] == "kg/m³"
    assert props.loc["t50_c", "unit"] == "°C"
    assert props.loc["net_heat_mj_kg", "unit"] == "MJ/kg"
    assert props.loc["ron", "value [unit]"] == pytest.approx(result["properties"]["ron"])
    assert props.loc["ron", "standard uncertainty [unit]"] == pytest.approx(
        result["uncertainty"]["ron"])
    # Null values (no model yet) are empty cells with a pointer to the warnings.
    assert result["properties"]["fbp_c"] is None
    assert pd.isna(props.loc["fbp_c", "value [unit]"])
    assert "Warnings" in props.loc["fbp_c", "note"]


def test_summary_identifies_sample_library_and_checks(wb, result):
    ws = wb["Summary"]
    values = [c for row in ws.iter_rows(values_only=True) for c in row if c is not None]
    assert result["sample"]["id"] in values
    assert result["library"]["sha256"] in values
    assert settings_digest(result["settings"]) in values
    assert "FAIL" in values                           # DVPE 63.4 > 60 kPa by more than 2u
    assert values.count("within uncertainty of the limit") == 2   # RON and MON
    assert values.count("pass") == sum(c["verdict"] == "pass" for c in result["checks"])
    assert any("not checked" in str(v) for v in values)


def test_notes_carry_the_responsibility_text(wb):
    # common trade practice: drafts until released; calculated properties are estimates; benzene is a
    # human carcinogen; petrol is highly flammable.
    text = " ".join(str(c.value) for row in wb["Notes"].iter_rows() for c in row if c.value)
    for phrase in ("DRAFT", "authorised person", "estimates", "carcinogen", "highly flammable",
                   "Local regulations"):
        assert phrase in text
    assert len(RESPONSIBILITY_TEXT) == wb["Notes"].max_row - 1


def test_import_log_and_warnings(workbook_path, result):
    log = pd.read_excel(workbook_path, sheet_name="Import log")
    assert log["row in input"].tolist() == [e["row"] for e in result["import_log"]]
    warn = pd.read_excel(workbook_path, sheet_name="Warnings")
    assert warn["warning"].tolist() == result["warnings"]


def _cell_values(path: Path) -> dict:
    wb = openpyxl.load_workbook(path)
    return {ws.title: [tuple(r) for r in ws.iter_rows(values_only=True)] for ws in wb}


def test_content_is_deterministic(result, tmp_path):
    a = _cell_values(write_xlsx(result, tmp_path / "a.xlsx"))
    b = _cell_values(write_xlsx(copy.deepcopy(result), tmp_path / "b.xlsx"))
    assert a == b


def test_result_with_nulls_and_missing_optional_keys(result, tmp_path):
    # Properties may all be null while models are missing; optional keys may be absent.
    bare = copy.deepcopy(result)
    bare["properties"] = {k: None for k in bare["properties"]}
    bare["uncertainty"] = {k: None for k in bare["uncertainty"]}
    bare["components"][0]["mass_pct"] = float("nan")
    bare["oxygen_mass_pct"] = None
    for key in ("mass_balance", "generated_at", "aromatics_detail", "checks"):
        bare.pop(key, None)
    path = write_xlsx(bare, tmp_path / "bare.xlsx")
    props = pd.read_excel(path, sheet_name="Properties", index_col=0)
    assert props["value [unit]"].isna().all()
    comps = pd.read_excel(path, sheet_name="Components")
    assert pd.isna(comps.loc[0, "mass %"])


def test_not_a_dict_is_an_input_error(tmp_path):
    with pytest.raises(InputError, match="dict"):
        write_xlsx(["not", "a", "result"], tmp_path / "x.xlsx")


def test_empty_result_still_writes_every_sheet(tmp_path):
    # A result with none of the keys (e.g. a run that failed early) gives empty sheets, and
    # a group total of nothing is an empty cell, not 0.
    path = write_xlsx({}, tmp_path / "empty.xlsx")
    wb = openpyxl.load_workbook(path)
    assert wb.sheetnames == list(SHEETS)
    groups = pd.read_excel(path, sheet_name="Groups", index_col=0, nrows=8)
    assert groups.loc["total"][["mass %", "% v/v", "mol %"]].isna().all()


def test_distillation_curve_read_back(result, tmp_path):
    # The sheet must hold the curve of the result's volatility details, point for point.
    res = copy.deepcopy(result)
    curve = {"evaporated_vol_pct": [0.0, 10.0, 50.0, 90.0], "t_c": [35.2, 52.1, 98.7, 151.3]}
    res.setdefault("property_details", {})["volatility"] = {
        "curve": curve, "model": {"distillation": "Rayleigh batch distillation at 101.325 kPa"}}
    path = write_xlsx(res, tmp_path / "d.xlsx")
    sheet = pd.read_excel(path, sheet_name="Distillation")
    assert list(sheet.iloc[:, 0]) == curve["evaporated_vol_pct"]
    assert list(sheet.iloc[:, 1]) == curve["t_c"]
    assert "°C" in sheet.columns[1] and "% v/v" in sheet.columns[0]


def test_no_json_literals_in_any_cell(result, tmp_path):
    # Settings hold lists and tables (formats, markers); a person reads them as words, never as
    # JSON ("[]", "{}", '"json"'). Common practice, no source.
    res = copy.deepcopy(result)
    res["settings"].setdefault("identify", {})["markers"] = {"5": 7.0, "6": 12.25}
    res["settings"].setdefault("report", {})["formats"] = ["json", "xlsx"]
    res["settings"]["identify"]["expected_oxygenates"] = []
    path = write_xlsx(res, tmp_path / "j.xlsx")
    values = [c for _s, rows in _cell_values(path).items() for r in rows for c in r
              if isinstance(c, str)]
    for v in values:
        assert not (v.startswith(("[", "{")) and v.endswith(("]", "}"))), v
        assert not (v.startswith('"') and v.endswith('"')), v
    settings = pd.read_excel(path, sheet_name="Settings", index_col=0)
    assert settings.iloc[:, 0]["identify.markers"] == "5 = 7.0; 6 = 12.25"
    assert settings.iloc[:, 0]["report.formats"] == "json, xlsx"
    assert settings.iloc[:, 0]["identify.expected_oxygenates"] == "(none)"


def test_peaks_to_review_and_octane_sheets_when_present(result, tmp_path):
    res = copy.deepcopy(result)
    res["identification"] = {"peaks_to_review": [
        {"rt_min": 12.5, "name": "2-methylhexane", "group": "isoparaffins", "mass_pct": 1.2,
         "confidence": 0.41, "reason": "two library entries within the window"}]}
    res["checks"].append({"spec": "run quality", "property": "identification", "limit": None,
                          "kind": "min", "value": 0.62, "verdict": "marginal",
                          "reasons": ["markers found automatically"]})
    res["octane_contributions"] = [
        {"group": "aromatics", "carbon_number": 7, "ron": 30.0, "mon": 25.0},
        {"group": "isoparaffins", "carbon_number": 5, "ron": 66.4, "mon": 60.3}]
    res["octane_explained"] = {"method": "Shapley attribution", "components": [
        {"name": "n-heptane", "vol_pct": 2.0, "ron": -1.1, "mon": -0.9}],
        "classes": [{"class": "n-paraffins", "ron": -2.0, "mon": -1.5}]}
    path = write_xlsx(res, tmp_path / "p.xlsx")
    wb = openpyxl.load_workbook(path)
    assert wb.sheetnames == sheet_names(res)
    assert "Peaks to review" in wb.sheetnames and "Octane contributions" in wb.sheetnames
    review = [r for r in wb["Peaks to review"].iter_rows(values_only=True)]
    assert any("2-methylhexane" in r for r in review)
    assert any(r[0] == "Identification check: marginal" for r in review)
    octane = [r for r in wb["Octane contributions"].iter_rows(values_only=True)]
    total = [r for r in octane if r[0] == "total"][0]
    assert total[2] == pytest.approx(96.4) and total[3] == pytest.approx(85.3)
    assert any(r[0] == "n-heptane" for r in octane)
    # absent keys: no extra sheets
    assert "Peaks to review" not in sheet_names(result)
