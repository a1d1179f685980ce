"""Fuzz test of dha.reader: mutated exports give valid runs or one-line InputError, nothing else.

Seeds are text exports of the corpus (tests/exports/); the mutations are random byte edits,
dropped and duplicated lines, swapped separators and inserted unicode. The property checked
is the reader's contract (DEVELOPERS.md "Tables between stages"), not numbers.
"""
from __future__ import annotations

import os
from pathlib import Path

import numpy as np
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from dha.errors import InputError
from dha.reader import COMPOSITION_COLUMNS, COMPOSITION_OPTIONAL, PEAK_COLUMNS, Run, read_input

EXPORTS = Path(__file__).parent / "exports"
SEEDS = [p.read_bytes() for p in sorted(EXPORTS.iterdir())
         if p.suffix in (".csv", ".txt", ".tsv", ".xlsx", ".xls")]


def _check_run(run: Run) -> None:
    assert isinstance(run, Run)
    assert run.kind in ("peaks", "composition")
    assert isinstance(run.sample, dict) and run.sample.get("id")
    t = run.table
    assert len(t) > 0
    if run.kind == "peaks":
        assert list(t.columns) == list(PEAK_COLUMNS)
        assert run.basis is None
        rt = t["rt_min"].to_numpy(dtype=float)
        area = t["area"].to_numpy(dtype=float)
        assert np.all(np.isfinite(rt)) and np.all(rt >= 0)
        assert np.all(np.diff(rt) >= 0)
        assert np.all(np.isfinite(area)) and np.all(area >= 0)
    else:
        assert list(t.columns) == list(COMPOSITION_COLUMNS) + [
            c for c in COMPOSITION_OPTIONAL if c in t.columns]
        assert run.basis in ("mass_pct", "vol_pct", "mol_pct")
        assert np.all(np.isfinite(t["amount"].to_numpy(dtype=float)))
    for entry in run.import_log:
        assert set(entry) == {"row", "action", "reason"}
        assert entry["action"] in ("skipped", "changed")
        assert isinstance(entry["row"], int) and entry["row"] >= 1


@st.composite
def mutated_export(draw) -> bytes:
    data = draw(st.sampled_from(SEEDS))
    ops = draw(st.lists(st.sampled_from(
        ["byte", "drop_line", "dup_line", "separator", "unicode", "truncate"]), min_size=1,
        max_size=4))
    for op in ops:
        if not data:
            break
        if op == "byte":
            i = draw(st.integers(0, len(data) - 1))
            b = draw(st.integers(0, 255))
            data = data[:i] + bytes([b]) + data[i + 1:]
        elif op in ("drop_line", "dup_line"):
            lines = data.split(b"\n")
            i = draw(st.integers(0, len(lines) - 1))
            if op == "drop_line":
                del lines[i]
            else:
                lines.insert(i, lines[i])
            data = b"\n".join(lines)
        elif op == "separator":
            a, b = draw(st.sampled_from([(b",", b";"), (b";", b"\t"), (b"\t", b","),
                                         (b",", b"  "), (b".", b",")]))
            data = data.replace(a, b)
        elif op == "unicode":
            i = draw(st.integers(0, len(data)))
            s = draw(st.text(min_size=1, max_size=5)).encode("utf-8", "surrogatepass")
            data = data[:i] + s + data[i:]
        elif op == "truncate":
            data = data[:draw(st.integers(0, len(data)))]
    return data


@settings(max_examples=int(os.environ.get("DHA_FUZZ_EXAMPLES", "150")), deadline=None,
          suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])
@given(data=mutated_export())
def test_mutated_exports_read_or_fail_cleanly(tmp_path_factory, data):
    path = tmp_path_factory.mktemp("fuzz") / "mutated.csv"
    path.write_bytes(data)
    try:
        runs = read_input(path)
    except InputError as err:
        assert "\n" not in str(err)
        return
    assert runs
    for run in runs:
        _check_run(run)
