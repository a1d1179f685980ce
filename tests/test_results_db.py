"""The results database: transactional per run, two writers at once, a killed writer."""
import json
import multiprocessing as mp
import os
import signal
import sqlite3
import time
from pathlib import Path

import pandas as pd
from click.testing import CliRunner

from dha import results_db
from dha.cli import cli

SAMPLE_RESULT = Path(__file__).parent / "data" / "sample_result.json"
N_COMPONENTS = 150


def fake_result(i: int, writer: str) -> dict:
    """A result dict with the keys the database reads (values are made up, not chemistry)."""
    return {
        "sample": {"id": f"{writer}-{i:03d}", "source_file": f"{writer}{i}.csv",
                   "injection_time": f"2026-03-{1 + i % 28:02d} 10:00:00"},
        "totals": {"vol_pct": {"aromatics": 30.0 + i % 5}, "mass_pct": {"aromatics": 33.0}},
        "benzene": {"vol_pct": 0.5 + (i % 10) / 10, "mass_pct": 0.6},
        "oxygen_mass_pct": 3.5, "properties": {"ron": 95.0 + i % 3},
        "checks": [{"spec": "en228-e10-summer", "property": "ron", "kind": "min", "limit": 95.0,
                    "value": 95.0 + i % 3, "verdict": "pass"}],
        "components": [{"name": f"c{j}", "group": "aromatics", "mass_pct": 100 / N_COMPONENTS}
                       for j in range(N_COMPONENTS)],
        "provenance": {"input_sha256": f"{i:064x}", "library_sha256": "L",
                       "settings_sha256": "S", "tool_version": "t", "input_path": f"{writer}{i}.csv"},
    }


def _writer(db: str, writer: str, n: int) -> None:
    con = results_db.connect(db)
    for i in range(n):
        results_db.store(con, f"{writer}/{i}.json", fake_result(i, writer),
                         {"spec": "en228-e10-summer", "status": "processed, passes"})
    con.close()


def _consistent(db: Path) -> pd.DataFrame:
    con = sqlite3.connect(db)
    assert con.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
    counts = pd.read_sql_query(
        "SELECT r.run_key, COUNT(c.position) AS n FROM runs r "
        "LEFT JOIN components c ON c.run_key = r.run_key GROUP BY r.run_key", con)
    con.close()
    return counts


def test_two_writers_at_once(tmp_path):
    db = tmp_path / results_db.DB_NAME
    ctx = mp.get_context("spawn")
    procs = [ctx.Process(target=_writer, args=(str(db), w, 40)) for w in ("A", "B")]
    for p in procs:
        p.start()
    for p in procs:
        p.join(120)
        assert p.exitcode == 0
    counts = _consistent(db)
    assert len(counts) == 80
    assert (counts["n"] == N_COMPONENTS).all()        # every run complete
    runs = results_db.query_runs(tmp_path, sample="A-*")
    assert len(runs) == 40 and set(runs["sample_id"].str[:2]) == {"A-"}


def test_killed_writer_leaves_whole_runs_only(tmp_path):
    db = tmp_path / results_db.DB_NAME
    ctx = mp.get_context("spawn")
    proc = ctx.Process(target=_writer, args=(str(db), "K", 100000))
    proc.start()
    deadline = time.time() + 60
    while time.time() < deadline:
        time.sleep(0.2)
        if db.exists():
            try:
                con = sqlite3.connect(db)
                n = con.execute("SELECT COUNT(*) FROM runs").fetchone()[0]
                con.close()
            except sqlite3.OperationalError:
                continue
            if n >= 5:
                break
    os.kill(proc.pid, signal.SIGKILL)
    proc.join()
    counts = _consistent(db)
    assert len(counts) >= 5
    assert (counts["n"] == N_COMPONENTS).all()        # no run stored in part


def test_query_by_pattern_spec_and_dates(tmp_path):
    con = results_db.connect(tmp_path / results_db.DB_NAME)
    for i in range(10):
        results_db.store(con, f"{i}.json", fake_result(i, "T"), {"spec": "en228-e10-summer"})
    con.close()
    runs = results_db.query_runs(tmp_path, since="2026-03-03", until="2026-03-05")
    assert list(runs["sample_id"]) == ["T-002", "T-003", "T-004"]   # 1 March is i = 0
    assert results_db.query_runs(tmp_path, spec="en228-e5-summer").empty
    assert len(results_db.query_runs(tmp_path, sample="T-00?")) == 10


def test_history_command_writes_csv_and_charts_per_product(tmp_path):
    con = results_db.connect(tmp_path / results_db.DB_NAME)
    for i in range(6):
        results_db.store(con, f"{i}.json", fake_result(i, "T"), {"spec": "en228-e10-summer"})
    con.close()
    out = tmp_path / "trends"
    r = CliRunner().invoke(cli, ["history", str(tmp_path), "--sample", "T-*", "-q", "benzene_vol_pct",
                                 "-o", str(out)])
    assert r.exit_code == 0, r.output
    table = pd.read_csv(out / "history.csv")
    assert len(table) == 6 and table["benzene_vol_pct"].notna().all()
    assert (out / "history_en228-e10-summer__benzene_vol_pct.png").is_file()


def test_record_from_a_real_result(tmp_path):
    result = json.loads(SAMPLE_RESULT.read_text())
    con = results_db.connect(tmp_path / results_db.DB_NAME)
    results_db.store(con, "x.json", result, {"spec": "en228-e10-summer"})
    row = con.execute("SELECT sample_id, benzene_vol_pct, aromatics_vol_pct, ron FROM runs").fetchone()
    n = con.execute("SELECT COUNT(*) FROM components").fetchone()[0]
    con.close()
    assert row[0] == result["sample"]["id"]
    assert row[1] == result["benzene"]["vol_pct"]
    assert row[2] == result["totals"]["vol_pct"]["aromatics"]
    assert row[3] == result["properties"]["ron"]
    assert n == len(result["components"])


def test_recorder_writes_whole_groups_of_runs(tmp_path):
    # The batch driver's recorder commits a group of runs per transaction: another reader sees
    # whole groups of whole runs, the rest after close; a removed run goes in the same group.
    rec = results_db.Recorder(tmp_path, group_runs=3, group_s=1e9)
    for i in range(7):
        rec({"path": f"T/{i}.json", "result": fake_result(i, "T"),
             "row": {"spec": "en228-e10-summer", "this_batch": "processed"}})
        seen = _consistent(tmp_path / results_db.DB_NAME)
        assert len(seen) == 3 * ((i + 1) // 3)
        assert (seen["n"] == N_COMPONENTS).all()
    rec({"path": "T/7.json", "result": fake_result(7, "T"), "removed": ["T/0.json"],
         "row": {"spec": "en228-e10-summer", "this_batch": "processed"}})
    rec.close()
    seen = _consistent(tmp_path / results_db.DB_NAME)
    assert sorted(seen["run_key"]) == [f"T/{i}.json" for i in range(1, 8)]
    assert (seen["n"] == N_COMPONENTS).all()
