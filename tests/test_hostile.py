"""Hostile and broken inputs (issue 16): one test group per numbered item of the issue.

Each test rebuilds a reproduction given in words in the issue. Expected behaviour is the
project's contract (one-line errors naming file, row/column and what to do; every skipped or
changed row in the import log; exit codes 0/1); formula triggers follow the OWASP "CSV
Injection" guidance (common practice, no standard).
"""
from __future__ import annotations

import errno
import json
import os
import zipfile
from pathlib import Path

import pandas as pd
import pytest
from click.testing import CliRunner
from openpyxl import load_workbook

from dha import pipeline, safety
from dha.cli import cli
from dha.errors import InputError
from dha.reader import read_input, read_text

from hostile_checks import assert_clean_failure, live_formulas

EXPORTS = Path(__file__).parent / "exports"
GOOD = EXPORTS / "v01_comma_meta_total.csv"

PEAKS = [(1.50, 1000.0, "propane"), (2.10, 2000.0, "isobutane"), (2.60, 3000.0, "n-butane"),
         (4.00, 4000.0, "n-pentane"), (7.50, 5000.0, "toluene")]


def peak_csv(path: Path, rows=PEAKS, sample="T-1", extra_meta: str = "") -> Path:
    lines = [f"Sample: {sample}", extra_meta, "RT [min],Area,Name"] if extra_meta else \
        [f"Sample: {sample}", "RT [min],Area,Name"]
    lines += [f"{rt},{area},{name}" for rt, area, name in rows]
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


def run(*args: str):
    return CliRunner().invoke(cli, list(args))


def report(tmp_path, *inputs, fmt="json", extra=()):
    out = tmp_path / "out"
    return run("report", *map(str, inputs), "-o", str(out), "--format", fmt, "--spec", "",
               *extra), out


# ----------------------------------------------------------------------------- 1 formula injection

def test_1_formulas_inert_in_run_workbook(tmp_path):
    # one named peak only: no n-alkane scale, so the odd names stay as the export wrote them
    rows = [(1.5, 1000.0, "propane"), (5.0, 500.0, '"=HYPERLINK(""http://example.invalid"",""y"")"'),
            (6.0, 600.0, "+x"), (6.5, 650.0, "@SUM(A1)")]
    src = peak_csv(tmp_path / "=1+2.csv", rows, sample="=1+2")
    res, out = report(tmp_path, src, fmt="json,xlsx")
    assert res.exit_code == 0, res.output + res.stderr
    assert live_formulas(out) == []
    wb = load_workbook(out / "=1+2.xlsx")
    texts = {c.value for ws in wb.worksheets for row in ws.iter_rows() for c in row}
    assert '=HYPERLINK("http://example.invalid","y")' in texts   # shown as typed, as text
    assert "=1+2" in texts


def test_1_formulas_inert_in_batch_summaries(tmp_path):
    src = peak_csv(tmp_path / "+cmd.csv", sample='=HYPERLINK("http://example.invalid","y")')
    out = tmp_path / "b"
    res = run("batch", str(src), "-o", str(out), "--jobs", "1")
    assert res.exit_code == 0, res.output + res.stderr
    assert live_formulas(out) == []
    text = (out / "summary.csv").read_text(encoding="utf-8")
    assert "'+cmd.csv" in text and "'=HYPERLINK" in text
    summary = pd.read_excel(out / "summary.xlsx", sheet_name="runs")
    assert any(str(v).startswith("=HYPERLINK") for v in summary.iloc[0])   # shown as text


# ----------------------------------------------------------------------------- 2 numbers never guessed

def test_2_decimal_comma_cell_in_a_point_file_is_logged_with_value_used():
    run_, = read_text('RT [min],Area,Name\n1.5,100.5,a\n2.5,"100,5",b\n3.5,"1,234,5",c\n',
                      "mixed.csv")
    assert list(run_.table["area"]) == [100.5, 100.5]
    log = {e["row"]: e for e in run_.import_log}
    assert log[3]["action"] == "changed" and "'100,5'" in log[3]["reason"]
    assert "value used 100.5" in log[3]["reason"] and "Area" in log[3]["reason"]
    assert log[4]["action"] == "skipped" and "1,234,5" in log[4]["reason"]


def test_2_mixed_file_no_silent_multiplication():
    # 161 areas, every other one written with a decimal comma (the mixed file)
    lines = ["RT [min];Area;Name"]
    for i in range(161):
        area = f"{100 + i}.{i % 10}5" if i % 2 else f"{100 + i},{i % 10}5"
        lines.append(f"{1 + i * 0.1:.2f};{area};p{i}")
    run_, = read_text("\n".join(lines) + "\n", "mixed.txt")
    want = [float(f"{100 + i}.{i % 10}5") for i in range(161)]
    assert run_.table["area"].tolist() == pytest.approx(want)
    changed = [e for e in run_.import_log if e["action"] == "changed"]
    assert len(changed) == 81          # every decimal-comma cell, each with its raw text
    assert all("area" in e["reason"] for e in changed)
    assert all("value used" in e["reason"] for e in changed)


def test_2_thousands_grouping_still_read_without_log():
    run_, = read_text('RT [min],Area,Name\n1.5,"1,234.5",a\n2.5,"12,345",b\n', "t.csv")
    assert list(run_.table["area"]) == [1234.5, 12345.0]
    assert run_.import_log == []


# ----------------------------------------------------------------------------- 3 overflow, absurd values

@pytest.mark.parametrize("bad", ["1e308", "inf", "nan", "-5", "0", "1e15"])
def test_3_absurd_area_rows_follow_the_rules_and_are_logged(bad):
    run_, = read_text(f"RT [min],Area,Name\n1.5,100,a\n2.5,{bad},b\n3.5,300,c\n", "t.csv")
    assert list(run_.table["area"]) == [100.0, 300.0]
    assert [e["row"] for e in run_.import_log] == [3]
    assert run_.import_log[0]["action"] == "skipped"


def test_3_overflow_run_is_exit_0_without_traceback_and_balanced(tmp_path):
    rows = [(1.5, "1e308", "propane"), (2.5, "1e308", "n-butane"), (7.5, 100.0, "toluene")]
    res, out = report(tmp_path, peak_csv(tmp_path / "big.csv", rows))
    assert res.exit_code == 0 and "Traceback" not in res.stderr
    result = json.loads((out / "big.json").read_text())
    assert sum(result["totals"]["mass_pct"].values()) == pytest.approx(100.0)
    assert len([e for e in result["import_log"] if e["action"] == "skipped"]) == 2


def test_3_all_rows_absurd_is_exit_1(tmp_path):
    rows = [(1.5, "1e308", "propane"), (2.5, "inf", "n-butane")]
    res, _ = report(tmp_path, peak_csv(tmp_path / "big.csv", rows))
    assert_clean_failure(res, "big.csv", "no usable row")


def test_3_totals_that_cannot_be_computed_are_refused():
    result = {"sample": {"source_file": "x.csv"},
              "totals": {"mass_pct": {"aromatics": float("nan"), "olefins": 0.0}}}
    with pytest.raises(InputError, match="x.csv: the mass % totals cannot be computed"):
        pipeline.check_totals(result)
    with pytest.raises(InputError, match="sum to 0"):
        pipeline.check_totals({"totals": {"mass_pct": {"aromatics": 0.0, "olefins": 0.0}}})


# ----------------------------------------------------------------------------- 4 control characters

def test_4_bel_in_name_and_sample_id_is_shown_and_logged(tmp_path):
    rows = [(1.5, 1000.0, "propane"), (5.0, 500.0, "n-bu\x07tane")]
    res, out = report(tmp_path, peak_csv(tmp_path / "bel.csv", rows, sample="T\x07-1"),
                      fmt="json,xlsx")
    assert res.exit_code == 0, res.stderr
    result = json.loads((out / "bel.json").read_text())
    assert result["sample"]["id"] == "T<BEL>-1"
    assert any(c["name"] == "n-bu<BEL>tane" for c in result["components"])
    assert {e["row"] for e in result["import_log"]} == {1, 4}
    assert "\x07" not in (out / "bel.json").read_text()
    assert (out / "bel.xlsx").is_file()


def test_4_escape_sequences_never_reach_the_terminal(tmp_path):
    rows = PEAKS[:3] + [(5.0, 500.0, "\x1b]0;owned\x07\x1b[31mred")]
    src = peak_csv(tmp_path / "esc\x1b[2J.csv", rows, sample="\x1b[31m")
    res, _ = report(tmp_path, src, tmp_path / "missing\x1b[2J.csv")
    assert "\x1b" not in res.output and "\x1b" not in res.stderr and "\x07" not in res.stderr
    assert "<ESC>" in res.stderr


# ----------------------------------------------------------------------------- 5 size guards

def _settings(tmp_path, text: str) -> Path:
    path = tmp_path / "lab.toml"
    path.write_text(text, encoding="utf-8")
    return path


def test_5_file_size_guard(tmp_path):
    cfg = _settings(tmp_path, "[limits]\nmax_file_mb = 0.001\n")
    res, _ = report(tmp_path, GOOD, extra=("--settings", str(cfg)))
    assert_clean_failure(res, "max_file_mb", "v01_comma_meta_total.csv")


def test_5_rows_per_run_guard(tmp_path):
    cfg = _settings(tmp_path, "[limits]\nmax_rows = 3\n")
    res, _ = report(tmp_path, peak_csv(tmp_path / "five.csv"), extra=("--settings", str(cfg)))
    assert_clean_failure(res, "five.csv", "max_rows = 3")


def test_5_a_500000_row_file_is_refused_before_parsing(tmp_path):
    body = "".join(f"{1 + i * 1e-4:.4f},{100 + i % 7},\n" for i in range(500_000))
    src = tmp_path / "huge.csv"
    src.write_text("RT [min],Area,Name\n" + body)
    with pytest.raises(InputError, match="max_rows = 20000"):
        read_input(src)


def test_5_text_cell_length_guard(tmp_path):
    rows = PEAKS[:2] + [(5.0, 500.0, "x" * 5000)]
    res, _ = report(tmp_path, peak_csv(tmp_path / "long.csv", rows))
    assert_clean_failure(res, "long.csv", "row 5", "max_text_chars")


def test_5_workbook_unpacked_size_and_rows_guard(tmp_path):
    xlsx = EXPORTS / "v09_sheets_per_injection.xlsx"
    cfg = _settings(tmp_path, "[limits]\nmax_workbook_mb = 0.001\n")
    res, _ = report(tmp_path, xlsx, extra=("--settings", str(cfg)))
    assert_clean_failure(res, "unpacks to", "max_workbook_mb")
    with pytest.raises(InputError, match="max_rows"):
        read_input(xlsx, {"limits": {"max_rows": 1}})
    # a bomb: a small file that unpacks to 200 MB is refused from the archive's directory
    bomb = tmp_path / "bomb.xlsx"
    with zipfile.ZipFile(bomb, "w", zipfile.ZIP_DEFLATED) as z:
        z.writestr("xl/workbook.xml", "<workbook/>")
        z.writestr("xl/worksheets/sheet1.xml", b"\0" * 200_000_000)
    assert bomb.stat().st_size < 1_000_000
    with pytest.raises(InputError, match="unpacks to 200 MB"):
        read_input(bomb)


# ----------------------------------------------------------------------------- 6 atomic writes

def test_6_disk_full_during_xlsx_keeps_old_file_and_says_so(tmp_path, monkeypatch):
    src = peak_csv(tmp_path / "r.csv")
    res, out = report(tmp_path, src, fmt="json,xlsx")
    assert res.exit_code == 0
    before = (out / "r.xlsx").read_bytes()

    real_write = safety.atomic_write

    def full(path, write):
        def failing(fh):
            fh.write(b"PK partial")
            raise OSError(errno.ENOSPC, "No space left on device")
        return real_write(path, failing)

    monkeypatch.setattr(safety, "atomic_write", full)
    res, out = report(tmp_path, src, fmt="json,xlsx", extra=("--overwrite",))
    assert_clean_failure(res, "disk full", "r.xlsx")
    assert (out / "r.xlsx").read_bytes() == before
    assert sorted(p.name for p in out.iterdir()) == ["r.json", "r.xlsx"]   # no temp file


def test_6_disk_full_in_batch_summary_is_one_line(tmp_path, monkeypatch):
    import dha.batch as batch_module

    def full(path, text, **kw):
        raise safety.OutputError(f"{path}: disk full (no space left on the device)")

    monkeypatch.setattr(batch_module, "atomic_write_text", full)
    res = run("batch", str(GOOD), "-o", str(tmp_path / "b"), "--jobs", "1")
    assert_clean_failure(res, "disk full")


def test_6_json_written_atomically(tmp_path, monkeypatch):
    def fsync(fd):
        raise OSError(errno.ENOSPC, "No space left on device")

    monkeypatch.setattr(os, "fsync", fsync)
    res, out = report(tmp_path, peak_csv(tmp_path / "r.csv"))
    assert_clean_failure(res, "disk full")
    assert not out.exists() or list(out.iterdir()) == []


# ----------------------------------------------------------------------------- 7 messages

def test_7_retention_index_zero_is_ignored_and_logged_with_its_row(tmp_path):
    src = tmp_path / "ri0.csv"
    src.write_text("RT [min],Area,Name,RI\n" + "\n".join(
        f"{5 + i * 0.5:.3f},{1000 + i},,{0 if i == 3 else 500 + 50 * i}" for i in range(12)))
    res, out = report(tmp_path, src)
    assert res.exit_code == 0, res.stderr
    log = json.loads((out / "ri0.json").read_text())["import_log"]
    assert any(e["row"] == 5 and "retention index 0" in e["reason"] for e in log)


def test_7_binary_spec_file_and_bad_limit_blame_the_profile(tmp_path):
    binary = tmp_path / "bin.toml"
    binary.write_bytes(b"\x89PNG\r\n\x1a\n\xff\xfe\x00")
    res = run("report", str(GOOD), "-o", str(tmp_path / "o"), "--spec", str(binary))
    text = assert_clean_failure(res, "bin.toml", "not a text")
    assert "v01_comma" not in text
    bad = tmp_path / "bad.toml"
    bad.write_text("limit = [1, 2]\n")
    res = run("report", str(GOOD), "-o", str(tmp_path / "o"), "--spec", str(bad))
    text = assert_clean_failure(res, "bad.toml", "limit")
    assert "v01_comma" not in text


@pytest.mark.skipif(not hasattr(os, "mkfifo"), reason="no FIFOs here")
def test_7_dev_null_and_fifo_are_not_regular_files(tmp_path):
    fifo = tmp_path / "pipe.csv"
    os.mkfifo(fifo)
    res, _ = report(tmp_path, "/dev/null", fifo)
    text = assert_clean_failure(res, "/dev/null", "pipe.csv", "not a regular file")
    assert "not found" not in text


def test_7_truncated_xlsx(tmp_path):
    data = (EXPORTS / "v09_sheets_per_injection.xlsx").read_bytes()
    cut = tmp_path / "cut.xlsx"
    cut.write_bytes(data[: len(data) // 2])
    res, _ = report(tmp_path, cut)
    assert_clean_failure(res, "cut.xlsx", "damaged or truncated")


def test_7_batch_into_a_folder_that_cannot_be_made(tmp_path):
    blocker = tmp_path / "file"
    blocker.write_text("x")
    res = run("batch", str(GOOD), "-o", str(blocker / "sub"), "--jobs", "1")
    assert_clean_failure(res, "not a folder")


def test_7_batch_into_an_unwritable_folder(tmp_path, monkeypatch):
    real_mkstemp = safety.tempfile.mkstemp

    def denied(*a, **kw):
        raise PermissionError(errno.EACCES, "Permission denied")

    monkeypatch.setattr(safety.tempfile, "mkstemp", denied)
    res = run("batch", str(GOOD), "-o", str(tmp_path / "ro"), "--jobs", "1")
    monkeypatch.setattr(safety.tempfile, "mkstemp", real_mkstemp)
    assert_clean_failure(res, "permission denied")


def test_7_binary_settings_file(tmp_path):
    cfg = tmp_path / "lab.toml"
    cfg.write_bytes(b"\xff\xfe\x00\x01binary\x80")
    res, _ = report(tmp_path, GOOD, extra=("--settings", str(cfg)))
    assert_clean_failure(res, "lab.toml", "not a text")
    res = run("batch", str(GOOD), "-o", str(tmp_path / "b"), "--settings", str(cfg))
    assert_clean_failure(res, "lab.toml")


# ----------------------------------------------------------------------------- 8 settings, profiles

@pytest.mark.parametrize("text, needle", [
    ("[identify]\nri_tolerance = nan\n", "ri_tolerance"),
    ("[identify]\nri_tolerance = inf\n", "not a finite number"),
    ("[identify]\nri_tolerance = -1.0\n", "outside its range"),
    ("[quantify]\nreference_temperature_c = 90.0\n", "reference_temperature_c"),
    ("[identify]\nmarkers = { 5 = nan }\n", "markers.5"),
    ("[report]\nformats = []\n", "formats"),
    ("[report]\nformats = [\"docx\"]\n", "formats"),
])
def test_8_settings_refused_naming_file_and_key(tmp_path, text, needle):
    cfg = _settings(tmp_path, text)
    res, _ = report(tmp_path, GOOD, extra=("--settings", str(cfg)))
    assert_clean_failure(res, "lab.toml", needle)


@pytest.mark.parametrize("limits, needle", [
    ('[[limit]]\nquantity = "ron"\nkind = "min"\nvalue = 100\n'
     '[[limit]]\nquantity = "ron"\nkind = "max"\nvalue = 90\n', "above max"),
    ('[[limit]]\nquantity = "ron"\nkind = "min"\nvalue = nan\n', "finite"),
])
def test_8_profiles_refused_naming_file(tmp_path, limits, needle):
    prof = tmp_path / "odd.toml"
    prof.write_text('description = "x"\n' + limits)
    res = run("report", str(GOOD), "-o", str(tmp_path / "o"), "--spec", str(prof))
    assert_clean_failure(res, "odd.toml", needle)


# ----------------------------------------------------------------------------- 9 changes logged

def test_9_nul_bytes_are_logged():
    run_, = read_text("RT [min],Area,Name\n1.5,100,n-bu\x00tane\n2.5,200,x\n", "nul.csv")
    assert run_.table["name"].tolist() == ["n-butane", "x"]
    assert run_.import_log[0]["row"] == 2 and "NUL" in run_.import_log[0]["reason"]


def test_9_mixed_encodings_are_logged(tmp_path):
    src = tmp_path / "mixed.csv"
    src.write_bytes("RT [min],Area,Name\n1.5,100,Müller-ä\n".encode("utf-8")
                    + "2.5,200,Ölprobe\n".encode("cp1252"))
    run_, = read_input(src)
    assert any(e["row"] == 3 and "mixes encodings" in e["reason"] for e in run_.import_log)


def test_9_quoted_line_break_in_a_name_is_kept_and_logged():
    run_, = read_text('RT [min],Area,Name\n1.5,100,"2,2-dimethyl\nbutane"\n2.5,200,x\n', "q.csv")
    assert run_.table["name"].tolist() == ["2,2-dimethyl butane", "x"]
    assert run_.import_log[0]["row"] == 2 and "line break" in run_.import_log[0]["reason"]


# ----------------------------------------------------------------------------- 10 every input tried

def test_10_report_tries_every_input(tmp_path):
    a = peak_csv(tmp_path / "a.csv")
    b = peak_csv(tmp_path / "b.csv")
    res, out = report(tmp_path, a, tmp_path / "missing.csv", b)
    assert_clean_failure(res, "missing.csv: file not found")
    assert (out / "a.json").is_file() and (out / "b.json").is_file()
    assert len([ln for ln in res.stderr.splitlines() if ln.startswith("dha: error")]) == 1


def test_10_batch_processes_good_next_to_missing(tmp_path):
    out = tmp_path / "b"
    res = run("batch", str(GOOD), str(tmp_path / "missing.csv"), "-o", str(out), "--jobs", "1")
    assert res.exit_code == 1 and "Traceback" not in res.output + res.stderr
    assert list(out.rglob("v01_comma_meta_total.json"))
    summary = pd.read_csv(out / "summary.csv").set_index("input")
    missing = next(k for k in summary.index if k.endswith("missing.csv"))
    good = next(k for k in summary.index if k.endswith("v01_comma_meta_total.csv"))
    assert "file not found" in summary.loc[missing, "error"]
    assert str(summary.loc[good, "status"]).startswith("processed")


# ----------------------------------------------------------------------------- 11 symbolic links

def test_11_dangling_symlink_at_an_output_path_is_not_followed(tmp_path):
    out = tmp_path / "out"
    out.mkdir()
    outside = tmp_path / "outside.json"
    (out / "r.json").symlink_to(outside)
    src = peak_csv(tmp_path / "r.csv")
    res, _ = report(tmp_path, src)
    assert_clean_failure(res, "symbolic link")
    assert not outside.exists()
    res, _ = report(tmp_path, src, extra=("--overwrite",))
    assert res.exit_code == 0, res.stderr
    assert not outside.exists() and not (out / "r.json").is_symlink()


# ----------------------------------------------------------------------------- every writer

def _hostile_result() -> dict:
    result = json.loads((Path(__file__).parent / "data" / "sample_result.json").read_text())
    result["sample"]["id"] = "=HYPERLINK(\"http://example.invalid\",\"y\")\x07\x1b[31m"
    result["sample"]["operator"] = "+cmd\x00"
    result["components"][0]["name"] = "@SUM(A1)\x07"
    result["warnings"].append("\x1b]0;title\x07")
    return result


def test_each_writer_takes_hostile_text(tmp_path):
    from dha.report import WRITERS
    from dha.result import write_json

    result = _hostile_result()
    for fmt, writer in WRITERS.items():
        path = writer(result, tmp_path / f"r.{fmt}")
        assert Path(path).stat().st_size > 0, fmt
    write_json(result, tmp_path / "r.json")
    assert live_formulas(tmp_path) == []
    assert sorted(p.name for p in tmp_path.iterdir()) == sorted(
        ["r.json"] + [f"r.{fmt}" for fmt in WRITERS])           # no temporary file left
    wb = load_workbook(tmp_path / "r.xlsx")
    texts = [c.value for ws in wb.worksheets for row in ws.iter_rows() for c in row
             if isinstance(c.value, str)]
    assert any("<BEL>" in t for t in texts) and not any("\x07" in t for t in texts)
    if "pdf" in WRITERS:
        from pypdf import PdfReader
        text = "".join(page.extract_text() or "" for page in PdfReader(tmp_path / "r.pdf").pages)
        assert "\x07" not in text and "\x1b" not in text
