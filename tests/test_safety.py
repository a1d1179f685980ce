"""dha.safety: inert spreadsheet text, visible control characters, atomic writes.

Formula-injection triggers (=, +, -, @, tab, CR) and the apostrophe neutralisation follow the
OWASP "CSV Injection" guidance (common practice, no standard); the XML 1.0 character ranges
that openpyxl refuses are those of the XML 1.0 specification, section 2.2 (Char production).
"""
from __future__ import annotations

import errno
import io
import os

import pandas as pd
import pytest
from openpyxl import Workbook, load_workbook

from dha.errors import OutputError
from dha import safety


@pytest.mark.parametrize("text", ["=1+2", "+x", "-cmd", "@SUM(A1)", "\t=1", "\r=1",
                                  '=HYPERLINK("http://example.invalid","y")'])
def test_inert_text_prefixes_formula_starts(text):
    out = safety.inert_text(text)
    assert out.startswith("'") and out[1:].replace("<", "").strip() != ""
    assert not out.startswith(safety.FORMULA_START)


def test_inert_text_keeps_plain_text_and_numbers():
    assert safety.inert_text("n-butane") == "n-butane"
    assert safety.inert_text(-3.5) == -3.5
    assert safety.inert_text(None) is None


def test_controls_are_visible_never_dropped():
    assert safety.visible_controls("n-bu\x00tane") == "n-bu<NUL>tane"
    assert safety.visible_controls("a\x07b\x1b[31m") == "a<BEL>b<ESC>[31m"
    assert safety.visible_controls("x\u202ey") == "x<U+202E>y"
    assert safety.visible_controls("tab\tok\nline") == "tab\tok\nline"
    assert safety.terminal_text("tab\tok\nline") == "tab<HT>ok<LF>line"
    assert not safety.has_controls(safety.terminal_text("\x1b]0;title\x07"))


def test_inert_workbook_makes_formula_text_a_string_cell(tmp_path):
    wb = Workbook()
    ws = wb.active
    ws["A1"] = '=HYPERLINK("http://example.invalid","y")'
    ws["A2"] = "=1+2"
    ws["A3"] = safety.visible_data(["bell\x07name"])[0]  # openpyxl refuses raw controls
    ws["A4"] = 5
    safety.save_workbook(wb, tmp_path / "w.xlsx")
    back = load_workbook(tmp_path / "w.xlsx")
    cells = back.active
    assert cells["A1"].data_type == "s" and cells["A1"].value.startswith("=HYPERLINK")
    assert cells["A2"].data_type == "s"
    assert cells["A3"].value == "bell<BEL>name"
    assert cells["A4"].value == 5


def test_inert_frame_for_csv():
    table = pd.DataFrame({"name": ["=1+2", "ok", None], "area": [-1.0, 2.0, 3.0]})
    text = safety.inert_frame(table).to_csv(index=False)
    assert "'=1+2" in text and "\n=1" not in text and "-1.0" in text


def test_atomic_write_replaces_a_symlink_never_its_target(tmp_path):
    outside = tmp_path / "outside.txt"
    link = tmp_path / "out" / "r.json"
    link.parent.mkdir()
    link.symlink_to(outside)  # dangling
    with pytest.raises(OutputError, match="symbolic link"):
        safety.check_target(link, overwrite=False)
    safety.check_target(link, overwrite=True)
    safety.atomic_write_text(link, "{}")
    assert not outside.exists()
    assert not link.is_symlink() and link.read_text() == "{}"


def test_disk_full_leaves_old_file_and_says_so(tmp_path, monkeypatch):
    target = tmp_path / "r.json"
    target.write_text("old")

    def full(fh):
        raise OSError(errno.ENOSPC, "No space left on device")

    with pytest.raises(OutputError) as info:
        safety.atomic_write(target, full)
    message = str(info.value)
    assert "disk full" in message and "\n" not in message and "r.json" in message
    assert target.read_text() == "old"
    assert [p.name for p in tmp_path.iterdir()] == ["r.json"]  # no temporary file left


def test_disk_full_inside_a_library_wrapping_the_oserror(tmp_path, monkeypatch):
    real_fsync = os.fsync

    def fsync(fd):
        raise OSError(errno.ENOSPC, "No space left on device")

    monkeypatch.setattr(os, "fsync", fsync)
    with pytest.raises(OutputError, match="disk full"):
        safety.atomic_write_bytes(tmp_path / "a.pdf", b"%PDF")
    monkeypatch.setattr(os, "fsync", real_fsync)
    assert not (tmp_path / "a.pdf").exists()


def test_unwritable_folder_is_one_line(tmp_path):
    if os.geteuid() == 0:
        pytest.skip("root may write anywhere")
    folder = tmp_path / "ro"
    folder.mkdir()
    folder.chmod(0o500)
    try:
        with pytest.raises(OutputError, match="permission denied"):
            safety.atomic_write_bytes(folder / "x.csv", b"a")
    finally:
        folder.chmod(0o700)


def test_a_file_where_the_folder_should_be(tmp_path):
    (tmp_path / "f").write_text("x")
    with pytest.raises(OutputError, match="not a folder"):
        safety.make_folder(tmp_path / "f")
    with pytest.raises(OutputError):
        safety.atomic_write(tmp_path / "f" / "x.csv", io.BytesIO().write)
