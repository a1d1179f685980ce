"""dha batch: summary rows, flags, failures kept, mirrored outputs, incremental and resumable."""
import json
import os
import shutil
import signal
import sqlite3
import subprocess
import sys
import time
from pathlib import Path

import pandas as pd
import pytest
from click.testing import CliRunner

from dha import batch, results_db
from dha.batch import expand_inputs, plan_batch, summary_row
from dha.cli import cli
from dha.errors import InputError

EXPORTS = Path(__file__).parent / "exports"
GOOD = EXPORTS / "v01_comma_meta_total.csv"
COMP = EXPORTS / "v12_composition_wt.csv"


@pytest.fixture
def quick(tmp_path):
    """--settings file without trend charts (they cost seconds and are tested once)."""
    path = tmp_path / "quick.toml"
    path.write_text("[batch]\ntrend_quantities = []\n")
    return ["--settings", str(path)]


def test_expand_inputs_folder_glob_and_dedup():
    files = expand_inputs([EXPORTS, str(EXPORTS / "v01_*.csv")])
    names = [f.name for f in files]
    assert names.count("v01_comma_meta_total.csv") == 1
    assert all(not n.endswith(".json") for n in names)


def test_expand_inputs_recursive_leaves_out_the_output_folder(tmp_path):
    (tmp_path / "2024-01").mkdir()
    (tmp_path / "out").mkdir()
    shutil.copy(COMP, tmp_path / "2024-01" / "run.csv")
    shutil.copy(COMP, tmp_path / "top.csv")
    (tmp_path / "out" / "summary.csv").write_text("input\n")
    flat = expand_inputs([tmp_path], exclude=tmp_path / "out")
    deep = expand_inputs([tmp_path], recursive=True, exclude=tmp_path / "out")
    assert [f.name for f in flat] == ["top.csv"]
    assert sorted(f.relative_to(tmp_path).as_posix() for f in deep) == ["2024-01/run.csv", "top.csv"]


def test_summary_row_flags():
    # Flags follow the verdicts (dha.specs) and the unidentified-share threshold
    # ([batch] unidentified_flag_mass_pct, common practice, no source).
    result = {"sample": {"id": "T-1", "source_file": "a.csv"},
              "properties": {"ron": 94.0},
              "totals": {"vol_pct": {"aromatics": 30.0, "olefins": 5.0},
                         "mass_pct": {"unidentified": 7.5}},
              "benzene": {"vol_pct": 1.4, "mass_pct": 1.6}, "oxygen_mass_pct": 0.0,
              "oxygenates": [], "components": [],
              "checks": [{"property": "benzene_vol_pct", "kind": "max", "limit": 1.0, "verdict": "fail"},
                         {"property": "ron", "kind": "min", "limit": 95.0, "verdict": "marginal"},
                         {"property": "mon", "kind": "min", "limit": 85.0, "verdict": "pass"},
                         {"property": "e70_vol_pct", "kind": "min", "limit": 22.0, "verdict": "marginal"},
                         {"property": "e70_vol_pct", "kind": "max", "limit": 50.0, "verdict": "marginal"}]}
    row = summary_row(result, None, unidentified_flag=5.0)
    assert row["flags"].split() == ["benzene_vol_pct>1", "~ron<95", "~e70_vol_pct(22..50)",
                                    "poor-identification"]
    assert row["checks_failed"] == 1 and row["checks_marginal"] == 3
    assert row["status"] == batch.FAILS


def test_batch_cli_writes_summary_and_keeps_going(tmp_path):
    src = tmp_path / "in"
    src.mkdir()
    bad = src / "broken.csv"
    bad.write_text("this is not a peak table\n")
    shutil.copy(GOOD, src / GOOD.name)
    shutil.copy(COMP, src / COMP.name)
    out = tmp_path / "out"
    r = CliRunner().invoke(cli, ["batch", str(src), "-o", str(out), "--jobs", "1"])
    assert r.exit_code == 1, r.output          # one input failed
    assert "broken.csv" in r.output and "Traceback" not in r.output
    summary = pd.read_csv(out / "summary.csv")
    assert list(summary["input"]) == ["broken.csv", GOOD.name, COMP.name]
    assert summary["status"].iloc[0] == batch.NOT_PROCESSED
    assert set(summary["status"].iloc[1:]) <= {batch.PASSES, batch.FAILS}
    assert (out / "summary.xlsx").is_file()
    assert (out / "v01_comma_meta_total.json").is_file()
    assert any(p.name.startswith("trend_") for p in out.iterdir())
    runs = pd.read_excel(out / "summary.xlsx", sheet_name="runs")
    assert list(runs["input file (path below the input root)"]) == ["broken.csv", GOOD.name, COMP.name]
    assert "specification en228-e10-summer" in r.output      # named on screen


def test_summary_workbook_for_people(tmp_path):
    # issue 14: headers with units in words, rounded numbers, failed/marginal marked,
    # filters and a frozen header, the specification named.
    from openpyxl import load_workbook

    rows = [{"input": "a.csv", "sample_id": "A", "status": batch.FAILS, "this_batch": batch.DONE_NOW,
             "spec": "en228-e10-summer", "flags": "benzene_vol_pct>1 ~ron<95",
             "benzene_vol_pct": 1.23456, "ron": 94.96123, "checks_failed": 1, "checks_marginal": 1},
            {"input": "b.csv", "sample_id": "B", "status": batch.PASSES, "this_batch": batch.UP_TO_DATE,
             "spec": "en228-e10-summer", "flags": "", "benzene_vol_pct": 0.5, "ron": 96.04,
             "checks_failed": 0, "checks_marginal": 0},
            {"input": "c.csv", "status": batch.NOT_PROCESSED, "this_batch": batch.DONE_NOW,
             "error": "c.csv: no peak table found"}]
    table = pd.DataFrame(rows).reindex(columns=batch.SUMMARY_COLUMNS)
    wb = batch.summary_workbook(table, {"name": "en228-e10-summer", "source": "EN 228"})
    ws = wb["runs"]
    headers = [c.value for c in ws[1]]
    assert "benzene, % by volume" in headers and "DVPE, calculated, kilopascals" in headers
    assert ws.freeze_panes == "B2" and ws.auto_filter.ref
    col = {h: i + 1 for i, h in enumerate(headers)}
    assert ws.cell(2, col["benzene, % by volume"]).value == 1.23
    assert ws.cell(2, col["RON, calculated (no unit)"]).value == 95.0
    assert ws.cell(2, col["benzene, % by volume"]).fill.fgColor.rgb.endswith(batch._FAIL_FILL)
    assert ws.cell(2, col["RON, calculated (no unit)"]).fill.fgColor.rgb.endswith(batch._MARGINAL_FILL)
    assert ws.cell(3, col["benzene, % by volume"]).fill.fgColor.rgb in (None, "00000000")
    statuses = [ws.cell(r, col["status"]).value for r in (2, 3, 4)]
    assert statuses == ["processed, fails spec", "processed, passes", "not processed"]
    assert wb["runs"].max_row == 4
    about = {r[0].value: r[1].value for r in wb["about"].iter_rows()}
    assert about["Specification applied"] == "en228-e10-summer"
    path = tmp_path / "s.xlsx"
    wb.save(path)
    assert load_workbook(path)["runs"].cell(1, 1).value == headers[0]


def _all_commands(group, prefix=()):
    import click
    for name, cmd in group.commands.items():
        if isinstance(cmd, click.Group):
            yield from _all_commands(cmd, prefix + (name,))
        else:
            yield prefix + (name,), cmd


def test_one_spelling_of_output_and_jobs_options():
    # issue 14: -o/--out and -j/--jobs in every command; old spellings still accepted.
    for name, cmd in _all_commands(cli):
        for param in cmd.params:
            if "-o" in getattr(param, "opts", []):
                assert "--out" in param.opts, name
            if param.name == "jobs":
                assert {"-j", "--jobs"} <= set(param.opts), name
    r = CliRunner().invoke(cli, ["library", "export", "--help"])
    assert "--out" in r.output and "--output" not in r.output


def test_old_output_spelling_still_works(tmp_path):
    r = CliRunner().invoke(cli, ["library", "export", "--output", str(tmp_path / "lib.csv")])
    assert r.exit_code == 0, r.output
    assert (tmp_path / "lib.csv").is_file()


def test_same_file_name_in_two_folders_gives_two_results(tmp_path, quick):
    # The archive case: every month's folder holds a run.csv; neither result may be lost.
    for month, source in (("A", GOOD), ("B", COMP)):
        (tmp_path / month).mkdir()
        shutil.copy(source, tmp_path / month / "run.csv")
    out = tmp_path / "out"
    r = CliRunner().invoke(cli, ["batch", str(tmp_path / "A"), str(tmp_path / "B"), "-o", str(out),
                                 "--jobs", "1", "--overwrite"] + quick)
    assert r.exit_code == 0, r.output
    a = json.loads((out / "A" / "run.json").read_text())
    b = json.loads((out / "B" / "run.json").read_text())
    assert a["provenance"]["input_path"] == "A/run.csv"
    assert b["provenance"]["input_path"] == "B/run.csv"
    assert a["sample"]["source_sha256"] != b["sample"]["source_sha256"]
    summary = pd.read_csv(out / "summary.csv")
    assert list(summary["input"]) == ["A/run.csv", "B/run.csv"]
    assert list(summary["output"]) == ["A/run.json", "B/run.json"]


def test_two_inputs_onto_one_output_is_an_error_before_writing(tmp_path):
    shutil.copy(GOOD, tmp_path / "run.csv")
    shutil.copy(GOOD, tmp_path / "run.tsv")
    out = tmp_path / "out"
    with pytest.raises(InputError, match="run.csv and run.tsv"):
        plan_batch([tmp_path / "run.csv", tmp_path / "run.tsv"], out)
    r = CliRunner().invoke(cli, ["batch", str(tmp_path), "-o", str(out)])
    assert r.exit_code == 1 and "nothing written" in r.output
    assert not out.exists()


def test_late_run_rerun_skips_what_is_up_to_date(tmp_path, quick):
    src = tmp_path / "day"
    src.mkdir()
    shutil.copy(GOOD, src / "a.csv")
    shutil.copy(COMP, src / "b.csv")
    out = tmp_path / "out"
    args = ["batch", str(src), "-o", str(out), "--jobs", "1"] + quick
    assert CliRunner().invoke(cli, args).exit_code == 0
    first = (out / "a.json").read_text()
    shutil.copy(COMP, src / "c.csv")                       # a late run
    r = CliRunner().invoke(cli, args)
    assert r.exit_code == 0, r.output
    assert "1 processed now, 2 up to date" in r.output
    assert (out / "a.json").read_text() == first           # not rewritten
    summary = pd.read_csv(out / "summary.csv")
    assert list(summary["input"]) == ["a.csv", "b.csv", "c.csv"]
    assert list(summary["this_batch"]) == [batch.UP_TO_DATE, batch.UP_TO_DATE, batch.DONE_NOW]
    # only the late run named: the others still appear in the summary
    r = CliRunner().invoke(cli, ["batch", str(src / "c.csv"), "-o", str(out), "--jobs", "1"] + quick)
    assert r.exit_code == 0, r.output
    summary = pd.read_csv(out / "summary.csv")
    assert list(summary["this_batch"]) == [batch.EARLIER, batch.EARLIER, batch.UP_TO_DATE]
    # a changed input is processed again; --overwrite processes everything
    shutil.copy(GOOD, src / "b.csv")
    r = CliRunner().invoke(cli, args)
    assert "1 processed now, 2 up to date" in r.output
    assert json.loads((out / "b.json").read_text())["provenance"]["input_sha256"] == \
        batch.sha256_file(GOOD)
    r = CliRunner().invoke(cli, args + ["--overwrite"])
    assert "3 processed now, 0 up to date" in r.output


def test_a_failed_input_stays_in_the_summary_until_it_is_processed(tmp_path, quick):
    # A failed input writes no result: the folder's record keeps it, so a later batch that
    # names only a late run still lists it as not processed (exit 0: nothing failed now).
    src = tmp_path / "day"
    src.mkdir()
    (src / "broken.csv").write_text("this is not a peak table\n")
    shutil.copy(COMP, src / "a.csv")
    out = tmp_path / "out"
    r = CliRunner().invoke(cli, ["batch", str(src), "-o", str(out), "--jobs", "1"] + quick)
    assert r.exit_code == 1, r.output
    shutil.copy(COMP, src / "late.csv")
    r = CliRunner().invoke(cli, ["batch", str(src / "late.csv"), "-o", str(out), "--jobs", "1"]
                           + quick)
    assert r.exit_code == 0, r.output
    assert "not processed (earlier batch): broken.csv" in r.output
    summary = pd.read_csv(out / "summary.csv")
    assert list(summary["input"]) == ["a.csv", "broken.csv", "late.csv"]
    assert list(summary["status"])[1] == batch.NOT_PROCESSED
    assert list(summary["this_batch"]) == [batch.EARLIER, batch.EARLIER, batch.DONE_NOW]
    # fixed and run again: processed, and the record forgets the failure
    shutil.copy(COMP, src / "broken.csv")
    r = CliRunner().invoke(cli, ["batch", str(src / "broken.csv"), "-o", str(out), "--jobs",
                                 "1"] + quick)
    assert r.exit_code == 0, r.output
    summary = pd.read_csv(out / "summary.csv")
    assert batch.NOT_PROCESSED not in set(summary["status"])
    assert not json.loads((out / batch.BATCH_RECORD).read_text()).get("not_processed")
    # an input that failed and was then deleted is dropped from the record
    (src / "gone.csv").write_text("not a table either\n")
    CliRunner().invoke(cli, ["batch", str(src / "gone.csv"), "-o", str(out), "--jobs", "1"]
                       + quick)
    (src / "gone.csv").unlink()
    r = CliRunner().invoke(cli, ["batch", str(src / "late.csv"), "-o", str(out), "--jobs", "1"]
                           + quick)
    assert r.exit_code == 0 and "gone.csv" not in r.output, r.output


def test_changed_settings_make_results_out_of_date(tmp_path, quick):
    shutil.copy(COMP, tmp_path / "a.csv")
    out = tmp_path / "out"
    args = ["batch", str(tmp_path / "a.csv"), "-o", str(out), "--jobs", "1"] + quick
    assert CliRunner().invoke(cli, args).exit_code == 0
    r = CliRunner().invoke(cli, args + ["--spec", "en228-e5-summer"])
    assert "1 processed now, 0 up to date" in r.output, r.output


def test_atomic_write_leaves_old_file_when_writer_fails(tmp_path):
    target = tmp_path / "r.json"
    target.write_text("old")

    def broken(tmp):
        tmp.write_text("half")
        raise RuntimeError("disk full")

    with pytest.raises(RuntimeError):
        batch.write_via_temp(target, broken)
    assert target.read_text() == "old"
    assert list(tmp_path.iterdir()) == [target]


def test_sigkill_mid_batch_then_resume(tmp_path, quick):
    src = tmp_path / "in"
    src.mkdir()
    n = 8
    for i in range(n):
        shutil.copy(GOOD, src / f"run{i}.csv")
    out = tmp_path / "out"
    cmd = [sys.executable, "-m", "dha", "batch", str(src), "-o", str(out), "--jobs", "2"] + quick
    log = tmp_path / "stderr.txt"
    with open(log, "wb") as err:
        proc = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=err, start_new_session=True)
    deadline = time.time() + 120
    try:
        while time.time() < deadline and proc.poll() is None:
            if out.is_dir() and any(out.glob("run*.json")):
                break
            time.sleep(0.05)
    finally:
        if proc.poll() is None:
            os.killpg(proc.pid, signal.SIGKILL)
        proc.wait()
    done_before = sorted(p.name for p in out.glob("run*.json"))
    assert 0 < len(done_before), f"no result written before the kill: {log.read_text()}"
    for p in out.glob("*.json"):          # every visible result is complete
        if p.name != batch.BATCH_RECORD:
            assert json.loads(p.read_text())["provenance"]["input_path"] == p.stem + ".csv"
    assert not (out / "summary.csv").exists() or len(done_before) == n
    with sqlite3.connect(out / results_db.DB_NAME) as con:   # whole runs only
        assert con.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
        stored = con.execute("SELECT run_key, (SELECT COUNT(*) FROM components c "
                             "WHERE c.run_key = r.run_key) FROM runs r").fetchall()
    n_components = len(json.loads((out / done_before[0]).read_text())["components"])
    assert all(k in done_before and m == n_components for k, m in stored)
    r = CliRunner().invoke(cli, ["batch", str(src), "-o", str(out), "--jobs", "1"] + quick)
    assert r.exit_code == 0, r.output
    summary = pd.read_csv(out / "summary.csv")
    assert len(summary) == n
    assert (summary["this_batch"] == batch.UP_TO_DATE).sum() >= len(done_before)
    with sqlite3.connect(out / results_db.DB_NAME) as con:   # the database caught up
        assert con.execute("SELECT COUNT(*) FROM runs").fetchone()[0] == n
    # what a killed writer may leave is a hidden temporary, never a result's name
    assert all(p.name.startswith(".") and p.name.endswith(".part")
               for p in out.rglob("*") if p.is_file() and p.suffix not in
               (".json", ".csv", ".xlsx", ".png", ".sqlite", ".sqlite-wal", ".sqlite-shm"))


def test_library_check_runs_once_per_checksum(tmp_path, monkeypatch):
    from dha import library as libmod

    monkeypatch.setenv("DHA_CACHE_DIR", str(tmp_path / "cache"))
    lib = libmod.read_library(libmod._folders(None))
    calls = []
    real = libmod.check_library
    monkeypatch.setattr(libmod, "check_library", lambda x: calls.append(1) or real(x))
    first = libmod.checked_problems(lib)
    second = libmod.checked_problems(lib)
    assert calls == [1] and first == second
    assert len(list((tmp_path / "cache" / "library-checks").glob("*.json"))) == 1


def test_help_imports_no_command_module():
    # dha --help must stay fast: it lists the commands without importing them (or pandas).
    code = ("import sys\nfrom click.testing import CliRunner\nfrom dha.cli import cli\n"
            "r = CliRunner().invoke(cli, ['--help'])\nassert r.exit_code == 0, r.output\n"
            "assert 'batch' in r.output and 'history' in r.output\n"
            "print(sorted(m for m in sys.modules if m == 'pandas' or m.startswith('dha.commands.')))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "[]", out.stdout


def test_screen_lists_at_most_a_screenful_of_flagged_runs(tmp_path, monkeypatch):
    # 1,000 flagged runs printed one line each would bury the summary lines: 20, then a count
    rows = [{"input": f"r{i:03d}.csv", "sample_id": f"S{i}", "status": batch.PASSES,
             "this_batch": batch.DONE_NOW, "flags": "~ron<95"} for i in range(25)]
    table = pd.DataFrame(rows).reindex(columns=batch.SUMMARY_COLUMNS)
    table.attrs["counts"] = {"processed": 25, "up_to_date": 0, "earlier": 0, "failed": 0}
    monkeypatch.setattr(batch, "run_batch", lambda *a, **k: table)
    monkeypatch.setattr(batch, "write_summary", lambda *a, **k: [])
    shutil.copy(COMP, tmp_path / "a.csv")
    r = CliRunner().invoke(cli, ["batch", str(tmp_path / "a.csv"), "-o", str(tmp_path / "o")])
    assert r.exit_code == 0, r.output
    assert r.output.count("  flagged: ") == 20
    assert "... and 5 more flagged runs" in r.output
