"""PDF certificate draft: write results, read the PDF text back (pypdf), check what a chemist and
a client must find in it.

Reports are tested by reading them back: page 1 marks the draft, identifies the sample and the
lab, gives method and instrument in full, the reference temperature, the standard method each
calculated property stands in for, the specification verdicts and the responsibility text
(common trade practice: drafts until released, estimates are not test results, petrol is
flammable, benzene is carcinogenic). No settings syntax is printed.
"""
from __future__ import annotations

import copy
import json
import re
from pathlib import Path

import pytest

from dha.errors import InputError
from dha.report import plain_words
from dha.report.pdf import certificate_number, write_pdf

pypdf = pytest.importorskip("pypdf")  # in the project's test extras

FIXTURE = Path(__file__).parent / "data" / "sample_result.json"
LONG_METHOD = ("petrol detailed hydrocarbons on 100 m x 0.25 mm x 0.5 um dimethylpolysiloxane, "
               "35 C held 15 min, 2 C/min to 200 C, split 150:1, helium 1.0 mL/min constant flow, "
               "FID 300 C, calibration sequence DHA-CAL-7 of the alkane standard C4-C13")


@pytest.fixture(scope="module")
def result() -> dict:
    res = json.loads(FIXTURE.read_text(encoding="utf-8"))
    res["sample"]["method"] = LONG_METHOD
    res["sample"]["notes"] = ["# blend recipe B-0412 for tank T-14"]
    res["settings"]["lab"] = {"name": "Harbour Point Refinery - QC Laboratory 2",
                              "address": "1 Quay Road, Harbour Point",
                              "accreditation": "ISO/IEC 17025, invented no. HP-0042"}
    res["settings"].setdefault("report", {})["certificate_number"] = "HP2/{date}/{tank}"
    res["warnings"] = list(res["warnings"]) + [
        "isothermal hold inferred from the n-alkanes: hold-up time 4.00 min; set [identify] "
        "isothermal_until_min and holdup_time_min to the method's",
        "oxygenate(s) outside identify.expected_oxygenates matched by retention index only"]
    res["properties"]["rvp_psi"] = 9.19
    res["properties"]["vli"] = 908.0
    res["checks"].append({"spec": "run quality", "property": "identification", "limit": None,
                          "kind": "min", "value": 0.71, "verdict": "marginal",
                          "reasons": ["the n-alkane markers were found automatically: check "
                                      "peaks at 34.77 and 45.76 min"]})
    res["identification"] = {"peaks_to_review": [
        {"rt_min": 34.772, "name": "n-octane", "group": "n_paraffins", "mass_pct": 0.4,
         "confidence": 0.52, "reason": "marker chosen automatically"}]}
    res["octane_contributions"] = [
        {"group": "aromatics", "carbon_number": 7, "ron": 30.0, "mon": 25.0},
        {"group": "isoparaffins", "carbon_number": 5, "ron": 66.4, "mon": 60.3}]
    res["octane_explained"] = {"method": "Shapley attribution over components", "components": [
        {"name": "n-heptane", "vol_pct": 2.0, "ron": -1.1, "mon": -0.9}],
        "classes": [{"class": "n-paraffins", "ron": -2.0, "mon": -1.5}]}
    return res


def _read(path: Path) -> list[str]:
    return [" ".join(p.extract_text().split()) for p in pypdf.PdfReader(path).pages]


@pytest.fixture(scope="module")
def pages(result, tmp_path_factory) -> list[str]:
    path = write_pdf(result, tmp_path_factory.mktemp("pdf") / "out" / "T-14.pdf")
    assert path.is_file() and path.read_bytes()[:5] == b"%PDF-"
    return _read(path)


def test_page_one_is_the_certificate_face(pages, result):
    p1 = pages[0]
    assert "DRAFT — not released" in p1
    assert result["sample"]["id"] in p1
    assert result["library"]["sha256"] in p1 and result["library"]["version"] in p1
    assert "en228-e10-summer" in p1
    # lab identity from the settings, certificate number with its placeholders filled
    assert "Harbour Point Refinery - QC Laboratory 2" in p1 and "HP-0042" in p1
    assert "1 Quay Road, Harbour Point" in p1
    assert "Certificate no.: HP2/20260611/T-14" in p1
    # verdicts: DVPE 63.4 kPa > 60 + 2u fails; RON and MON lie within U of their limits
    assert "FAIL" in p1 and p1.count("within uncertainty of the limit") >= 2
    for phrase in ("carcinogen", "highly flammable", "estimates", "authorised person",
                   "reviewed by", "released by", "date"):
        assert phrase in p1, phrase


def test_method_and_instrument_in_full(pages, result):
    p1 = pages[0]
    assert LONG_METHOD in p1                      # wrapped, never shortened
    assert result["sample"]["instrument"] in p1
    assert "…" not in " ".join(pages)


def test_reference_temperature_and_standard_methods(pages):
    p1 = pages[0]
    assert "15 °C for densities and volume %" in p1
    assert "density at 15 °C" in p1 and "volume % at 15 °C" in p1
    # the standard test each calculated property stands in for (EN ISO 5164/5163 engine
    # ratings, EN 13016-1 DVPE, EN ISO 12185 density, EN ISO 3405 distillation)
    for std in ("EN ISO 5164", "EN ISO 5163", "EN 13016-1", "EN ISO 12185", "EN ISO 3405"):
        assert std in p1, std
    # RVP and VLI are among the calculated properties on page 1
    assert "RVP (DVPE expressed in psi)" in p1 and "vapour lock index" in p1


def test_no_settings_syntax_in_the_pdf(pages):
    text = " ".join(pages)
    # no settings section such as "[identify]" (units in brackets, "RT [min]", are fine)
    assert not re.search(r"\[(reader|identify|quantify|octane|volatility|report|lab|batch)\]",
                         text)
    for key in ("isothermal_until_min", "holdup_time_min", "expected_oxygenates",
                "identify.", "ri_tolerance", "trend_quantities"):
        assert key not in text, key
    # the warning is there, in words
    assert "the end of the method's isothermal hold" in text
    assert "the list of oxygenates the samples may hold" in text


def test_settings_dump_only_outside_the_pdf(pages, result):
    text = " ".join(pages)
    assert "Settings used" not in text
    assert "primary_alcohol_oxygen_ecn" not in text and "primary alcohol oxygen ecn" not in text


def test_identification_check_and_mass_balance_in_words(pages, result):
    p1 = pages[0]
    assert "Identification check: marginal (score 0.71 of 1)" in p1
    assert "markers were found automatically" in p1
    mb = result["mass_balance"]["peaks"]
    assert f"{mb['total']} peaks in the file" in p1
    assert "see the import log" in p1


def test_trade_names_beside_iupac_names(pages):
    assert "ethyl tert-butyl ether (ETBE)" in " ".join(pages[1:])


def test_octane_contributions_and_peaks_to_review_shown(pages):
    rest = " ".join(pages[1:])
    assert "What makes up the calculated octane numbers" in rest
    assert "Shapley attribution over components" in rest
    assert "n-heptane" in rest
    assert "Peaks to review (1" in rest and "marker chosen automatically" in rest


def test_every_page_has_footer(pages, result):
    n = len(pages)
    for i, text in enumerate(pages, start=1):
        assert f"page {i} of {n}" in text
        assert result["sample"]["id"] in text


def test_all_components_and_logs_listed(pages, result):
    text = " ".join(pages[1:])
    assert "Components (49 rows" in text
    for comp in result["components"]:
        assert comp["name"] in text, comp["name"]
    assert "Import log (5 rows" in text and f"Warnings ({len(result['warnings'])})" in text


def test_composition_table_is_labelled_and_comment_lines_are_notes(result, tmp_path):
    res = copy.deepcopy(result)
    res["mass_balance"] = {"basis": "vol_pct", "rows": {"in_library": 48, "stereo_split": 0,
                                                        "not_in_library": 1, "total": 49},
                           "amount_share_pct": {"not_in_library": 0.4},
                           "sum_before_normalisation": 99.6}
    for c in res["components"]:
        c["rt_min"] = None
    text = _read(write_pdf(res, tmp_path / "c.pdf"))
    assert "COMPOSITION TABLE" in text[0]
    assert "49 rows in the composition table" in text[0] and "1 not in the library" in text[0]
    assert "Composition from the composition table" in text[0]
    assert "Composition (from the DHA)" not in text[0]
    # the input's comment line is shown as a note of the file header, without its "#"
    assert "blend recipe B-0412 for tank T-14" in text[0]
    assert "# blend recipe" not in " ".join(text)


def _many_components(result: dict, n: int) -> dict:
    big = copy.deepcopy(result)
    base = result["components"]
    big["components"] = []
    for i in range(n):
        comp = dict(base[i % len(base)])
        comp["mass_pct"] = 100.0 / (i + 1)
        if i % 7 == 0:
            comp["name"] = (f"peak {i + 1}: an invented component name far too long for its "
                            "column, 2,2,3,3,4-pentamethylhexane-like")
        big["components"].append(comp)
    return big


def test_600_components_shortened_list_points_to_the_workbook(result, tmp_path):
    big = _many_components(result, 600)
    big["settings"]["report"]["pdf_component_rows"] = 60
    text = _read(write_pdf(big, tmp_path / "big.pdf"))
    listing = " ".join(text)
    assert "Components (600 rows; largest first, the 60 largest shown" in listing
    assert "540 smaller components" in listing and "sheet Components" in listing
    assert "peak 1: an invented component name far too long for its column" in listing
    assert f"page {len(text)} of {len(text)}" in text[-1]


def test_all_components_listed_when_asked(result, tmp_path):
    # 250 rows run over 3 pages or more (about 85 rows a page); enough to see the header repeat
    big = _many_components(result, 250)
    big["settings"]["report"]["pdf_component_rows"] = 0
    text = _read(write_pdf(big, tmp_path / "all.pdf"))
    listing = " ".join(text)
    assert "Components (250 rows; largest first)" in listing
    assert "peak 246: an invented component name" in listing      # long names wrap, in full
    # the header repeats on every page the listing runs over
    assert sum("RT [min]" in t for t in text) >= 3


def test_certificate_number_empty_pattern_gives_a_blank_field():
    assert certificate_number({}) == ""
    assert certificate_number({"settings": {"report": {"certificate_number": "X-{nope}"}}}) == "X-"


def test_plain_words_leaves_no_settings_syntax():
    text = plain_words("set [identify] markers = {5 = 7.0} and identify.ri_tolerance")
    assert "[" not in text.replace("{", "") and "identify." not in text


def test_not_a_dict_is_an_input_error(tmp_path):
    with pytest.raises(InputError, match="dict"):
        write_pdf("no result", tmp_path / "x.pdf")


def test_empty_result_still_gives_the_face_and_the_skeleton(tmp_path):
    text = _read(write_pdf({}, tmp_path / "empty.pdf"))
    assert len(text) >= 2
    assert "DRAFT — not released" in text[0] and "carcinogen" in text[0]
    assert "no carbon-number data" in " ".join(text[1:])


@pytest.mark.parametrize("n_warnings,roomy", [(3, True), (25, True), (3, False)])
def test_points_to_check_stay_on_page_one_and_traceability_is_not_alone(result, tmp_path,
                                                                         n_warnings, roomy):
    # A certificate face that carries over onto the next page is not a face (common practice,
    # no source): the points to check are cut to the room left on page 1, the rest named by
    # count; the traceability hashes come before the logs, never alone on a last page.
    res = copy.deepcopy(result)
    if roomy:       # a short method and no identification reasons: room for some points
        res["sample"]["method"] = "DHA 100 m"
        res["sample"]["notes"] = []
        res["checks"] = [c for c in res["checks"] if c["property"] != "identification"]
    res["warnings"] = [f"point number {i}: peak row {100 + i} at {20 + i * 0.7:.3f} min co-elutes "
                       "with a neighbour on this phase and was not split; check its area"
                       for i in range(n_warnings)]
    pages = _read(write_pdf(res, tmp_path / "many.pdf"))
    assert f"Points to check ({n_warnings}" in pages[0]
    on_face = [i for i in range(n_warnings) if f"point number {i}:" in pages[0]]
    assert on_face == list(range(len(on_face)))                  # the first ones, in order
    assert bool(on_face) == roomy
    if 0 < len(on_face) < n_warnings:
        assert f"and {n_warnings - len(on_face)} more" in pages[0]
    if not on_face:
        assert "see the list of warnings after the components" in pages[0]
    assert "Points to check" not in pages[1] and "point number" not in pages[1]
    rest = " ".join(pages[1:])
    assert all(f"point number {i}:" in rest for i in range(n_warnings))  # the full list
    trace = [p for p in pages if "Traceability" in p]
    assert len(trace) == 1 and "Import log" in " ".join(pages[pages.index(trace[0]):])
    assert rest.index("Traceability") < rest.index("Import log")
