"""dha batch --engine dask: a LocalCluster of two worker processes on 127.0.0.1 gives the same
per-run JSON (apart from the time stamp) and the same summary as the local process pool."""
import json
import shutil
from pathlib import Path

import pandas as pd
import pytest
from click.testing import CliRunner

from dha.cli import cli

pytest.importorskip("distributed")

EXPORTS = Path(__file__).parent / "exports"


def _load(path: Path) -> dict:
    result = json.loads(path.read_text())
    result.pop("generated_at")
    return result


def test_dask_engine_matches_local_engine(tmp_path):
    src = tmp_path / "in"
    for sub, name in (("A", "v01_comma_meta_total.csv"), ("B", "v01_comma_meta_total.csv"),
                      ("B", "v12_composition_wt.csv")):
        (src / sub).mkdir(parents=True, exist_ok=True)
        shutil.copy(EXPORTS / name, src / sub / name)
    quick = tmp_path / "quick.toml"
    quick.write_text("[batch]\ntrend_quantities = []\n")
    outs = {}
    for engine in ("local", "dask"):
        out = tmp_path / engine
        r = CliRunner().invoke(cli, ["batch", str(src), "-r", "-o", str(out), "--jobs", "2",
                                     "--engine", engine, "--settings", str(quick)])
        assert r.exit_code == 0, r.output
        outs[engine] = out
    local = sorted(p.relative_to(outs["local"]) for p in outs["local"].rglob("*.json"))
    remote = sorted(p.relative_to(outs["dask"]) for p in outs["dask"].rglob("*.json"))
    assert local == remote and len(local) == 4      # three runs and dha-batch.json
    for rel in local:
        if rel.name != "dha-batch.json":
            assert _load(outs["local"] / rel) == _load(outs["dask"] / rel), rel
    assert (pd.read_csv(outs["local"] / "summary.csv")
            .equals(pd.read_csv(outs["dask"] / "summary.csv")))
