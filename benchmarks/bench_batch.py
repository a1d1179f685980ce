"""Batch speed and memory: generated 500-peak named runs, JSON only, ``dha batch --jobs 2``.

Prints, for the machine it runs on (say how loaded it was when quoting the figures):

* ``dha --help`` wall time (best of 3, a fresh process each);
* per-stage times of one run in a warm process (read, identify, quantify, groups, each
  property model, result, checks, JSON), mean over a few runs;
* the batch: runs/min for ``dha batch DIR -o OUT --jobs 2`` over 100 and N runs (default
  1,000), each in a fresh output folder, with the ratio to the pandas read floor (the time
  ``pandas.read_csv`` takes only to read the same files, one process) and the peak memory of
  the whole process tree (driver + workers, sampled every 0.1 s);
* a re-run over the finished folder (every run up to date);
* ``write_summary`` on the N-run summary table.

Targets (issue 15): >= 1,000 runs/min on a 2-core machine, peak memory flat (+-10 %) from 100 to
1,000 runs, ``dha --help`` < 0.2 s, ``write_summary`` < 2 s at 1,000 runs.

The runs are synthetic (dha.synthetic): plumbing and speed only, never accuracy.

    .venv/bin/python benchmarks/bench_batch.py [N]
"""
from __future__ import annotations

import os
import subprocess
import sys
import tempfile
import threading
import time
from pathlib import Path

import numpy as np
import pandas as pd

N_PEAKS = 500
N_DISTINCT = 12


def make_runs(folder: Path, n: int) -> list[Path]:
    """``n`` CSV exports of 500 named peaks (12 distinct synthetic runs, copied under new names)."""
    from dha import synthetic
    from dha.library import load_library

    lib = load_library()
    tables = []
    for i in range(N_DISTINCT):
        kind = ("reformate", "alkylate", "e10")[i % 3]
        comp = synthetic.example_composition(kind, lib, seed=7 + i)
        peaks, _ = synthetic.synthetic_run(comp, lib, seed=i, names=True, coelute=False,
                                           merge_unresolved=False)
        extra = max(0, N_PEAKS - len(peaks))
        if extra:
            peaks, _ = synthetic.synthetic_run(comp, lib, seed=i, names=True, coelute=False,
                                               merge_unresolved=False, extra_unknowns=extra)
        peaks = peaks.head(N_PEAKS)
        text = "Sample ID,BENCH-{i}\nInjection time,2026-03-{d:02d} 10:00:00\n\n".format(
            i=i, d=1 + i % 28)
        text += peaks[["rt_min", "area", "name"]].rename(
            columns={"rt_min": "Retention time [min]", "area": "Area", "name": "Name"}
        ).to_csv(index=False)
        tables.append(text)
    folder.mkdir(parents=True, exist_ok=True)
    paths = []
    for k in range(n):
        p = folder / f"run{k:05d}.csv"
        p.write_text(tables[k % N_DISTINCT].replace("BENCH-", f"B{k:05d}-", 1))
        paths.append(p)
    return paths


def pandas_floor(paths: list[Path]) -> float:
    """Seconds ``pandas.read_csv`` takes to read every file (skipping the metadata lines)."""
    t0 = time.perf_counter()
    for p in paths:
        pd.read_csv(p, skiprows=3)
    return time.perf_counter() - t0


def _tree_rss_kb(pid: int) -> int:
    total, todo = 0, [pid]
    while todo:
        p = todo.pop()
        try:
            with open(f"/proc/{p}/status") as fh:
                for line in fh:
                    if line.startswith("VmRSS:"):
                        total += int(line.split()[1])
            for task in os.listdir(f"/proc/{p}/task"):
                with open(f"/proc/{p}/task/{task}/children") as fh:
                    todo += [int(c) for c in fh.read().split()]
        except (OSError, ValueError):
            continue
    return total


def timed_batch(src: Path, out: Path, jobs: int = 2) -> tuple[float, int, str, float]:
    """(wall seconds, peak RSS of the process tree in kB, last line of output, CPU seconds
    of the whole process tree)."""
    import resource
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    cmd = [sys.executable, "-m", "dha", "batch", str(src), "-o", str(out), "--jobs", str(jobs),
           "--format", "json"]
    peak = [0]
    t0 = time.perf_counter()
    proc = subprocess.Popen(cmd, stdout=subprocess.PIPE, stderr=subprocess.DEVNULL, text=True)

    def sample():
        while proc.poll() is None:
            peak[0] = max(peak[0], _tree_rss_kb(proc.pid))
            time.sleep(0.1)

    thread = threading.Thread(target=sample, daemon=True)
    thread.start()
    out_text, _ = proc.communicate()
    wall = time.perf_counter() - t0
    thread.join()
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    cpu = (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)
    lines = [l for l in out_text.splitlines() if " runs in " in l]
    return wall, peak[0], lines[-1] if lines else out_text[-300:], cpu


def _best_of_3(cmd: list[str]) -> tuple[float, float]:
    """(best wall s, CPU s of that run) of a fresh process."""
    import resource
    best = (1e9, 0.0)
    for _ in range(3):
        before = resource.getrusage(resource.RUSAGE_CHILDREN)
        t0 = time.perf_counter()
        subprocess.run(cmd, stdout=subprocess.DEVNULL, check=True)
        wall = time.perf_counter() - t0
        after = resource.getrusage(resource.RUSAGE_CHILDREN)
        cpu = (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)
        best = min(best, (wall, cpu))
    return best


def help_time() -> tuple[float, float]:
    subprocess.run([sys.executable, "-m", "dha", "--help"], stdout=subprocess.DEVNULL)  # cache
    return _best_of_3([sys.executable, "-m", "dha", "--help"])


def bare_start() -> tuple[float, float]:
    return _best_of_3([sys.executable, "-c", "pass"])


def machinery_times(paths: list[Path], n: int = 8) -> dict[str, float]:
    """Mean CPU ms per run of what the batch adds around the per-run compute: hashing, the
    up-to-date check and writing the JSON (``process_task`` minus ``process_file_stems``),
    sending the outcome back to the driver (pickle) and storing it in results.sqlite."""
    import pickle
    import shutil

    from dha import batch, pipeline, specs
    from dha.library import load_library
    from dha.results_db import Recorder
    from dha.settings import load_settings

    settings = load_settings()
    lib = load_library()
    spec = settings["report"]["spec"]
    with tempfile.TemporaryDirectory() as tmp:
        out = Path(tmp)
        plan = batch.plan_batch(paths[: n + 1], out)
        job = batch.Job(out_dir=str(out), formats=("json",), spec=spec, settings=settings,
                        library_dir=None, overwrite=True,
                        settings_sha256=batch.settings_sha256(settings, specs.load_profile(spec)),
                        unidentified_flag=5.0)
        batch.process_task(plan.tasks[0], job)           # warm-up
        tasks = plan.tasks[1:]
        c0 = time.process_time()
        made = [pipeline.process_file_stems(Path(t.path), settings, lib, spec=spec)
                for t in tasks]
        compute = (time.process_time() - c0) / len(tasks)
        # process_task with the compute done already: what the batch adds around it
        real = pipeline.process_file_stems
        ready = {t.path: m for t, m in zip(tasks, made)}
        pipeline.process_file_stems = lambda path, *a, **k: ready[str(path)]
        try:
            c0 = time.process_time()
            outcomes = [batch.process_task(t, job) for t in tasks]
            around = (time.process_time() - c0) / len(tasks)
        finally:
            pipeline.process_file_stems = real
        c0 = time.process_time()
        for o in outcomes:
            pickle.loads(pickle.dumps(o, protocol=pickle.HIGHEST_PROTOCOL))
        send = (time.process_time() - c0) / len(tasks)
        c0 = time.process_time()
        rec = Recorder(out)
        for o in outcomes:
            for x in o:
                rec(x)
        rec.close()
        db = (time.process_time() - c0) / len(tasks)
        shutil.rmtree(out, ignore_errors=True)
    return {"per-run compute (process_file_stems)": compute * 1000,
            "batch around it (hash, up-to-date check, JSON)": around * 1000,
            "outcome to the driver (pickle both ways)": send * 1000,
            "results.sqlite (grouped transactions)": db * 1000}


def stage_times(paths: list[Path], n: int = 6) -> dict[str, float]:
    """Mean ms per stage of one run, warm process."""
    import importlib

    from dha import pipeline, specs
    from dha.groups import group_totals
    from dha.identify import identify
    from dha.library import load_library
    from dha.quantify import quantify_run
    from dha.reader import read_input
    from dha.result import build_result, dumps
    from dha.settings import load_settings
    from dha import properties

    settings = load_settings()
    lib = load_library()
    profile = specs.load_profile(settings["report"]["spec"])
    acc: dict[str, float] = {}

    def tick(name, t0):
        acc[name] = acc.get(name, 0.0) + (time.perf_counter() - t0) * 1000
        return time.perf_counter()

    pipeline.process_file(paths[0], settings, lib)     # warm-up
    for p in paths[:n]:
        t = time.perf_counter()
        run = read_input(p, settings)[0]
        t = tick("read", t)
        ident = identify(run.table, lib, settings)
        attrs = dict(ident.attrs)
        t = tick("identify", t)
        quant = quantify_run(run, ident, lib, settings)
        t = tick("quantify", t)
        groups = group_totals(quant.table, lib, settings)
        t = tick("groups", t)
        props = []
        for name in properties.MODELS:
            module = importlib.import_module(name)
            props.append((name.rsplit(".", 1)[-1], module.compute(quant.table, lib, settings)))
            t = tick("property " + name.rsplit(".", 1)[-1], t)
        result = build_result(run, quant, groups, props, lib, settings,
                              identification=attrs or None)
        t = tick("build result", t)
        from dha.explain import result_keys
        result_keys(quant.table, lib, settings, result["properties"])
        t = tick("octane contributions", t)
        specs.check(result, profile, lib)
        t = tick("checks", t)
        dumps(result)
        tick("JSON text", t)
    return {k: v / n for k, v in acc.items()}


def main() -> None:
    n = int(sys.argv[1]) if len(sys.argv) > 1 else 1000
    print(f"machine: {os.cpu_count()} cores; load average {os.getloadavg()[0]:.1f} at start "
          "(other processes share the cores: figures are for this load)")
    (h_wall, h_cpu), (b_wall, b_cpu) = help_time(), bare_start()
    print(f"dha --help: {h_wall:.3f} s wall, {h_cpu:.3f} s CPU (best of 3, fresh process; "
          f"target < 0.2 s); bare interpreter start-up: {b_wall:.3f} s wall, {b_cpu:.3f} s CPU")
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        paths = make_runs(tmp / "runs", n)
        print(f"{n} generated runs of {N_PEAKS} named peaks (synthetic, {N_DISTINCT} distinct)")
        stages = stage_times(paths)
        total = sum(stages.values())
        print("per-stage times of one run, warm process [ms]:")
        for k, v in stages.items():
            print(f"  {k:<28} {v:8.1f}")
        print(f"  {'total':<28} {total:8.1f}")
        print("batch machinery per run, warm process, CPU [ms]:")
        for k, v in machinery_times(paths).items():
            print(f"  {k:<50} {v:8.1f}")
        floor = pandas_floor(paths)
        print(f"pandas read floor: {floor:.2f} s for {n} files ({floor / n * 1000:.2f} ms/file)")
        small = tmp / "runs100"
        small.mkdir()
        for p in paths[:100]:
            os.link(p, small / p.name)
        wall100, rss100, line100, cpu100 = timed_batch(small, tmp / "out100")
        print(f"batch 100 runs --jobs 2: {wall100:.1f} s, {100 / wall100 * 60:.0f} runs/min, "
              f"CPU {cpu100 / 100 * 1000:.0f} ms/run, peak memory {rss100 / 1024:.0f} MB  "
              f"[{line100.strip()}]")
        wall, rss, line, cpu = timed_batch(tmp / "runs", tmp / "out")
        print(f"batch {n} runs --jobs 2: {wall:.1f} s, {n / wall * 60:.0f} runs/min, "
              f"{wall / floor:.0f}x the pandas read floor, peak memory {rss / 1024:.0f} MB "
              f"({(rss / rss100 - 1) * 100:+.0f} % against 100 runs)  [{line.strip()}]")
        print(f"  CPU of the process tree: {cpu:.0f} s = {cpu / n * 1000:.0f} ms/run; on 2 "
              f"otherwise idle cores that is at most {2 * 60 * n / cpu:.0f} runs/min "
              "(an estimate from CPU time, not a measurement)")
        wall2, rss2, line2, cpu2 = timed_batch(tmp / "runs", tmp / "out")
        print(f"re-run, all up to date: {wall2:.1f} s, {n / wall2 * 60:.0f} runs/min, "
              f"CPU {cpu2 / n * 1000:.0f} ms/run  [{line2.strip()}]")
        from dha import batch
        from dha.settings import load_settings
        from dha import specs
        table = pd.read_csv(tmp / "out" / "summary.csv")
        settings = load_settings()
        profile = specs.load_profile(settings["report"]["spec"])
        (tmp / "warm").mkdir()
        batch.write_summary(table.head(10), tmp / "warm", profile,
                            settings["batch"]["trend_quantities"])     # imports, fonts
        t0, c0 = time.perf_counter(), time.process_time()
        batch.write_summary(table, tmp / "out", profile, settings["batch"]["trend_quantities"])
        print(f"write_summary at {len(table)} runs: {time.perf_counter() - t0:.2f} s wall, "
              f"{time.process_time() - c0:.2f} s CPU (summary.csv, summary.xlsx, "
              f"{len(settings['batch']['trend_quantities'])} trend charts; target < 2 s)")


if __name__ == "__main__":
    main()
