"""dha batch: summary rows, flags, failures kept, outputs written (runs from tests/exports)."""
from pathlib import Path

import pandas as pd
from click.testing import CliRunner

from dha.batch import expand_inputs, summary_row
from dha.cli import cli

EXPORTS = Path(__file__).parent / "exports"


def test_expand_inputs_folder_glob_and_dedup():
    files = expand_inputs([EXPORTS, str(EXPORTS / "v01_*.csv")])
    names = [f.name for f in files]
    assert names.count("v01_comma_meta_total.csv") == 1
    assert all(not n.endswith(".json") for n in names)


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


def test_batch_cli_writes_summary_and_keeps_going(tmp_path):
    bad = tmp_path / "in" / "broken.csv"
    bad.parent.mkdir()
    bad.write_text("this is not a peak table\n")
    good = EXPORTS / "v01_comma_meta_total.csv"
    comp = EXPORTS / "v12_composition_wt.csv"
    out = tmp_path / "out"
    r = CliRunner().invoke(cli, ["batch", str(good), str(comp), str(bad), "-o", str(out), "--jobs", "1"])
    assert r.exit_code == 1, r.output          # one input failed
    assert "broken.csv" in r.output and "Traceback" not in r.output
    summary = pd.read_csv(out / "summary.csv")
    assert list(summary["status"]) == ["ok", "ok", "error"]
    assert (out / "summary.xlsx").is_file()
    assert (out / "v01_comma_meta_total.json").is_file()
    assert any(p.name.startswith("trend_") for p in out.iterdir())
    flagged = pd.read_excel(out / "summary.xlsx", sheet_name="flagged runs")
    assert set(flagged["file"]) <= {"v01_comma_meta_total.csv", "v12_composition_wt.csv"}
