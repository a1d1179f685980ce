"""Tests of dha.reader on the export corpus in tests/exports/ and on broken inputs.

The expected tables come from tests/exports/make_corpus.py, which writes every variant and its
truth from the same invented peak list (invented scenario: Harbour Point refinery, lab 2), so
they are independent of the reader. What is checked against outside conventions:
- retention times in seconds / 60 = minutes (SI definition of the minute);
- decimal comma and thousands separators as written in ISO 80000-1 (comma or point as decimal
  sign, digits grouped in threes);
- UTF-16 byte-order marks FE FF / FF FE and the UTF-8 BOM EF BB BF (Unicode Standard, ch. 23);
- Windows-1252 code points of µ (B5), · (B7), ° (B0), ë (EB), – (96) (the code page table);
- CAS registry numbers of the corpus components are those of the substances (from memory;
  the check digit of each is verified below by the CAS check-digit rule).
"""
from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from dha.errors import InputError, SettingsError
from dha.reader import COMPOSITION_COLUMNS, COMPOSITION_OPTIONAL, PEAK_COLUMNS, Run, read_input, read_text
from dha.settings import load_settings, merge_settings

EXPORTS = Path(__file__).parent / "exports"
EXPECTED = sorted(EXPORTS.glob("*.expected.json"))
COL_MAP = {"ri": "retention_index", "mass_pct": "cds_mass_pct"}


def _settings(extra: dict) -> dict:
    s = load_settings()
    extra = dict(extra)
    if extra.get("profile"):
        extra["profile"] = str(EXPORTS / extra["profile"])
    return merge_settings(s, {"reader": extra}) if extra else s


def test_corpus_is_big_enough():
    # the issue asks for at least 15 export variants
    assert len(EXPECTED) >= 15


@pytest.mark.parametrize("expected_file", EXPECTED, ids=lambda p: p.name.split(".")[0])
def test_corpus_variant(expected_file: Path):
    exp = json.loads(expected_file.read_text(encoding="utf-8"))
    runs = read_input(EXPORTS / exp["file"], _settings(exp["settings"]))
    assert len(runs) == len(exp["runs"])
    for run, want in zip(runs, exp["runs"]):
        assert isinstance(run, Run)
        assert run.injection == want["injection"]
        assert run.kind == want["kind"]
        assert run.basis == want["basis"]
        for key, value in want["sample"].items():
            assert run.sample.get(key) == value, key
        t = run.table
        rows = want["rows"]
        assert len(t) == len(rows)
        assert t["row"].tolist() == [r[0] for r in rows]
        if run.kind == "peaks":
            assert list(t.columns) == list(PEAK_COLUMNS)
            # rt in minutes: text value (divided by 60 where the file is in seconds)
            np.testing.assert_allclose(t["rt_min"].to_numpy(), [r[1] for r in rows], rtol=1e-12)
            # areas preserved exactly: the float of the decimal text written to the file
            assert t["area"].tolist() == [r[2] for r in rows]
            assert t["name"].tolist() == [r[3] for r in rows]
            assert t["rt_min"].is_monotonic_increasing
            for col, values in want["cols"].items():
                got = t[COL_MAP.get(col, col)].tolist()
                if col == "cas":
                    assert got == [v or None for v in values]
                else:
                    np.testing.assert_allclose(got, [float(v) for v in values], rtol=1e-12)
        else:
            assert list(t.columns) == list(COMPOSITION_COLUMNS) + [
                c for c in COMPOSITION_OPTIONAL if c in t.columns]
            assert t["component"].tolist() == [r[1] for r in rows]
            assert t["amount"].tolist() == [r[2] for r in rows]
        got_log = [(e["row"], e["action"]) for e in run.import_log]
        assert got_log == [(e[0], e[1]) for e in want["log"]]
        for entry, (_, _, keyword) in zip(run.import_log, want["log"]):
            assert keyword in entry["reason"], (entry, keyword)
            assert set(entry) == {"row", "action", "reason"}


def test_names_with_commas_survive():
    # 2,2,4-trimethylpentane (isooctane) must stay one name in every peak variant that has it
    for exp in EXPECTED:
        data = json.loads(exp.read_text(encoding="utf-8"))
        runs = read_input(EXPORTS / data["file"], _settings(data["settings"]))
        for run in runs:
            col = "name" if run.kind == "peaks" else "component"
            names = set(run.table[col].dropna())
            assert not any(n in {"2", "4-trimethylpentane", "2,2"} for n in names), exp.name


def _cas_ok(cas: str) -> bool:
    # CAS check digit: sum of digits times their position from the right, mod 10
    # (CAS registry number format, Chemical Abstracts Service documentation)
    digits = cas.replace("-", "")
    body, check = digits[:-1], int(digits[-1])
    return sum(int(d) * (i + 1) for i, d in enumerate(reversed(body))) % 10 == check


def test_corpus_cas_numbers_have_valid_check_digits():
    run, = read_input(EXPORTS / "v01_comma_meta_total.csv")
    cas = [c for c in run.table["cas"] if c]
    assert len(cas) >= 30
    assert all(_cas_ok(c) for c in cas)


def test_unsorted_input_logged_once_and_sorted():
    run, = read_input(EXPORTS / "v06_utf16be_unsorted.tsv")
    sorted_entries = [e for e in run.import_log if "sorted" in e["reason"]]
    assert len(sorted_entries) == 1 and sorted_entries[0]["action"] == "changed"


def test_seconds_converted_to_minutes():
    # 1 min = 60 s (SI brochure, non-SI units accepted for use with the SI)
    text = "Time (s),Area\n120,10\n90,5\n"
    run, = read_text(text, "secs.csv")
    assert run.table["rt_min"].tolist() == [1.5, 2.0]
    text_min = "RT [min],Area\n1.5,5\n"
    run, = read_text(text_min, "mins.csv")
    assert run.table["rt_min"].tolist() == [1.5]


def test_rt_unit_setting_overrides():
    s = merge_settings(load_settings(), {"reader": {"rt_unit": "s"}})
    run, = read_text("RT,Area\n600,1\n", "x.csv", s)
    assert run.table["rt_min"].tolist() == [10.0]


def test_zero_area_keep_setting():
    text = "RT,Area\n1.0,0\n2.0,5.5\n"
    run, = read_text(text, "z.csv")
    assert run.table["area"].tolist() == [5.5]
    assert run.import_log[0]["reason"] == "zero area"
    s = merge_settings(load_settings(), {"reader": {"zero_area": "keep"}})
    run, = read_text(text, "z.csv", s)
    assert run.table["area"].tolist() == [0.0, 5.5]
    assert run.import_log == []


@pytest.mark.parametrize("text,decimal,expect", [
    # ISO 80000-1: decimal sign comma or point; digits grouped by a space, point or comma
    ("RT;Area\n1,25;1.234.567,5\n", "auto", [1234567.5]),
    ("RT;Area\n1.25;1,234,567.5\n", "auto", [1234567.5]),
    ("RT;Area\n1,25;1 234 567,5\n", "auto", [1234567.5]),
    ("RT;Area\n1;12.345\n", ",", [12345.0]),
    ("RT;Area\n1;12.345\n", ".", [12.345]),
])
def test_number_formats(text, decimal, expect):
    s = merge_settings(load_settings(), {"reader": {"decimal": decimal}})
    run, = read_text(text, "n.csv", s)
    assert run.table["area"].tolist() == expect


def test_peak_table_columns_and_types():
    run, = read_input(EXPORTS / "v07_bad_rows.csv")
    t = run.table
    assert t["row"].dtype == np.int64
    for col in ("rt_min", "area", "height", "area_pct", "retention_index", "cds_mass_pct"):
        assert t[col].dtype == np.float64
    assert t["height"].isna().all()           # no height column in this export
    assert t["cas"].map(lambda v: v is None).all()
    # unnamed peaks carry None, not "" or NaN
    assert any(v is None for v in t["name"])


def test_run_is_frozen():
    run, = read_text("RT,Area\n1,2\n", "f.csv")
    with pytest.raises(AttributeError):
        run.kind = "composition"


# ------------------------------------------------------------------ failures: one-line InputError

def _one_line(err: pytest.ExceptionInfo) -> str:
    msg = str(err.value)
    assert "\n" not in msg and "Traceback" not in msg
    return msg


def test_missing_area_column(tmp_path):
    p = tmp_path / "no_area.csv"
    p.write_text("Sample: X\nRT [min],Height,Name\n1.0,5,propane\n")
    with pytest.raises(InputError) as err:
        read_input(p)
    msg = _one_line(err)
    assert "no_area.csv" in msg and "no area column" in msg and "'Height'" in msg
    assert "[reader] columns" in msg


def test_two_area_columns_are_ambiguous(tmp_path):
    p = tmp_path / "two_areas.csv"
    p.write_text("RT,Area,Peak Area,Name\n1.0,5,6,propane\n")
    with pytest.raises(InputError) as err:
        read_input(p)
    msg = _one_line(err)
    assert "ambiguous" in msg and "'Area'" in msg and "'Peak Area'" in msg


def test_pinning_resolves_ambiguity(tmp_path):
    p = tmp_path / "two_areas.csv"
    p.write_text("RT,Area,Peak Area,Name\n1.0,5,6,propane\n")
    s = merge_settings(load_settings(), {"reader": {"columns": {"area": "Peak Area"}}})
    run, = read_input(p, s)
    assert run.table["area"].tolist() == [6.0]


def test_composition_with_two_amounts_is_ambiguous(tmp_path):
    p = tmp_path / "comp2.csv"
    p.write_text("Component,Mass %,Vol %\ntoluene,10,9\n")
    with pytest.raises(InputError) as err:
        read_input(p)
    assert "ambiguous" in _one_line(err)


@pytest.mark.parametrize("name,content,words", [
    ("empty.csv", b"", "empty"),
    ("blank.csv", b"\n\n   \n", "empty"),
    ("picture.png", b"\x89PNG\r\n\x1a\n" + bytes(range(256)) * 4, "PNG"),
    ("archive.xlsx", b"PK\x03\x04" + b"\x00" * 64, "ZIP"),
    ("random.bin", bytes(range(256)) * 20, "not a text table"),
    ("prose.txt", b"Dear colleague,\nplease find the sample attached.\n", "no table found"),
])
def test_unusable_files(tmp_path, name, content, words):
    p = tmp_path / name
    p.write_bytes(content)
    with pytest.raises(InputError) as err:
        read_input(p)
    msg = _one_line(err)
    assert words in msg and name in msg


def test_missing_file_and_folder(tmp_path):
    with pytest.raises(InputError):
        read_input(tmp_path / "nope.csv")
    with pytest.raises(InputError):
        read_input(tmp_path)


def test_table_with_no_usable_row():
    with pytest.raises(InputError) as err:
        read_text("RT,Area\nx,y\n1.0,-5\n", "bad.csv")
    assert "no usable row" in _one_line(err)


def test_unknown_headers_without_profile_name_the_columns():
    with pytest.raises(InputError) as err:
        read_input(EXPORTS / "v16_profile_pinned.csv")
    msg = _one_line(err)
    assert "no table found" in msg


def test_bad_reader_settings():
    with pytest.raises(SettingsError):
        read_text("RT,Area\n1,2\n", "x.csv", {"reader": {"columns": {"bogus": "X"}}})
    with pytest.raises(SettingsError):
        read_text("RT,Area\n1,2\n", "x.csv", {"reader": {"decimal": ";"}})
    with pytest.raises(SettingsError):
        read_text("RT,Area\n1,2\n", "x.csv", {"reader": {"profile": "/nonexistent/p.toml"}})


def test_defaults_document_reader_keys():
    # every key the reader understands is in defaults.toml (the settings loader rejects others)
    from dha.reader import _READER_DEFAULTS
    assert set(_READER_DEFAULTS) <= set(load_settings()["reader"])


def test_repeated_header_and_total_logged_in_text():
    text = ("RT,Area,Name\n1.0,10,a\nRT,Area,Name\n2.0,20,b\n\nGrand total,,30,\n")
    run, = read_text(text, "r.csv")
    assert run.table["area"].tolist() == [10.0, 20.0]
    assert [(e["row"], e["reason"]) for e in run.import_log] == [
        (3, "repeated header row"), (6, "total row")]


def test_amounts_exact_for_long_decimals():
    # float(text) is the reference: the reader must not round
    vals = ["123456789.123456", "0.000001234", "98765.4321"]
    text = "RT,Area\n" + "".join(f"{i + 1}.0,{v}\n" for i, v in enumerate(vals))
    run, = read_text(text, "exact.csv")
    assert run.table["area"].tolist() == [float(v) for v in vals]
    assert not any(math.isnan(v) for v in run.table["area"])


TEXT_VARIANTS = [p for p in EXPECTED
                 if json.loads(p.read_text(encoding="utf-8"))["file"].endswith(
                     (".csv", ".txt", ".tsv"))]


@pytest.mark.parametrize("expected_file", TEXT_VARIANTS, ids=lambda p: p.name.split(".")[0])
def test_fast_and_row_by_row_paths_agree(expected_file, monkeypatch):
    # the pandas C-parser fast path and the csv-module path must read a file identically
    import dha.reader as reader
    exp = json.loads(expected_file.read_text(encoding="utf-8"))
    settings = _settings(exp["settings"])
    fast = read_input(EXPORTS / exp["file"], settings)
    monkeypatch.setattr(reader, "_fast_columns", lambda *args: None)
    slow = read_input(EXPORTS / exp["file"], settings)
    for a, b in zip(fast, slow):
        pd.testing.assert_frame_equal(a.table, b.table)
        assert a.import_log == b.import_log
        assert a.sample == b.sample
