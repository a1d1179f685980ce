"""Batch processing for refinery QC and archive reprocessing: many runs, never a result lost.

``plan_batch`` maps every input file to its place in the output folder; ``run_batch``
processes what is not up to date (in a process pool, or on a Dask cluster, see
``dha.batch_dask``), writes one JSON (and any other format asked for) per run, and returns one
summary row per result found in the output folder. A run that cannot be processed becomes a
summary row with status "not processed" and its one-line message: a batch never stops for one
bad file.

Where results go (the mirror rule)
----------------------------------
The output tree mirrors the input files' folders relative to their *input root*: the deepest
folder that holds all the inputs of the batch. ``dha batch archive/2024-01 archive/2024-02 -o
out`` writes ``out/2024-01/run.json`` and ``out/2024-02/run.json``. The first batch into an
output folder records its input root in ``out/dha-batch.json``; later batches into that folder
whose inputs lie under the same root use it again, so a late run lands beside its month's
results. A workbook with several runs gives ``<stem>__<sheet>.json``. Two inputs that would map
to one output (``A/run.csv`` and ``A/run.xlsx``; or a new input onto a result made from another
input) are an error before anything is written.

Up to date, resumable, atomic
-----------------------------
Every result carries ``provenance`` = {input_sha256, library_sha256, settings_sha256,
tool_version, input_path, run_index, runs_in_input}. A run whose results exist with the same
input, library, settings and tool version is *up to date* and not processed again
(``--overwrite`` forces). Every file is written to a hidden temporary file in its folder and
renamed into place, JSON last: a batch killed at any moment leaves no half-written file under
a result's name, and the next run picks up where it stopped. The summary is built from every
result in the output folder, not only from this invocation, and from the inputs an earlier
batch could not process (kept in ``dha-batch.json`` until processed or gone).

Flags per run: every specification check that failed or is marginal
(``benzene_vol_pct>1.0``, ``~ron<95.0`` for marginal; ``~e70_vol_pct(22..50)`` when the
uncertainty spans both limits of a range), and ``poor-identification`` when
the unidentified mass % exceeds ``[batch] unidentified_flag_mass_pct``.
"""
from __future__ import annotations

import glob
import json
import logging
import os
import re
from concurrent.futures import FIRST_COMPLETED, ProcessPoolExecutor, wait
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Callable, Iterable

from dha.errors import DhaError, InputError
from dha.provenance import provenance as make_provenance
from dha.provenance import settings_sha256, sha256_file  # noqa: F401 - part of this API
from dha.safety import atomic_path, atomic_write_text, inert_frame, inert_workbook, make_folder

log = logging.getLogger("dha.batch")

INPUT_SUFFIXES = (".csv", ".tsv", ".txt", ".xlsx", ".xls")
#: The output folder's record of its input root (see the module docstring).
BATCH_RECORD = "dha-batch.json"
#: Files of the output folder that are not per-run results.
SUMMARY_FILES = ("summary.csv", "summary.xlsx", BATCH_RECORD)

#: Summary columns (machine names; summary.xlsx shows them in words) in this order.
SUMMARY_COLUMNS = [
    "input", "injection", "sample_id", "injection_time", "status", "this_batch", "flags",
    "benzene_vol_pct", "aromatics_vol_pct", "olefins_vol_pct", "oxygen_mass_pct",
    "ethanol_vol_pct", "unidentified_mass_pct", "ron", "mon", "dvpe_kpa", "density_kg_m3",
    "e70_vol_pct", "e100_vol_pct", "checks_failed", "checks_marginal", "spec", "output", "error",
]

#: ``status`` values.
PASSES, FAILS, NOT_PROCESSED = "processed, passes", "processed, fails spec", "not processed"
#: ``this_batch`` values: what this invocation did with the run.
DONE_NOW, UP_TO_DATE, EARLIER = "processed", "up to date", "earlier batch"


def quiet_run_warnings() -> None:
    """Keep per-run warnings out of the terminal during a batch (unless -v was given).

    Every warning is in its run's result (``warnings``) and counted in the summary; printing
    hundreds of them would bury the progress bar and the summary lines.
    """
    if logging.getLogger().getEffectiveLevel() >= logging.WARNING:
        logging.getLogger("dha").setLevel(logging.ERROR)


def expand_inputs(paths: Iterable[str | Path], recursive: bool = False,
                  exclude: Path | None = None) -> list[Path]:
    """Files, folders and glob patterns -> files.

    Folders and globs keep only export-like files (``INPUT_SUFFIXES``); a file named
    explicitly is always taken. ``recursive`` also walks the folders' sub-folders; hidden
    files and folders and anything inside ``exclude`` (the output folder) are left out.

    Order is kept as given; each folder's files are sorted by path; duplicates removed. A path
    that matches nothing is kept as given: processing it fails ("file not found") in its own
    summary row and the other runs go on.
    """
    skip = Path(os.path.abspath(exclude)) if exclude is not None else None

    def wanted(q: Path) -> bool:
        if not q.is_file() or q.suffix.lower() not in INPUT_SUFFIXES or q.name.startswith("."):
            return False
        return skip is None or not Path(os.path.abspath(q)).is_relative_to(skip)

    out: list[Path] = []
    for raw in paths:
        text = str(raw)
        p = Path(text)
        if p.is_dir():
            if recursive:
                found = sorted(q for q in p.rglob("*") if wanted(q)
                               and not any(part.startswith(".") for part in q.relative_to(p).parts))
            else:
                found = sorted(q for q in p.iterdir() if wanted(q))
        elif p.is_file():
            found = [p]
        else:
            found = [Path(q) for q in sorted(glob.glob(text, recursive=recursive)) if wanted(Path(q))]
            if not found:
                # kept: processing it fails with one line in the summary; the others go on
                found = [p]
        out.extend(found)
    seen, unique = set(), []
    for p in out:
        key = p.resolve()
        if key not in seen:
            seen.add(key)
            unique.append(p)
    return unique


# --------------------------------------------------------------------------------------------
# Hashes and atomic files

def write_via_temp(path: str | Path, writer: Callable[[Path], Any]) -> Path:
    """Call ``writer(temp)`` on a temporary file beside ``path``, then rename it onto ``path``.

    The rename is atomic on one file system (``dha.safety.atomic_path``): a reader, or the
    next batch after a kill, sees the old file or the whole new one, never half of it.
    """
    with atomic_path(path) as tmp:
        writer(tmp)
    return Path(path)


def remove_stale_temporaries(out_dir: Path, min_age_s: float = 600.0) -> int:
    """Delete temporary files that a killed batch left in ``out_dir``.

    Temporaries are hidden ``.<name>.<random>.part`` files (``dha.safety``); only those not
    touched for ``min_age_s`` are removed, so a second batch writing into the same folder at
    the same time keeps its own. They never carry a result's name, so a left-over one is never
    mistaken for a result.
    """
    import time

    n = 0
    now = time.time()
    for tmp in out_dir.rglob(".*.part"):
        try:
            if tmp.is_file() and now - tmp.stat().st_mtime > min_age_s:
                tmp.unlink()
                n += 1
        except OSError:
            continue
    return n


# --------------------------------------------------------------------------------------------
# Planning: where each input's results go

@dataclass
class Task:
    """One input file of a batch and where its results go."""

    path: str            # the input as given (absolute)
    rel: str             # input path relative to the input root, "/"-separated
    target_stem: str     # output stem relative to the output folder, "/"-separated

    def out_prefix(self, out_dir: Path) -> Path:
        return out_dir / self.target_stem


@dataclass
class Plan:
    """What a batch will do: tasks and the input root."""

    root: Path
    tasks: list[Task] = field(default_factory=list)


def input_root(files: list[Path]) -> Path:
    """The deepest folder holding every file of ``files``."""
    parents = [os.path.abspath(f.parent) for f in files]
    return Path(os.path.commonpath(parents)) if parents else Path.cwd()


def _read_record(out_dir: Path) -> dict:
    try:
        return json.loads((out_dir / BATCH_RECORD).read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return {}


def plan_batch(files: list[Path], out_dir: Path) -> Plan:
    """Map inputs to output stems by the mirror rule; raise on two inputs -> one output.

    Raises
    ------
    InputError
        Two inputs of this batch map to one output (names both and says what to do).
    """
    root = input_root(files)
    recorded = _read_record(out_dir).get("input_root")
    if recorded and all(Path(os.path.abspath(f)).is_relative_to(recorded) for f in files):
        root = Path(recorded)
    plan = Plan(root=root)
    claimed: dict[str, str] = {}
    for f in files:
        absolute = Path(os.path.abspath(f))
        rel = absolute.relative_to(root).as_posix()
        stem = Path(rel).with_suffix("").as_posix()
        key = stem.casefold()     # case-insensitive file systems would merge them too
        if key in claimed:
            raise InputError(
                f"{claimed[key]} and {rel} would both be written as {stem}.json in {out_dir}; "
                "rename one of them or run them into separate output folders (nothing written)")
        claimed[key] = rel
        plan.tasks.append(Task(path=str(absolute), rel=rel, target_stem=stem))
    return plan


def write_record(out_dir: Path, root: Path) -> None:
    """Record the input root of the output folder (first batch only)."""
    if not (out_dir / BATCH_RECORD).exists():
        atomic_write_text(out_dir / BATCH_RECORD, json.dumps(
            {"input_root": str(root), "note": "input root of the first batch into this "
             "folder; later batches mirror inputs under it the same way"}, indent=2) + "\n")


def record_not_processed(out_dir: Path, failed: dict[str, str], done: set[str]) -> dict[str, str]:
    """Keep the inputs that could not be processed in the folder's record; return them all.

    ``failed`` ({input path below the root: message}) are added; ``done`` (inputs processed or
    up to date in this batch) and inputs that no longer exist are removed. A failed input
    leaves no result file, so without this a later batch that does not name it again would
    drop its "not processed" row from the summary. (Two batches writing into one folder at
    once: the last one's record is kept.)
    """
    rec = _read_record(out_dir)
    root = Path(str(rec.get("input_root") or "."))
    known = {str(k): str(v) for k, v in (rec.get("not_processed") or {}).items()}
    now = {k: v for k, v in known.items() if k not in done and (root / k).exists()}
    now.update(failed)
    if now != known and rec:
        rec["not_processed"] = dict(sorted(now.items()))
        atomic_write_text(out_dir / BATCH_RECORD, json.dumps(rec, indent=2) + "\n")
    return now


# --------------------------------------------------------------------------------------------
# Summary rows

def summary_row(result: dict[str, Any], library=None, unidentified_flag: float = 5.0) -> dict[str, Any]:
    """One summary row from a result dict (see module docstring for the flags)."""
    from dha.specs import quantities

    q = quantities(result, library)
    sample = result.get("sample") or {}
    checks = result.get("checks") or []
    flags = []
    marginal = {}
    for c in checks:
        if c.get("limit") is None:      # a run-quality check (identification): no limit
            if c["verdict"] in ("fail", "marginal"):
                flags.append(("" if c["verdict"] == "fail" else "~") + str(c["property"]))
            continue
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
    prov = result.get("provenance") or {}
    n_fail = sum(c["verdict"] == "fail" for c in checks)
    specs_named = sorted({str(c.get("spec")) for c in checks
                          if c.get("spec") and c.get("spec") != "run quality"})
    row = {
        "input": prov.get("input_path") or sample.get("source_file"),
        "injection": sample.get("injection"),
        "sample_id": sample.get("id"),
        "injection_time": sample.get("injection_time"),
        "status": FAILS if n_fail else PASSES,
        "this_batch": DONE_NOW,
        "flags": " ".join(flags),
        "benzene_vol_pct": q["benzene_vol_pct"][0],
        "aromatics_vol_pct": q["aromatics_vol_pct"][0],
        "olefins_vol_pct": q["olefins_vol_pct"][0],
        "oxygen_mass_pct": q["oxygen_mass_pct"][0],
        "ethanol_vol_pct": q["ethanol_vol_pct"][0],
        "unidentified_mass_pct": unid,
        "checks_failed": n_fail,
        "checks_marginal": sum(c["verdict"] == "marginal" for c in checks),
        "spec": ", ".join(specs_named) or None,
        "error": None,
    }
    for key in ("ron", "mon", "dvpe_kpa", "density_kg_m3", "e70_vol_pct", "e100_vol_pct"):
        row[key] = props.get(key)
    return row


def is_failure(table) -> Any:
    """Boolean Series: rows of runs that were not processed."""
    return table["status"] == NOT_PROCESSED


# --------------------------------------------------------------------------------------------
# The per-run function (the same on every engine)

@dataclass(frozen=True)
class Job:
    """Everything a worker needs besides the task; small and picklable."""

    out_dir: str
    formats: tuple[str, ...]
    spec: str | None
    settings: dict
    library_dir: str | None
    overwrite: bool
    settings_sha256: str
    unidentified_flag: float


def _existing_results(task: Task, out_dir: Path) -> list[tuple[Path, dict]]:
    """Results in the output folder made from this task's input path."""
    prefix = task.out_prefix(out_dir)
    found = []
    candidates = [prefix.with_name(prefix.name + ".json")]
    if prefix.parent.is_dir():
        candidates += sorted(prefix.parent.glob(glob.escape(prefix.name) + "__*.json"))
    for path in candidates:
        try:
            with open(path, encoding="utf-8") as fh:
                result = json.load(fh)
        except (OSError, ValueError):
            continue
        if isinstance(result, dict) and (result.get("provenance") or {}).get("input_path") == task.rel:
            found.append((path, result))
    return found


def _foreign_result(task: Task, out_dir: Path) -> str | None:
    """The input path of a result at this task's target made from another input, if any."""
    path = task.out_prefix(out_dir).with_name(Path(task.target_stem).name + ".json")
    try:
        with open(path, encoding="utf-8") as fh:
            other = (json.load(fh).get("provenance") or {}).get("input_path")
    except (OSError, ValueError, AttributeError):
        return None
    return other if other and other != task.rel else None


def _up_to_date(existing: list[tuple[Path, dict]], provenance: dict, formats) -> bool:
    keys = ("input_sha256", "library_sha256", "settings_sha256", "tool_version")
    if not existing:
        return False
    n = (existing[0][1].get("provenance") or {}).get("runs_in_input")
    if n != len(existing):
        return False
    for path, result in existing:
        prov = result.get("provenance") or {}
        if any(prov.get(k) != provenance[k] for k in keys):
            return False
        for fmt in formats:
            if fmt != "json" and not path.with_suffix("." + fmt).is_file():
                return False
    return True


def _error_row(task: Task, message: str) -> dict:
    return {"input": task.rel, "status": NOT_PROCESSED, "this_batch": DONE_NOW, "error": message}


def process_task(task: Task, job: Job) -> list[dict]:
    """Worker: one input file -> one outcome per run (never raises for a bad input).

    Each outcome is ``{"row": summary row, "result": the result dict or None, "path": JSON
    path relative to the output folder}``; ``result`` is None for an up-to-date run (its JSON
    is already there) and for an input that could not be processed.
    """
    from dha import pipeline
    from dha.library import load_library

    out_dir = Path(job.out_dir)
    try:
        library = load_library(job.library_dir)
        pipeline.check_input_path(task.path)   # missing, a folder, a FIFO: one line, no traceback
        provenance = make_provenance(sha256_file(task.path), library, job.settings_sha256)
        existing = _existing_results(task, out_dir)
        if not job.overwrite:
            if _up_to_date(existing, provenance, job.formats):
                outcomes = []
                for path, result in existing:
                    row = summary_row(result, library, job.unidentified_flag)
                    row["this_batch"] = UP_TO_DATE
                    row["output"] = _outputs(path, out_dir, job.formats)
                    outcomes.append({"row": row, "result": None, "path": _rel(path, out_dir),
                                     "order": _order(result),
                                     "provenance": result.get("provenance")})
                return outcomes
            other = _foreign_result(task, out_dir)
            if other:
                raise InputError(f"{task.rel}: its result would replace the one made from "
                                 f"{other} in {out_dir}; use another output folder or "
                                 "--overwrite")
        stems = pipeline.process_file_stems(Path(task.path), job.settings, library, spec=job.spec)
        parent = task.out_prefix(out_dir).parent
        base = Path(task.target_stem).name
        outcomes = []
        for index, (stem, result) in enumerate(stems):
            suffix = stem[len(Path(task.path).stem):]    # "" or "__<sheet>"
            result["provenance"] = dict(provenance, input_path=task.rel, run_index=index,
                                        runs_in_input=len(stems))
            written = write_outputs_atomic(result, parent, base + suffix, job.formats)
            row = summary_row(result, library, job.unidentified_flag)
            row["output"] = ";".join(_rel(w, out_dir) for w in written)
            json_path = parent / f"{base + suffix}.json"
            outcomes.append({"row": row, "result": result, "path": _rel(json_path, out_dir),
                             "order": (task.rel, index)})
        # results of runs that the input no longer holds (a sheet removed) would be stale
        keep = {o["path"] for o in outcomes}
        removed = [_rel(p, out_dir) for p, _ in existing if _rel(p, out_dir) not in keep]
        for rel in removed:
            (out_dir / rel).unlink(missing_ok=True)
        outcomes[0]["removed"] = removed
        return outcomes
    except DhaError as err:
        return [{"row": _error_row(task, str(err)), "result": None, "path": None,
                 "order": (task.rel, 0)}]
    except Exception as err:  # a bug must not stop the other runs of the batch
        log.error("internal error on %s (%s: %s); run with -vv for details", task.rel,
                  type(err).__name__, err)
        log.debug("internal error on %s", task.rel, exc_info=True)
        return [{"row": _error_row(task, f"internal error ({err.__class__.__name__}: {err}); "
                                   "please report it"), "result": None, "path": None,
                 "order": (task.rel, 0)}]


def _rel(path: Path, out_dir: Path) -> str:
    return Path(path).relative_to(out_dir).as_posix()


def _order(result: dict) -> tuple:
    prov = result.get("provenance") or {}
    return (prov.get("input_path") or "", prov.get("run_index") or 0)


def _outputs(json_path: Path, out_dir: Path, formats) -> str:
    paths = [json_path.with_suffix("." + f) for f in formats if f != "json"] + [json_path]
    return ";".join(_rel(p, out_dir) for p in paths if p.is_file())


def write_outputs_atomic(result: dict, folder: Path, stem: str, formats) -> list[Path]:
    """As ``pipeline.write_outputs`` (JSON last, with every warning), each file atomically."""
    from dha import pipeline
    from dha.errors import SettingsError

    formats = list(dict.fromkeys(formats))
    unknown = [f for f in formats if f not in pipeline.FORMATS]
    if unknown:
        raise SettingsError(f"unknown output format(s) {', '.join(unknown)}; "
                            f"use {', '.join(pipeline.FORMATS)}")
    table = pipeline.writers()
    for fmt in formats:
        if table.get(fmt) is None:
            msg = f"{fmt} output not written: no {fmt} writer in this version"
            if msg not in result["warnings"]:
                result["warnings"].append(msg)
    todo = [f for f in formats if table.get(f) is not None]
    folder.mkdir(parents=True, exist_ok=True)
    written = []
    for fmt in sorted(todo, key=lambda f: f == "json"):
        target = folder / f"{stem}.{fmt}"
        table[fmt](result, target)      # every writer writes atomically (dha.safety)
        written.append(target)
    return written


# --------------------------------------------------------------------------------------------
# The driver

@dataclass
class BatchOutcome:
    """What ``run_batch`` did: one summary row per result in the output folder."""

    table: Any                       # pandas DataFrame, SUMMARY_COLUMNS
    processed: int = 0
    up_to_date: int = 0
    failed: int = 0
    earlier: int = 0


def run_batch(files: list[Path], out_dir: Path, settings: dict, *, spec: str | None = None,
              library_dir: str | None = None, formats: tuple[str, ...] = ("json",),
              jobs: int = 1, overwrite: bool = False,
              progress: Callable[[int], None] | None = None,
              engine: str = "local", scheduler: str | None = None,
              on_result: Callable[[dict], None] | None = None, database: bool = True):
    """Process ``files`` into ``out_dir``; return the summary table (one row per result).

    Rows are sorted by input path (then run order within a workbook), whatever order the
    workers finish in; results already in the folder from earlier batches are included. The
    returned DataFrame carries counts in ``table.attrs["counts"]``.
    ``on_result(outcome)`` is called in the driver as each run finishes. With ``database``
    every run is also stored in the folder's results database (``dha.results_db``), one
    transaction per run as it finishes.
    """
    import pandas as pd
    from dha import specs

    out_dir = Path(out_dir)
    plan = plan_batch(files, out_dir)
    make_folder(out_dir)
    remove_stale_temporaries(out_dir)
    write_record(out_dir, plan.root)
    if spec is None:
        spec = settings.get("report", {}).get("spec", "")
    profile = specs.load_profile(spec) if spec else None
    job = Job(out_dir=str(out_dir), formats=tuple(formats), spec=spec, settings=settings,
              library_dir=str(library_dir) if library_dir else None, overwrite=overwrite,
              settings_sha256=settings_sha256(settings, profile),
              unidentified_flag=float(settings["batch"]["unidentified_flag_mass_pct"]))
    rows: list[tuple[tuple, dict]] = []
    seen_paths: set[str] = set()
    recorder = None
    if database:
        from dha.results_db import Recorder
        recorder = Recorder(out_dir)

    def record(outcome: dict) -> None:
        if recorder is not None:
            recorder(outcome)
        if on_result is not None:
            on_result(outcome)

    failed: dict[str, str] = {}
    done: set[str] = set()

    def collect(outcomes: list[dict]) -> None:
        for o in outcomes:
            rows.append((o["order"], o["row"]))
            if o["path"]:
                seen_paths.add(o["path"])
            if o["row"].get("status") == NOT_PROCESSED:
                failed[str(o["row"].get("input"))] = str(o["row"].get("error"))
            else:
                done.add(str(o["row"].get("input")))
            record(o)
        if progress:
            progress(1)

    try:
        if engine == "dask":
            from dha.batch_dask import run_on_dask
            run_on_dask(plan.tasks, job, collect, scheduler=scheduler, jobs=jobs)
        elif jobs <= 1 or len(plan.tasks) <= 1:
            for task in plan.tasks:
                collect(process_task(task, job))
        else:
            run_in_pool(plan.tasks, job, collect, jobs)
        for outcome in earlier_rows(out_dir, seen_paths, job):
            rows.append((outcome["order"], outcome["row"]))
            record(outcome)
        named = {t.rel for t in plan.tasks}
        for rel, message in record_not_processed(out_dir, failed, done).items():
            if rel not in named:        # failed in an earlier batch, not named this time
                row = {"input": rel, "status": NOT_PROCESSED, "this_batch": EARLIER,
                       "error": message}
                rows.append(((rel, 0), row))
    finally:
        if recorder is not None:
            recorder.close()
    rows.sort(key=lambda item: (str(item[0][0]), item[0][1]))
    table = pd.DataFrame([r for _, r in rows]).reindex(columns=SUMMARY_COLUMNS)
    counts = table["this_batch"].value_counts()
    table.attrs["counts"] = {
        "processed": int(((table["this_batch"] == DONE_NOW) & ~is_failure(table)).sum()),
        "up_to_date": int(counts.get(UP_TO_DATE, 0)),
        "earlier": int(counts.get(EARLIER, 0)),
        "failed": int(is_failure(table).sum()),
    }
    return table


def run_in_pool(tasks: list[Task], job: Job, collect: Callable[[list[dict]], None],
                jobs: int) -> None:
    """Process ``tasks`` in a process pool, a bounded number in flight (streaming)."""
    workers = min(jobs, len(tasks), os.cpu_count() or 1)
    window = 4 * workers
    with ProcessPoolExecutor(max_workers=workers) as pool:
        pending = set()
        it = iter(tasks)
        for task in it:
            pending.add(pool.submit(process_task, task, job))
            if len(pending) >= window:
                done, pending = wait(pending, return_when=FIRST_COMPLETED)
                for fut in done:
                    collect(fut.result())
        while pending:
            done, pending = wait(pending, return_when=FIRST_COMPLETED)
            for fut in done:
                collect(fut.result())


def earlier_rows(out_dir: Path, seen: set[str], job: Job):
    """Outcomes (as ``process_task``'s) of every result in ``out_dir`` this batch did not touch."""
    from dha.library import load_library

    library = None
    for path in sorted(out_dir.rglob("*.json")):
        rel = _rel(path, out_dir)
        if rel in seen or path.name in SUMMARY_FILES or any(
                part.startswith(".") for part in Path(rel).parts):
            continue
        try:
            with open(path, encoding="utf-8") as fh:
                result = json.load(fh)
        except (OSError, ValueError):
            continue
        if not isinstance(result, dict) or result.get("schema") != "dha-result/1":
            continue
        if library is None:
            library = load_library(job.library_dir)
        row = summary_row(result, library, job.unidentified_flag)
        row["this_batch"] = EARLIER
        row["output"] = _outputs(path, out_dir, ("json", "xlsx", "pdf"))
        yield {"row": row, "result": result, "path": rel,
               "order": _order(result) if result.get("provenance") else (rel, 0)}


# --------------------------------------------------------------------------------------------
# Summary files

#: summary.xlsx: (column, header in words with its unit, decimals shown or None).
SUMMARY_HEADERS = [
    ("input", "input file (path below the input root)", None),
    ("injection", "injection (sheet)", None),
    ("sample_id", "sample id", None),
    ("injection_time", "injection time", None),
    ("status", "status", None),
    ("this_batch", "in this batch", None),
    ("spec", "specification applied", None),
    ("flags", "flags (failed checks; ~ marginal)", None),
    ("benzene_vol_pct", "benzene, % by volume", 2),
    ("aromatics_vol_pct", "aromatics, % by volume", 1),
    ("olefins_vol_pct", "olefins, % by volume", 1),
    ("oxygen_mass_pct", "oxygen, % by mass", 2),
    ("ethanol_vol_pct", "ethanol, % by volume", 1),
    ("unidentified_mass_pct", "unidentified peaks, % by mass", 1),
    ("ron", "RON, calculated (no unit)", 1),
    ("mon", "MON, calculated (no unit)", 1),
    ("dvpe_kpa", "DVPE, calculated, kilopascals", 1),
    ("density_kg_m3", "density at 15 °C, calculated, kilograms per cubic metre", 1),
    ("e70_vol_pct", "evaporated at 70 °C, calculated, % by volume", 1),
    ("e100_vol_pct", "evaporated at 100 °C, calculated, % by volume", 1),
    ("checks_failed", "checks failed (count)", 0),
    ("checks_marginal", "checks marginal (count)", 0),
    ("output", "output files", None),
    ("error", "why not processed", None),
]
_FAIL_FILL, _MARGINAL_FILL = "F4C7C3", "FCE8B2"
_FLAG_RE = re.compile(r"^(~?)([a-z0-9_]+)")


def _flagged_columns(flags: str) -> dict[str, str]:
    """{summary column: "fail" | "marginal"} from a row's flags text."""
    out: dict[str, str] = {}
    for flag in str(flags or "").split():
        m = _FLAG_RE.match(flag)
        if m:
            kind = "marginal" if m.group(1) else "fail"
            if out.get(m.group(2)) != "fail":
                out[m.group(2)] = kind
    return out


def summary_workbook(table, profile: dict | None, counts: dict | None = None):
    """The people's summary (openpyxl Workbook): headers in words with units, rounded numbers,
    failed checks red and marginal ones amber, filters and a frozen header; sheets "runs" and
    "about" (specification named, counts, what the marks mean)."""
    import math

    from openpyxl import Workbook
    from openpyxl.styles import Alignment, Font, PatternFill

    fills = {"fail": PatternFill("solid", fgColor=_FAIL_FILL),
             "marginal": PatternFill("solid", fgColor=_MARGINAL_FILL)}
    bold = Font(bold=True)
    wrap = Alignment(wrap_text=True, vertical="top")
    cols = [c for c, _, _ in SUMMARY_HEADERS]
    records = [{k: (None if isinstance(v, float) and math.isnan(v) else v) for k, v in r.items()}
               for r in table.reindex(columns=cols).to_dict(orient="records")]
    wb = Workbook()
    ws_runs = wb.active
    ws_runs.title = "runs"
    for ws in (ws_runs,):
        ws.append([h for _, h, _ in SUMMARY_HEADERS])
        for cell in ws[1]:
            cell.font = bold
            cell.alignment = wrap
        ws.row_dimensions[1].height = 45
        ws.freeze_panes = "B2"
        for i, (col, header, _) in enumerate(SUMMARY_HEADERS, start=1):
            width = 30 if col in ("input", "flags", "output", "error") else 13
            ws.column_dimensions[ws.cell(1, i).column_letter].width = width
    formats = {d: "0" if d == 0 else "0." + "0" * d for d in (0, 1, 2)}
    next_row = {id(ws_runs): 2}     # ws.max_row scans every row: count here
    status_col = cols.index("status") + 1
    numeric = [(i, formats[d]) for i, (_, _, d) in enumerate(SUMMARY_HEADERS, start=1)
               if d is not None]
    where = {col: i for i, (col, _, _) in enumerate(SUMMARY_HEADERS, start=1)}
    for rec in records:
        values = []
        for col, _, decimals in SUMMARY_HEADERS:
            v = rec.get(col)
            if decimals is not None and isinstance(v, (int, float)) and v is not None:
                v = round(float(v), decimals) if decimals else int(round(v))
            values.append(v)
        marks = _flagged_columns(rec.get("flags"))
        for ws in (ws_runs,):
            ws.append(values)
            r = next_row[id(ws)]
            next_row[id(ws)] = r + 1
            for i, fmt in numeric:
                if values[i - 1] is not None:
                    ws.cell(r, i).number_format = fmt
            for col, kind in marks.items():
                if col in where:
                    ws.cell(r, where[col]).fill = fills[kind]
            status = ws.cell(r, status_col)
            if rec.get("status") == FAILS or rec.get("status") == NOT_PROCESSED:
                status.fill = fills["fail"]
            elif rec.get("checks_marginal"):
                status.fill = fills["marginal"]
    ws_runs.auto_filter.ref = ws_runs.dimensions
    about = wb.create_sheet("about")
    spec_names = sorted({str(x) for x in table["spec"].dropna().unique()}) if "spec" in table else []
    counts = counts or {}
    lines = [
        ("Specification applied", ", ".join(spec_names) or "none"),
        ("Specification source", (profile or {}).get("source") or ""),
        ("Runs in this folder", len(table)),
        ("Processed in this batch", counts.get("processed", "")),
        ("Up to date (not processed again)", counts.get("up_to_date", "")),
        ("From earlier batches", counts.get("earlier", "")),
        ("Not processed", counts.get("failed", "")),
        ("Red cell", "a specification check failed (value beyond the limit by more than "
                     "its uncertainty); red status: fails the specification or not processed"),
        ("Amber cell", "marginal: the limit lies within the value's uncertainty"),
        ("Flagged runs", "filter the flags column of the runs sheet (non-blank); a flag names "
                         "the property and the limit, ~ marks a marginal check"),
        ("Calculated values", "RON, MON, DVPE, density and evaporated volumes are estimates "
                              "from the composition, not results of the standard test methods"),
        ("Safety", "petrol is highly flammable; benzene is a human carcinogen"),
        ("Release", "results are drafts until an authorised person reviews and releases them"),
    ]
    for key, value in lines:
        about.append([key, value])
        about.cell(about.max_row, 1).font = bold
    about.column_dimensions["A"].width = 34
    about.column_dimensions["B"].width = 100
    return wb


def write_summary(table, out_dir: Path, profile: dict | None,
                  trend_quantities: list[str]) -> list[Path]:
    """summary.csv (machine column names), summary.xlsx (for people) and trend charts.

    Every file is written atomically; text cells are made inert (``dha.safety``).
    """
    from dha.safety import save_workbook

    written = []
    csv_path = out_dir / "summary.csv"
    atomic_write_text(csv_path, inert_frame(table).to_csv(index=False), newline="")
    written.append(csv_path)
    xlsx_path = out_dir / "summary.xlsx"
    save_workbook(summary_workbook(table, profile, table.attrs.get("counts")), xlsx_path)
    written.append(xlsx_path)
    written += write_trends(table, out_dir, profile, trend_quantities)
    return written


_TREND_UNITS = {"benzene_vol_pct": "benzene [% v/v]", "ron": "RON [-]", "mon": "MON [-]",
                "aromatics_vol_pct": "aromatics [% v/v]", "olefins_vol_pct": "olefins [% v/v]",
                "oxygen_mass_pct": "oxygen [% m/m]", "dvpe_kpa": "DVPE [kPa]",
                "density_kg_m3": "density at 15 °C [kg/m³]", "ethanol_vol_pct": "ethanol [% v/v]",
                "e70_vol_pct": "E70 [% v/v]", "e100_vol_pct": "E100 [% v/v]",
                "unidentified_mass_pct": "unidentified [% m/m]"}


def _safe_name(text: str) -> str:
    return re.sub(r"[^\w.-]+", "_", str(text)).strip("_") or "none"


def draw_trend(times, values, limits: list[dict], title: str, ylabel: str, path: Path) -> Path:
    """One trend chart: values against injection time (or run order), limits labelled inside.

    ``times`` are datetimes (NaT where unknown: then the x axis is the run order); ``limits``
    are the profile's limits of this quantity ({"kind", "value"}). Runs beyond a limit are
    ringed. No per-run labels: the chart costs the same for 10 runs or 10,000.
    """
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    import numpy as np
    import pandas as pd

    values = np.asarray(values, dtype=float)
    times = pd.to_datetime(pd.Series(times), errors="coerce")
    by_time = bool(times.notna().all()) and len(times) > 0
    x = times.to_numpy() if by_time else np.arange(1, len(values) + 1)
    fig, ax = plt.subplots(figsize=(8, 3.6))
    many = len(values) > 200          # markers on every point cost more than they show
    ax.plot(x, values, marker="" if many else "o", ms=5, lw=0.8 if many else 1.0,
            color="#1f5f8b")
    outside = np.zeros(len(values), dtype=bool)
    for lim in limits:
        outside |= (values < lim["value"]) if lim["kind"] == "min" else (values > lim["value"])
    if outside.any():
        ax.plot(x[outside], values[outside], ls="none", marker="o", ms=4 if many else 8,
                mfc="none", mec="#b03a2e", mew=1.0 if many else 1.4, label="beyond a limit")
        ax.legend(loc="upper left", fontsize=7, frameon=False)
    finite = values[np.isfinite(values)]
    span = [*finite, *(lim["value"] for lim in limits)]
    if span:
        lo, hi = min(span), max(span)
        pad = 0.08 * (hi - lo) if hi > lo else max(abs(hi) * 0.05, 0.5)
        ax.set_ylim(lo - pad, hi + 2 * pad)     # every limit line and its label inside
    for lim in limits:
        ax.axhline(lim["value"], color="#b03a2e", ls="--", lw=1)
        word = "minimum" if lim["kind"] == "min" else "maximum"
        ax.text(0.99, lim["value"], f"limit: {word} {lim['value']:g}", transform=ax.get_yaxis_transform(),
                ha="right", va="bottom" if lim["kind"] == "max" else "top", fontsize=7,
                color="#b03a2e", bbox={"facecolor": "white", "edgecolor": "none", "alpha": 0.7,
                                       "pad": 1})
    ax.set_ylabel(ylabel)
    ax.set_xlabel("injection time" if by_time else "run (input order)")
    if by_time:
        fig.autofmt_xdate()
    else:
        from matplotlib.ticker import MaxNLocator
        ax.xaxis.set_major_locator(MaxNLocator(integer=True))
    ax.set_title(title, fontsize=9)
    ax.grid(alpha=0.3)
    # fixed margins (room for the rotated dates) instead of tight_layout, which draws the
    # whole figure once more; fast PNG compression: the chart costs 60 % of the time it did
    fig.subplots_adjust(left=0.10, right=0.98, top=0.90, bottom=0.24 if by_time else 0.14)
    write_via_temp(path, lambda tmp: fig.savefig(tmp, dpi=100, format="png",
                                                 pil_kwargs={"compress_level": 1}))
    plt.close(fig)
    return path


def profile_limits(spec: str | None, key: str, profile: dict | None = None) -> list[dict]:
    """The limits of ``key`` in profile ``spec`` (``profile`` if given; [] if none)."""
    if profile is None and spec:
        from dha import specs
        try:
            profile = specs.load_profile(spec)
        except DhaError:
            profile = None
    return [lim for lim in (profile or {}).get("limits", []) if lim["quantity"] == key]


def write_trends(table, out_dir: Path, profile: dict | None,
                 trend_quantities: list[str]) -> list[Path]:
    """One trend chart per product (specification profile) and quantity, limits labelled.

    Files: ``trend_<profile>__<quantity>.png`` (``no-spec`` for runs checked against none).
    """
    import pandas as pd

    ok = table[~is_failure(table)].copy()
    if ok.empty:
        return []
    ok["_time"] = pd.to_datetime(ok["injection_time"], errors="coerce", format="mixed")
    ok["_spec"] = ok["spec"].fillna("no-spec").astype(str)
    written = []
    for spec, runs in ok.groupby("_spec", sort=True):
        runs = runs.sort_values(["_time", "input"], na_position="last", kind="stable")
        prof = profile if profile is not None and profile.get("name") == spec else None
        for key in trend_quantities:
            if key not in runs or runs[key].isna().all():
                continue
            label = _TREND_UNITS.get(key, key)
            limits = profile_limits(None if spec == "no-spec" else spec, key, prof)
            title = f"{label}: {len(runs)} runs, {'profile ' + spec if spec != 'no-spec' else 'no specification'}"
            path = out_dir / f"trend_{_safe_name(spec)}__{key}.png"
            written.append(draw_trend(runs["_time"], runs[key], limits, title, label, path))
    return written
