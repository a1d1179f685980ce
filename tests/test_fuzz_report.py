"""Whole-command fuzz test: hypothesis-made exports and settings through ``dha report``.

Each example writes a peak table (random separator, decimal mark, thousands grouping, a few
cells in the other decimal mark, hostile names and metadata with formula starts, control
characters, quotes and line breaks, absurd or missing numbers) and sometimes a settings file
with odd values, runs ``dha report`` in-process (JSON and xlsx) and asserts the contract:

- exit 0 or 1, never a traceback, every stderr line a ``dha:`` line (one-line errors);
- on success: group totals sum to 100 %, the mass balance closes, and no silent change:
  every row the import log does not mention is in the result with the area written;
- no live formula in any output (``hostile_checks.live_formulas``).

CI runs a few dozen examples (``DHA_FUZZ_EXAMPLES``, default 40); the closing note of issue
16 reports one run at 1,000. ``DHA_FUZZ_STATS=path`` appends one JSON line per example.
"""
from __future__ import annotations

import json
import math
import os
import re
from pathlib import Path

import pytest
from click.testing import CliRunner
from hypothesis import HealthCheck, Phase, given, settings, strategies as st

from dha.cli import cli

from hostile_checks import live_formulas

EXAMPLES = int(os.environ.get("DHA_FUZZ_EXAMPLES", "40"))
STATS = os.environ.get("DHA_FUZZ_STATS")

NAMES = ["propane", "isobutane", "n-butane", "n-pentane", "benzene", "toluene", "ethanol",
         "2,2,4-trimethylpentane", "n-hexane", "methylcyclohexane", ""]
HOSTILE = ['=HYPERLINK("http://example.invalid","y")', "=1+2", "+x", "-cmd", "@SUM(A1)",
           "\tx", "n-bu\x07tane", "a\x1b[31mb", "n-bu\x00tane", "two\nlines", 'q"uote',
           "x\u202eevil", "\u00e9th\u00e9r", "semi;colon", "com,ma", "\x85nel", "=" * 3]
BAD_NUMBERS = ["1e308", "inf", "-inf", "nan", "NaN", "-5", "0", "", "abc", "1,234,5",
               "1e15", "\u221212", "12%"]

name_st = st.one_of(st.sampled_from(NAMES), st.sampled_from(HOSTILE),
                    st.text(alphabet=st.characters(codec="utf-8", exclude_categories=("Cs",)),
                            max_size=12))


@st.composite
def exports(draw):
    sep = draw(st.sampled_from([",", ";", "\t"]))
    mark = draw(st.sampled_from([".", ","]))
    n = draw(st.integers(1, 14))
    rows = []
    rt = 1.0
    for _ in range(n):
        rt += draw(st.floats(0.05, 4.0))
        rt = round(rt, 2)
        kind = draw(st.sampled_from(["ok"] * 6 + ["other_mark", "grouped", "bad"]))
        value = round(draw(st.floats(0.5, 5e6)), draw(st.integers(0, 3)))
        rows.append({"rt": round(rt, 3), "value": value, "kind": kind,
                     "bad": draw(st.sampled_from(BAD_NUMBERS)),
                     "name": draw(name_st)})
    meta = {"Sample": draw(st.one_of(st.sampled_from(HOSTILE), st.text(max_size=10))),
            "Operator": draw(st.sampled_from(["R. Quill", "=cmd|' /C calc'!A0", "@x", "-2"]))}
    cfg = draw(st.sampled_from([None] * 8 + ["[identify]\nri_tolerance = 5.0\n",
                                "[identify]\nri_tolerance = nan\n",
                                "[identify]\nri_tolerance = inf\n",
                                "[reader]\nzero_area = \"keep\"\n",
                                "[limits]\nmax_text_chars = 8\n",
                                "[report]\nformats = []\n"]))
    return {"sep": sep, "mark": mark, "rows": rows, "meta": meta, "settings": cfg}


def fmt_number(value: float, mark: str, grouped: bool) -> str:
    """``value`` written with decimal ``mark`` (and thousands grouping by the other mark)."""
    text = f"{value:,.3f}" if grouped else f"{value:.3f}"
    text = text.rstrip("0").rstrip(".") if "." in text else text
    if mark == ",":
        text = text.replace(",", "\0").replace(".", ",").replace("\0", ".")
    return text


def quote(cell: str, sep: str) -> str:
    if any(ch in cell for ch in (sep, '"', "\n", ",", ";")) or cell != cell.strip():
        return '"' + cell.replace('"', '""') + '"'
    return cell


def write_export(case: dict, path: Path) -> dict[int, float | None]:
    """Write the export; returns {line number: area meant (None = not a number)}."""
    sep, mark = case["sep"], case["mark"]
    other = "," if mark == "." else "."
    lines = [f"{k}: {v}" for k, v in case["meta"].items()]
    lines.append(sep.join(["RT [min]", "Area", "Name"]))
    meant: dict[int, float | None] = {}
    for row in case["rows"]:
        if row["kind"] == "bad":
            # "0" is kept with [reader] zero_area = "keep"; "12%" is 12 (a unit sign)
            area, value = row["bad"], {"0": 0.0, "12%": 12.0}.get(row["bad"])
        elif row["kind"] == "other_mark":
            # the other mark, written so it cannot be read as grouping (1, 2 or 4+ decimals)
            area, value = fmt_number(row["value"] + 0.25, other, False), row["value"] + 0.25
        else:
            area, value = fmt_number(row["value"], mark, row["kind"] == "grouped"), row["value"]
        # times with two decimals: "2,422" next to an area "4818600.45" is 2422 by the
        # table's evidence (a decimal point), a reading the generator cannot mean otherwise
        cells = [fmt_number(round(row["rt"], 2), mark, False), area, row["name"]]
        # the reader's line numbers: a lone CR ends a line too (old Mac files)
        so_far = "\n".join(lines)
        line_no = len(so_far.replace("\r\n", "\n").replace("\r", "\n").split("\n")) + 1
        lines.append(sep.join(quote(c, sep) for c in cells))
        meant[line_no] = value
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return meant


def _record(outcome: dict) -> None:
    if STATS:
        with open(STATS, "a", encoding="utf-8") as fh:
            fh.write(json.dumps(outcome) + "\n")


@settings(max_examples=EXAMPLES, deadline=None, derandomize=not STATS,
          phases=(Phase.explicit, Phase.reuse, Phase.generate),  # no shrinking: keeps CI fast
          suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow])
@given(case=exports())
def test_report_on_hostile_exports(tmp_path_factory, case):
    folder = tmp_path_factory.mktemp("fuzz")
    src = folder / "=run.csv"
    meant = write_export(case, src)
    args = ["report", str(src), "-o", str(folder / "out"), "--format", "json,xlsx", "--spec", ""]
    if case["settings"]:
        (folder / "lab.toml").write_text(case["settings"], encoding="utf-8")
        args += ["--settings", str(folder / "lab.toml")]
    res = CliRunner().invoke(cli, args)
    outcome = {"exit": res.exit_code, "traceback": False, "silent_changes": 0,
               "live_formulas": 0, "unbalanced": 0}
    try:
        assert res.exception is None or isinstance(res.exception, SystemExit), repr(res.exception)
        outcome["traceback"] = "Traceback" in res.output + res.stderr
        assert not outcome["traceback"]
        assert res.exit_code in (0, 1), res.exit_code
        assert all(ln.startswith("dha:") for ln in res.stderr.splitlines()), res.stderr
        outcome["live_formulas"] = len(live_formulas(folder / "out"))
        assert outcome["live_formulas"] == 0, live_formulas(folder / "out")
        if res.exit_code == 1:
            assert any(ln.startswith("dha: error:") for ln in res.stderr.splitlines())
            return
        result = json.loads((folder / "out" / "=run.json").read_text(encoding="utf-8"))
        totals = result["totals"]["mass_pct"]
        balance = result["mass_balance"]
        if abs(sum(totals.values()) - 100.0) > 0.01 or not balance["closes"]:
            outcome["unbalanced"] = 1
        assert outcome["unbalanced"] == 0, (totals, balance)
        # no silent change: every row the log does not mention is in the result with the
        # area written (summed over the components at its retention time: a co-elution split
        # shares one peak's area)
        logged = {e["row"] for e in result["import_log"]}
        area_at: dict[float, float] = {}
        for comp in result["components"]:
            if comp.get("rt_min") is not None:
                key = round(comp["rt_min"], 3)
                area_at[key] = area_at.get(key, 0.0) + (comp.get("area") or 0.0)
        rt_of = {line: row["rt"] for line, row in zip(meant, case["rows"])}
        silent = []
        for line, value in meant.items():
            if line in logged:
                continue
            got = area_at.get(round(rt_of[line], 3))
            if value is None or got is None or not math.isclose(got, value, rel_tol=1e-7):
                silent.append((line, rt_of[line], value, got))
        outcome["silent_changes"] = len(silent)
        assert not silent, (silent, result["import_log"])
    finally:
        _record(outcome)
