"""Batch processing for refinery QC: many runs in parallel, a summary table, flags, trends.

``run_batch`` expands files, folders and globs into input files, processes each with
``dha.pipeline`` in a process pool, writes one JSON (and any other format asked for) per run
and returns one summary row per run. A run that cannot be processed becomes a summary row
with ``status = "error"`` and its one-line message: a batch never stops for one bad file.

Flags per run: every specification check that failed or is marginal
(``benzene_vol_pct>1.0``, ``~ron<95.0`` for marginal; ``~e70_vol_pct(22..50)`` when the
uncertainty spans both limits of a range), and ``poor-identification`` when
the unidentified mass % exceeds ``[batch] unidentified_flag_mass_pct``.
"""
from __future__ import annotations

import glob
import logging
import os
from concurrent.futures import ProcessPoolExecutor, as_completed
from pathlib import Path
from typing import Any, Callable, Iterable

import numpy as np
import pandas as pd

from dha.errors import DhaError, InputError
from dha.safety import (atomic_path, atomic_write, atomic_write_text, inert_frame,
                        inert_workbook, make_folder)

log = logging.getLogger("dha.batch")

INPUT_SUFFIXES = (".csv", ".tsv", ".txt", ".xlsx", ".xls")

#: Summary columns (units in the names) in this order.
SUMMARY_COLUMNS = [
    "file", "injection", "sample_id", "injection_time", "status", "flags",
    "benzene_vol_pct", "aromatics_vol_pct", "olefins_vol_pct", "oxygen_mass_pct",
    "ethanol_vol_pct", "unidentified_mass_pct", "ron", "mon", "dvpe_kpa", "density_kg_m3",
    "e70_vol_pct", "e100_vol_pct", "checks_failed", "checks_marginal", "output", "error",
]


def quiet_run_warnings() -> None:
    """Keep per-run warnings out of the terminal during a batch (unless -v was given).

    Every warning is in its run's result (``warnings``) and counted in the summary; printing
    hundreds of them would bury the progress bar and the summary lines.
    """
    if logging.getLogger().getEffectiveLevel() >= logging.WARNING:
        logging.getLogger("dha").setLevel(logging.ERROR)


def expand_inputs(paths: Iterable[str | Path]) -> list[Path]:
    """Files, folders (their peak/composition files, not recursive) and glob patterns -> files.

    Folders and globs keep only export-like files (``INPUT_SUFFIXES``); a file named
    explicitly is always taken.

    Order is kept as given; each folder's files are sorted by name; duplicates removed.
    """
    out: list[Path] = []
    for raw in paths:
        text = str(raw)
        p = Path(text)
        if p.is_dir():
            found = sorted(q for q in p.iterdir() if q.is_file() and q.suffix.lower() in INPUT_SUFFIXES)
        elif p.is_file():
            found = [p]
        else:
            found = [Path(q) for q in sorted(glob.glob(text))
                     if Path(q).is_file() and Path(q).suffix.lower() in INPUT_SUFFIXES]
            if not found:
                raise InputError(f"{text}: no such file, folder or matching files")
        out.extend(found)
    seen, unique = set(), []
    for p in out:
        key = p.resolve()
        if key not in seen:
            seen.add(key)
            unique.append(p)
    return unique


def summary_row(result: dict[str, Any], library=None, unidentified_flag: float = 5.0) -> dict[str, Any]:
    """One summary row from a result dict (see module docstring for the flags)."""
    from dha.specs import quantities

    q = quantities(result, library)
    sample = result.get("sample") or {}
    checks = result.get("checks") or []
    flags = []
    marginal = {}
    for c in checks:
        if c["verdict"] == "fail":
            flags.append(f"{c['property']}{'<' if c['kind'] == 'min' else '>'}{c['limit']:g}")
        elif c["verdict"] == "marginal":
            marginal.setdefault(c["property"], {})[c["kind"]] = c["limit"]
    for prop, kinds in marginal.items():
        if len(kinds) == 2:   # uncertainty wider than the whole range: one flag, not two
            flags.append(f"~{prop}({kinds['min']:g}..{kinds['max']:g})")
        else:
            kind, limit = next(iter(kinds.items()))
            flags.append(f"~{prop}{'<' if kind == 'min' else '>'}{limit:g}")
    unid = q.get("unidentified_mass_pct", (None, None))[0]
    if unid is not None and unid > unidentified_flag:
        flags.append("poor-identification")
    props = result.get("properties") or {}
    row = {
        "file": Path(sample.get("source_file") or "").name,
        "injection": sample.get("injection"),
        "sample_id": sample.get("id"),
        "injection_time": sample.get("injection_time"),
        "status": "ok",
        "flags": " ".join(flags),
        "benzene_vol_pct": q["benzene_vol_pct"][0],
        "aromatics_vol_pct": q["aromatics_vol_pct"][0],
        "olefins_vol_pct": q["olefins_vol_pct"][0],
        "oxygen_mass_pct": q["oxygen_mass_pct"][0],
        "ethanol_vol_pct": q["ethanol_vol_pct"][0],
        "unidentified_mass_pct": unid,
        "checks_failed": sum(c["verdict"] == "fail" for c in checks),
        "checks_marginal": sum(c["verdict"] == "marginal" for c in checks),
        "error": None,
    }
    for key in ("ron", "mon", "dvpe_kpa", "density_kg_m3", "e70_vol_pct", "e100_vol_pct"):
        row[key] = props.get(key)
    return row


def _process_one(path: str, out_dir: str, formats: tuple[str, ...], spec: str | None,
                 settings: dict, library_dir: str | None, overwrite: bool) -> list[dict]:
    """Worker: one input file -> list of summary rows (never raises a DhaError)."""
    from dha import pipeline
    from dha.library import load_library

    try:
        library = load_library(library_dir)
        results = pipeline.process_file(Path(path), settings, library, spec=spec)
        rows = []
        for result in results:
            written = pipeline.write_outputs(result, Path(out_dir), formats=formats,
                                             overwrite=overwrite)
            row = summary_row(result, library, settings["batch"]["unidentified_flag_mass_pct"])
            row["file"] = Path(path).name
            row["output"] = ";".join(str(Path(w).name) for w in written)
            rows.append(row)
        return rows
    except DhaError as err:
        return [{"file": Path(path).name, "status": "error", "error": str(err)}]
    except Exception as err:  # a bug must not stop the other runs of the batch
        log.exception("internal error on %s", path)
        return [{"file": Path(path).name, "status": "error",
                 "error": f"internal error ({err.__class__.__name__}: {err}); please report it"}]


def run_batch(files: list[Path], out_dir: Path, settings: dict, *, spec: str | None = None,
              library_dir: str | None = None, formats: tuple[str, ...] = ("json",),
              jobs: int = 1, overwrite: bool = False,
              progress: Callable[[int], None] | None = None) -> pd.DataFrame:
    """Process ``files`` into ``out_dir``; return the summary table (one row per run).

    Rows keep the order of ``files`` whatever order the workers finish in.
    """
    make_folder(out_dir)
    args = [(str(f), str(out_dir), tuple(formats), spec, settings, library_dir, overwrite)
            for f in files]
    results: dict[int, list[dict]] = {}
    if jobs <= 1 or len(files) <= 1:
        for i, a in enumerate(args):
            results[i] = _process_one(*a)
            if progress:
                progress(1)
    else:
        with ProcessPoolExecutor(max_workers=min(jobs, len(files), os.cpu_count() or 1)) as pool:
            futures = {pool.submit(_process_one, *a): i for i, a in enumerate(args)}
            for fut in as_completed(futures):
                results[futures[fut]] = fut.result()
                if progress:
                    progress(1)
    rows = [row for i in range(len(files)) for row in results[i]]
    table = pd.DataFrame(rows).reindex(columns=SUMMARY_COLUMNS)
    return table


def write_summary(table: pd.DataFrame, out_dir: Path, profile: dict | None,
                  trend_quantities: list[str]) -> list[Path]:
    """summary.csv, summary.xlsx and one trend chart (PNG) per quantity present."""
    written = []
    csv_path = out_dir / "summary.csv"
    atomic_write_text(csv_path, inert_frame(table).to_csv(index=False), newline="")
    written.append(csv_path)
    xlsx_path = out_dir / "summary.xlsx"
    with atomic_path(xlsx_path) as tmp, pd.ExcelWriter(tmp, engine="openpyxl") as xw:
        table.to_excel(xw, sheet_name="runs", index=False)
        flagged = table[table["flags"].fillna("").astype(str).str.len() > 0]
        flagged.to_excel(xw, sheet_name="flagged runs", index=False)
        for ws in xw.book.worksheets:
            ws.freeze_panes = "A2"
            for col in ws.columns:
                width = max(len(str(c.value)) if c.value is not None else 0 for c in col)
                ws.column_dimensions[col[0].column_letter].width = min(max(10, width + 2), 50)
        inert_workbook(xw.book)  # string cells only (no live formula), controls visible
    written.append(xlsx_path)
    written += write_trends(table, out_dir, profile, trend_quantities)
    return written


_TREND_UNITS = {"benzene_vol_pct": "benzene [% v/v]", "ron": "RON [-]", "mon": "MON [-]",
                "aromatics_vol_pct": "aromatics [% v/v]", "olefins_vol_pct": "olefins [% v/v]",
                "oxygen_mass_pct": "oxygen [% m/m]", "dvpe_kpa": "DVPE [kPa]",
                "density_kg_m3": "density at 15 °C [kg/m³]", "ethanol_vol_pct": "ethanol [% v/v]"}


def write_trends(table: pd.DataFrame, out_dir: Path, profile: dict | None,
                 trend_quantities: list[str]) -> list[Path]:
    """Trend charts of each quantity across the runs, in injection-time order where known."""
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    ok = table[table["status"] == "ok"].copy()
    if ok.empty:
        return []
    times = pd.to_datetime(ok["injection_time"], errors="coerce", format="mixed") \
        if ok["injection_time"].notna().any() else pd.Series(pd.NaT, index=ok.index)
    ok["_order"] = times
    ok = ok.sort_values(["_order", "file"], na_position="last", kind="stable")
    labels = ok["sample_id"].fillna(ok["file"]).astype(str).tolist()
    written = []
    for key in trend_quantities:
        if key not in ok or ok[key].isna().all():
            continue
        fig, ax = plt.subplots(figsize=(8, 3.6))
        values = ok[key].astype(float).to_numpy()
        ax.plot(range(len(ok)), values, marker="o", lw=1.2, color="#1f5f8b")
        outside = np.zeros(len(values), dtype=bool)
        for lim in (profile or {}).get("limits", []):
            if lim["quantity"] == key:
                outside |= (values < lim["value"]) if lim["kind"] == "min" else (values > lim["value"])
        if outside.any():
            ax.plot(np.flatnonzero(outside), values[outside], ls="none", marker="o", ms=8,
                    mfc="none", mec="#b03a2e", mew=1.6, label="beyond a limit")
            ax.legend(loc="best", fontsize=7, frameon=False)
        for lim in (profile or {}).get("limits", []):
            if lim["quantity"] == key:
                ax.axhline(lim["value"], color="#b03a2e", ls="--", lw=1)
                ax.annotate(f"{lim['kind']} {lim['value']:g}", (0, lim["value"]),
                            textcoords="offset points", xytext=(2, 3), fontsize=7, color="#b03a2e")
        ax.set_ylabel(_TREND_UNITS.get(key, key))
        ax.set_xticks(range(len(ok)))
        ax.set_xticklabels(labels, rotation=60, ha="right", fontsize=6)
        ax.set_title(f"{_TREND_UNITS.get(key, key)} across the batch "
                     f"({'injection-time order' if ok['_order'].notna().any() else 'file order'})",
                     fontsize=9)
        ax.grid(alpha=0.3)
        fig.tight_layout()
        path = out_dir / f"trend_{key}.png"
        atomic_write(path, lambda fh: fig.savefig(fh, format="png", dpi=110))
        plt.close(fig)
        written.append(path)
    return written
